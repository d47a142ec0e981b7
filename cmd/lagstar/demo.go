package main

import (
	"fmt"
	"io"

	"github.com/lagstar/lagstar/examples"
	"github.com/spf13/cobra"
)

// demoExample is one bundled, invented example the demo can fit.
type demoExample struct {
	model string // its model file's name inside examples/
	files func() (modelYAML, dataCSV []byte)
	intro string
}

var demoExamples = map[string]demoExample{
	"sleepdiary": {"sleepdiary/model.yaml", examples.SleepDiary,
		"Example (invented data): a nurses' sleep diary, 120 nurses x up to 42 evenings;\n" +
			"rested = how rested they felt (1-5), headache = whether they had one (no/yes).\n"},
	"wristpain": {"wristpain/model.yaml", examples.WristPain,
		"Example (invented data, wide layout): a bakery chain's staff, 300 employees x 6 yearly waves (2019-2024);\n" +
			"pain = wrist pain in the past year (no/yes), workload = how heavy their work was (1-4).\n"},
}

func newDemoCmd(stdout, stderr io.Writer) *cobra.Command {
	o := &fitOptions{}
	var example string
	cmd := &cobra.Command{
		Use:   "demo",
		Short: "Fit a bundled, invented example and print the summary",
		Long: `demo fits a bundled example, by default an invented diary of 120 nurses
reporting for up to 42 days how rested they felt (1-5) and whether they had
a headache (no/yes), with random intercepts and cross-lags. --example
wristpain fits the invented yearly wrist-pain panel of a bakery chain's
staff, stored in wide layout. Nothing is written unless --out is given.`,
		Args: args(cobra.NoArgs),
		RunE: func(cmd *cobra.Command, args []string) error {
			if err := o.validate(cmd); err != nil {
				return err
			}
			ex, ok := demoExamples[example]
			if !ok {
				return &usageError{fmt.Errorf("--example: expected sleepdiary or wristpain, got %q", example)}
			}
			o.intro = ex.intro
			m, d := ex.files()
			fo := o.fitOptions(cmd)
			fo.ModelPath, fo.ModelRaw, fo.DataRaw, fo.OutDir = ex.model, m, d, o.out
			return runFit(cmd, fo, o, stdout, stderr)
		},
	}
	o.bind(cmd)
	cmd.Flags().StringVar(&o.out, "out", "", "also write the run folder here")
	cmd.Flags().StringVar(&example, "example", "sleepdiary", "which example: sleepdiary or wristpain (wide layout)")
	return cmd
}
