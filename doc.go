// Package lagstar is the root of the lagstar module; it holds only
// repository-wide tests. The program is in cmd/lagstar.
package lagstar
