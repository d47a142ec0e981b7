package main

import (
	"bytes"
	"fmt"
	"github.com/lagstar/lagstar/diagnostics"
	"io"

	"github.com/lagstar/lagstar/fit"
	"github.com/lagstar/lagstar/report"
	"github.com/lagstar/lagstar/runfolder"
	"github.com/spf13/cobra"
)

func newReportCmd(stdout, stderr io.Writer) *cobra.Command {
	var table, out string
	cmd := &cobra.Command{
		Use:   "report RUN_DIR [--table md|latex|csv] [--out FILE]",
		Short: "Write an HTML report, or a table for a manuscript, of a finished fit",
		Long: `report reads a fit's output folder. Without --table it writes
RUN_DIR/report.html: one self-contained page (figures embedded, no network)
with the model and data, warnings, cautions, the estimates, trace, rank and
density plots, and the posterior predictive checks when lagstar check has
been run. With --table it writes the key estimates, ready to paste:
thresholds, random-intercept variances and correlations, carry-over and
cross-lags (raw and within-person standardized), residual correlations and
latent ICCs, each with its posterior mean and central interval (md:
Markdown, latex: a tabular, csv: one row per quantity).`,
		Example: "  lagstar report diary-fit\n  lagstar report diary-fit --table md\n  lagstar report diary-fit --table latex --out table1.tex",
		Args:    args(cobra.ExactArgs(1)),
		RunE: func(cmd *cobra.Command, args []string) error {
			switch table {
			case "md", "latex", "csv":
			case "":
				path, s, err := fit.HTMLReport(args[0])
				if err != nil {
					return err
				}
				warnUnfinished(stderr, args[0], s)
				fmt.Fprintf(stderr, "wrote %s\n", path)
				return nil
			default:
				return &usageError{fmt.Errorf("--table: expected md, latex or csv, got %q", table)}
			}
			s, err := runfolder.ReadSummary(args[0])
			if err != nil {
				return err
			}
			warnUnfinished(stderr, args[0], s)
			var b bytes.Buffer
			if err := report.WriteManuscriptTable(&b, s, table); err != nil {
				return err
			}
			if out == "" {
				_, err = stdout.Write(b.Bytes())
				return err
			}
			if err := runfolder.WriteAtomic(out, b.Bytes()); err != nil {
				return err
			}
			fmt.Fprintf(stderr, "wrote %s\n", out)
			return nil
		},
	}
	cmd.Flags().StringVar(&table, "table", "", "table format: md, latex or csv")
	cmd.Flags().StringVar(&out, "out", "", "write the table to this file instead of standard output")
	return cmd
}

// warnUnfinished says on stderr that the run behind a report is
// incomplete or did not converge (the report itself says so too).
func warnUnfinished(stderr io.Writer, dir string, s *report.Summary) {
	if !s.Complete {
		fmt.Fprintf(stderr, "warning: %s: the run was interrupted and is incomplete; finish it with lagstar fit --resume %s\n", dir, dir)
	}
	if note := diagnostics.UnconvergedNote(s.Unconverged, "Do not report these results"); note != "" {
		fmt.Fprintf(stderr, "warning: %s: %s\n", dir, note)
	}
}
