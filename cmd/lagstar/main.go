// Command lagstar fits Bayesian models of ordinal and binary panel data:
// random intercepts, carry-over and cross-lagged paths on latent responses.
package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"syscall"

	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/sampler"
	"github.com/spf13/cobra"
)

// Exit statuses.
const (
	exitOK       = 0
	exitFailure  = 1
	exitBadInput = 2
)

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	code := run(ctx, os.Args[1:], os.Stdout, os.Stderr)
	stop()
	os.Exit(code)
}

// run executes the command line args and returns the exit status.
func run(ctx context.Context, args []string, stdout, stderr io.Writer) (code int) {
	// No panic reaches the user as a Go trace: it is an internal error,
	// exit 1 (the fit, when one was running, has marked its folder failed).
	defer func() {
		if p := recover(); p != nil {
			fmt.Fprintf(stderr, "lagstar: %v\n", &sampler.InternalError{Value: p})
			code = exitFailure
		}
	}()
	root := newRootCmd(stdout, stderr)
	root.SetArgs(args)
	err := root.ExecuteContext(ctx)
	if err == nil {
		return exitOK
	}
	fmt.Fprintf(stderr, "lagstar: %v\n", err)
	var ue *usageError
	if model.IsInputError(err) || errors.As(err, &ue) {
		return exitBadInput
	}
	return exitFailure
}

// usageError marks a mistake in the command line itself.
type usageError struct{ err error }

func (e *usageError) Error() string { return e.err.Error() }
func (e *usageError) Unwrap() error { return e.err }

func newRootCmd(stdout, stderr io.Writer) *cobra.Command {
	root := &cobra.Command{
		Use:   "lagstar",
		Short: "Bayesian random-intercept cross-lagged models for ordinal and binary panels",
		Long: `lagstar separates stable between-person differences (random intercepts) from
within-person carry-over and cross-lagged effects in repeated categorical
measures (Likert items, yes/no symptoms), without treating categories as
continuous. It fits the model by Gibbs sampling on latent responses and
reports convergence diagnostics with every estimate.`,
		SilenceUsage:  true,
		SilenceErrors: true,
	}
	root.SetOut(stdout)
	root.SetErr(stderr)
	root.SetFlagErrorFunc(func(c *cobra.Command, err error) error {
		return &usageError{fmt.Errorf("%w (see %s --help)", err, c.CommandPath())}
	})
	root.AddCommand(newFitCmd(stdout, stderr), newDemoCmd(stdout, stderr), newSimulateCmd(stdout, stderr), newReportCmd(stdout, stderr), newCheckCmd(stdout, stderr), newCompareCmd(stdout, stderr))
	return root
}

// args wraps a cobra argument check so that a wrong number of arguments is
// a usage error (exit status 2).
func args(check cobra.PositionalArgs) cobra.PositionalArgs {
	return func(cmd *cobra.Command, a []string) error {
		if err := check(cmd, a); err != nil {
			return &usageError{fmt.Errorf("%w (see %s --help)", err, cmd.CommandPath())}
		}
		return nil
	}
}
