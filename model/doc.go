// Package model reads and checks what a user asks lagstar to fit: the YAML
// model file, the long-format CSV panel it points to, and the identification
// rules that make the requested model estimable. It is the only package that
// opens input files.
package model
