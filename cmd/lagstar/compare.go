package main

import (
	"fmt"

	"github.com/lagstar/lagstar/diagnostics"
	"io"

	"github.com/lagstar/lagstar/compare"
	"github.com/lagstar/lagstar/fit"
	"github.com/spf13/cobra"
)

func newCompareCmd(stdout, stderr io.Writer) *cobra.Command {
	o := fit.CompareOptions{}
	cmd := &cobra.Command{
		Use:   "compare RUN_DIR RUN_DIR...",
		Short: "Compare fitted models by person-level PSIS-LOO and WAIC",
		Long: `compare ranks models fitted to the same data by how well they predict a
new person's whole record: the person-level likelihood integrates out the
random intercepts and within-person paths (GHK simulator, quasi-random points,
the same points for every posterior draw), then PSIS-LOO with Pareto k
diagnostics and WAIC, and elpd differences from the best model with their
standard errors. Continuous outcomes enter through their normal density.`,
		Example: "  lagstar compare own-fit cross-fit --out comparison.json",
		Args:    args(cobra.MinimumNArgs(2)),
		RunE: func(cmd *cobra.Command, args []string) error {
			o.RunDirs = args
			var bar *chainProgress
			if isTerminal(stderr) {
				bar = newChainProgress(stderr, "model")
				o.Progress = bar.update
			}
			o.Ctx = cmd.Context()
			res, err := fit.Compare(o)
			if bar != nil {
				bar.finish() // before the table: it clears its own lines
			}
			if err != nil {
				return err
			}
			for _, r := range res {
				if note := diagnostics.UnconvergedNote(r.Unconverged, "Its elpd is not reliable and the ranking may change"); note != "" {
					fmt.Fprintf(stderr, "warning: model %s: %s\n", r.Name, note)
				}
			}
			return compare.WriteTable(stdout, res)
		},
	}
	cmd.Flags().IntVar(&o.Draws, "draws", 200, "posterior draws per model")
	cmd.Flags().IntVar(&o.GHKPoints, "ghk-points", 300, "quasi-random points of the GHK simulator")
	cmd.Flags().StringVar(&o.Out, "out", "", "also write the comparison as JSON to this file")
	return cmd
}
