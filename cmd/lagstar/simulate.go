package main

import (
	"fmt"
	"io"

	"github.com/lagstar/lagstar/fit"
	"github.com/spf13/cobra"
)

func newSimulateCmd(stdout, stderr io.Writer) *cobra.Command {
	o := fit.SimulateOptions{}
	cmd := &cobra.Command{
		Use:   "simulate MODEL.yaml --truth TRUTH.yaml --persons N --occasions T --out DATA.csv",
		Short: "Generate a panel from a model file's structure and chosen parameter values",
		Long: `simulate draws a long-format CSV (columns named as in the model file's data
section) from the model the file describes, with the parameter values of a
truth file:

  thresholds:        {mood: [-1, 0, 1, 2], pain: [0.8]}
  means:             {steps: 50}            # one value, or one per occasion
  random_intercepts: {variances: {mood: 0.6, pain: 0.5},
                      correlations: [{outcomes: [mood, pain], value: -0.3}]}
  paths:             [{from: mood, to: mood, value: 0.4}, {from: mood, to: pain, value: -0.1}]
  innovations:       {correlations: [{outcomes: [mood, pain], value: 0.2}]}
  first_occasion:    {correlations: [{outcomes: [mood, pain], value: 0.2}]}
  missing:           0.05                   # share of cells written as the model's
                                            # first missing code (default: empty)

Latent variances of categorical outcomes are 1 (identification); continuous
outcomes need their variances. Use it to check a design before collecting data.`,
		Example: "  lagstar simulate diary.yaml --truth truth.yaml --persons 150 --occasions 30 --out sim.csv --seed 3",
		Args:    args(cobra.ExactArgs(1)),
		RunE: func(cmd *cobra.Command, args []string) error {
			o.ModelPath = args[0]
			if o.Out == "" {
				return &usageError{fmt.Errorf("--out: give the CSV file to write")}
			}
			if o.TruthPath == "" {
				return &usageError{fmt.Errorf("--truth: give the truth file with the parameter values")}
			}
			if _, err := fit.Simulate(o); err != nil {
				return err
			}
			fmt.Fprintf(stderr, "wrote %s: %d persons x %d occasions\n", o.Out, o.Persons, o.Occasions)
			return nil
		},
	}
	f := cmd.Flags()
	f.StringVar(&o.TruthPath, "truth", "", "truth file with the parameter values (YAML)")
	f.IntVar(&o.Persons, "persons", 100, "number of persons")
	f.IntVar(&o.Occasions, "occasions", 10, "number of occasions")
	f.StringVar(&o.Out, "out", "", "CSV file to write")
	f.Uint64Var(&o.Seed, "seed", 1, "random seed")
	return cmd
}
