// Package report turns a finished run into what people read and scripts
// parse: the summary (summary.json), the draws (draws.csv), the run record
// (run.json) and the grouped terminal table with convergence warnings.
package report
