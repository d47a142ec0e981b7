package main

import (
	"fmt"

	"github.com/lagstar/lagstar/diagnostics"
	"io"

	"github.com/lagstar/lagstar/check"
	"github.com/lagstar/lagstar/fit"
	"github.com/spf13/cobra"
)

func newCheckCmd(stdout, stderr io.Writer) *cobra.Command {
	o := fit.CheckOptions{}
	cmd := &cobra.Command{
		Use:   "check RUN_DIR",
		Short: "Posterior predictive checks of a finished fit",
		Long: `check replicates the data from posterior draws of a fit (new random
intercepts and new within-person paths each time), and compares with the
observed data: category shares per occasion, lag-1 and lag-2 transitions,
run lengths in one category, the spread of person means, same-occasion and
lagged joint shares of pairs of outcomes (for continuous outcomes: means,
spread of person means, lag-1 correlation). It prints a table and writes
check.json into the run folder.`,
		Example: "  lagstar check diary-fit",
		Args:    args(cobra.ExactArgs(1)),
		RunE: func(cmd *cobra.Command, args []string) error {
			o.RunDir = args[0]
			o.Ctx = cmd.Context()
			var bar *chainProgress
			if isTerminal(stderr) {
				bar = newChainProgress(stderr, "replicates")
				o.Progress = func(done, total int) { bar.update(0, 1, done, total) }
			}
			res, err := fit.Check(o)
			if bar != nil {
				bar.finish() // before the table: it clears its own lines
			}
			if err != nil {
				return err
			}
			if note := diagnostics.UnconvergedNote(res.Unconverged, "Its predictive checks describe draws that have not settled"); note != "" {
				fmt.Fprintf(stderr, "warning: %s: %s\n", o.RunDir, note)
			}
			return check.WriteTable(stdout, res)
		},
	}
	cmd.Flags().IntVar(&o.Draws, "draws", 400, "number of posterior draws to replicate from")
	cmd.Flags().Uint64Var(&o.Seed, "seed", 1, "random seed for the replicates")
	return cmd
}
