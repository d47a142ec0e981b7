package main

import (
	"io"

	"github.com/lagstar/lagstar/examples"
	"github.com/lagstar/lagstar/fit"
	"github.com/spf13/cobra"
)

func newDemoCmd(stdout, stderr io.Writer) *cobra.Command {
	o := &fitOptions{intro: "Example (invented data): a nurses' sleep diary, 120 nurses x up to 42 evenings;\n" +
		"rested = how rested they felt (1-5), headache = whether they had one (no/yes).\n"}
	cmd := &cobra.Command{
		Use:   "demo",
		Short: "Fit the bundled, invented sleep-diary example and print the summary",
		Long: `demo fits the bundled example: an invented diary of 120 nurses reporting for
up to 42 days how rested they felt (1-5) and whether they had a headache
(no/yes), with random intercepts and cross-lags. Nothing is written unless
--out is given.`,
		Args: args(cobra.NoArgs),
		RunE: func(cmd *cobra.Command, args []string) error {
			if err := o.validate(); err != nil {
				return err
			}
			m, d := examples.SleepDiary()
			fo := fit.Options{ModelPath: "sleepdiary/model.yaml", ModelRaw: m, DataRaw: d, OutDir: o.out,
				Chains: o.chains, Warmup: o.warmup, Draws: o.draws, Seed: o.seed, SeedSet: cmd.Flags().Changed("seed"), Level: o.level,
				UntilConverged: o.untilConverged, MaxDraws: o.maxDraws}
			return runFit(cmd, fo, o, stdout, stderr)
		},
	}
	o.bind(cmd)
	cmd.Flags().StringVar(&o.out, "out", "", "also write the run folder here")
	return cmd
}
