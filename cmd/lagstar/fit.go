package main

import (
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"time"

	"github.com/lagstar/lagstar/fit"
	"github.com/lagstar/lagstar/report"
	"github.com/spf13/cobra"
)

type fitOptions struct {
	out                   string
	chains, warmup, draws int
	seed                  uint64
	level                 float64
	format                string
	quiet                 bool
	untilConverged        bool
	fixedLength           bool
	maxDraws              int
	timeLimit             time.Duration
	maxMemory             string
	checkpointEvery       int
	overwrite             bool
	data                  string
	intro                 string // printed before the table (demo)
}

func newFitCmd(stdout, stderr io.Writer) *cobra.Command {
	o := &fitOptions{}
	var resume string
	cmd := &cobra.Command{
		Use:   "fit MODEL.yaml | fit --resume RUN_DIR",
		Short: "Fit the model described in a model file, or finish an interrupted fit",
		Long: `fit reads the model file and the CSV it names, checks both, samples the
chains and writes summary.json, draws.csv and run.json into the output
folder. Flags override the model file's sampler settings.

Each chain saves a checkpoint in RUN_DIR/checkpoints every so many sweeps
(--checkpoint-every) and when it is stopped (Ctrl-C, SIGTERM). A stopped
run writes what it has, marked incomplete, and exits with status 1;
fit --resume RUN_DIR finishes it with the draws an uninterrupted run with
the same seed would have given.`,
		Example: "  lagstar fit diary.yaml --out diary-fit --seed 7\n  lagstar fit --resume diary-fit",
		Args:    args(cobra.MaximumNArgs(1)),
		RunE: func(cmd *cobra.Command, args []string) error {
			if err := o.validate(cmd); err != nil {
				return err
			}
			if resume != "" {
				if len(args) > 0 {
					return &usageError{fmt.Errorf("--resume takes its settings from the run folder; give no model file (got %q)", args[0])}
				}
				for _, name := range []string{"out", "chains", "warmup", "draws", "seed", "level", "until-converged", "max-draws", "checkpoint-every", "overwrite", "data"} {
					if cmd.Flags().Changed(name) {
						return &usageError{fmt.Errorf("--%s cannot be used with --resume: the run continues with the settings in %s/run.json", name, resume)}
					}
				}
				return runFitWith(cmd, resume, o, stdout, stderr, func(progress func(chain, chains, done, total int)) (*fit.Outcome, error) {
					return fit.Resume(cmd.Context(), fit.ResumeOptions{RunDir: resume, Progress: progress})
				})
			}
			if len(args) != 1 {
				return &usageError{fmt.Errorf("fit needs a model file, or --resume RUN_DIR (see %s --help)", cmd.CommandPath())}
			}
			out := o.out
			if out == "" {
				base := strings.TrimSuffix(filepath.Base(args[0]), filepath.Ext(args[0]))
				out = base + "-fit"
			}
			fo := o.fitOptions(cmd)
			fo.ModelPath, fo.OutDir, fo.DataPath = args[0], out, o.data
			return runFit(cmd, fo, o, stdout, stderr)
		},
	}
	o.bind(cmd)
	cmd.Flags().StringVar(&o.out, "out", "", "output folder (default: the model file's name with -fit)")
	cmd.Flags().StringVar(&resume, "resume", "", "finish the interrupted fit in this run folder")
	cmd.Flags().StringVar(&o.data, "data", "", "fit this CSV instead of the model file's data.csv (e.g. a simulated panel)")
	cmd.Flags().IntVar(&o.checkpointEvery, "checkpoint-every", 0, "sweeps between chain checkpoints (default from the model file, else 500; 0: only when stopped)")
	return cmd
}

func (o *fitOptions) bind(cmd *cobra.Command) {
	f := cmd.Flags()
	f.IntVar(&o.chains, "chains", 0, "number of chains (default from the model file, else 4)")
	f.IntVar(&o.warmup, "warmup", 0, "warm-up sweeps per chain (default from the model file, else 1000)")
	f.IntVar(&o.draws, "draws", 0, "kept draws per chain (default from the model file, else 1000)")
	f.Uint64Var(&o.seed, "seed", 0, "random seed (default from the model file, else chosen and reported)")
	f.Float64Var(&o.level, "level", 0.95, "level of the central posterior intervals")
	f.StringVar(&o.format, "format", "text", "what to print: text (table) or json (summary)")
	f.BoolVar(&o.quiet, "quiet", false, "print no progress")
	f.BoolVar(&o.untilConverged, "until-converged", false, "sample until R-hat <= 1.01 and bulk/tail ESS >= 400 for every reported quantity (the default; this overrides until_converged: false in the model file)")
	f.BoolVar(&o.fixedLength, "fixed-length", false, "keep exactly --draws draws per chain (no extension rounds), whatever the diagnostics say")
	f.IntVar(&o.maxDraws, "max-draws", 0, "cap on draws per chain when sampling until converged (default from the model file, else 20000)")
	f.DurationVar(&o.timeLimit, "time-limit", 0, "when sampling until converged, start no round that would take sampling past this time (e.g. 10m, 2h; default from the model file, else none)")
	f.StringVar(&o.maxMemory, "max-memory", "", "refuse a run whose memory estimate exceeds this (e.g. 4GB; default 80% of this machine's memory)")
	f.BoolVar(&o.overwrite, "overwrite", false, "replace the lagstar run already in the --out folder (its files and figures are removed first)")
}

// fitOptions maps the sampler flags shared by fit and demo onto fit.Options.
func (o *fitOptions) fitOptions(cmd *cobra.Command) fit.Options {
	f := cmd.Flags()
	var maxMem int64
	if o.maxMemory != "" {
		maxMem, _ = fit.ParseBytes(o.maxMemory) // checked by validate
	}
	return fit.Options{MaxMemory: maxMem, Chains: o.chains, Warmup: o.warmup, WarmupSet: f.Changed("warmup"), Draws: o.draws, Seed: o.seed, SeedSet: f.Changed("seed"), Level: o.level,
		UntilConverged: o.untilConverged, FixedLength: o.fixedLength, MaxDraws: o.maxDraws, TimeLimit: o.timeLimit,
		CheckpointEvery: o.checkpointEvery, CheckpointSet: f.Changed("checkpoint-every"), Overwrite: o.overwrite}
}

// validate checks the flags that were given; a flag left out takes the
// model file's value, but a given 0 is a value like any other (0 chains
// or 0 draws are refused, not read as "the default").
func (o *fitOptions) validate(cmd *cobra.Command) error {
	set := cmd.Flags().Changed
	switch {
	case set("chains") && (o.chains < 1 || o.chains > 64):
		return &usageError{fmt.Errorf("--chains: expected a whole number from 1 to 64, got %d", o.chains)}
	case o.warmup < 0:
		return &usageError{fmt.Errorf("--warmup: expected a whole number >= 0, got %d", o.warmup)}
	case set("draws") && o.draws < 1:
		return &usageError{fmt.Errorf("--draws: expected a whole number >= 1, got %d", o.draws)}
	case !(o.level > 0 && o.level < 1):
		return &usageError{fmt.Errorf("--level: expected a number between 0 and 1, got %g", o.level)}
	case o.checkpointEvery < 0:
		return &usageError{fmt.Errorf("--checkpoint-every: expected a whole number >= 0, got %d", o.checkpointEvery)}
	case o.untilConverged && o.fixedLength:
		return &usageError{fmt.Errorf("--until-converged and --fixed-length contradict each other; give one")}
	case set("time-limit") && o.timeLimit <= 0:
		return &usageError{fmt.Errorf("--time-limit: expected a positive duration such as 10m or 2h, got %s", o.timeLimit)}
	case set("max-draws") && o.maxDraws < 1:
		return &usageError{fmt.Errorf("--max-draws: expected a whole number >= 1, got %d", o.maxDraws)}
	case o.maxMemory != "" && parseErr(fit.ParseBytes(o.maxMemory)) != nil:
		return &usageError{fmt.Errorf("--max-memory: %v", parseErr(fit.ParseBytes(o.maxMemory)))}
	case o.format != "text" && o.format != "json":
		return &usageError{fmt.Errorf("--format: expected text or json, got %q", o.format)}
	}
	return nil
}

func runFit(cmd *cobra.Command, fo fit.Options, o *fitOptions, stdout, stderr io.Writer) error {
	return runFitWith(cmd, fo.OutDir, o, stdout, stderr, func(progress func(chain, chains, done, total int)) (*fit.Outcome, error) {
		fo.Progress = progress
		return fit.Fit(cmd.Context(), fo)
	})
}

// errInterrupted is returned (exit status 1) after a stopped fit has
// written what it had: scripts must not take it for a finished run.
var errInterrupted = errors.New("the fit was interrupted; the run is incomplete")

// runFitWith runs a fit or a resumed fit that writes into dir, with
// progress on a terminal, then prints the summary.
func runFitWith(cmd *cobra.Command, dir string, o *fitOptions, stdout, stderr io.Writer, do func(progress func(chain, chains, done, total int)) (*fit.Outcome, error)) error {
	var bar *chainProgress
	var progress func(chain, chains, done, total int)
	if !o.quiet && isTerminal(stderr) {
		bar = newChainProgress(stderr, "chain")
		progress = bar.update
	}
	res, err := do(progress)
	if bar != nil {
		bar.finish()
	}
	if err != nil {
		return err
	}
	if dir != "" && !o.quiet {
		fmt.Fprintf(stderr, "wrote %s (summary.json, draws.csv, run.json) in %.1f s\n", dir, res.Result.Elapsed.Seconds())
	}
	if err := printSummary(res, o, stdout); err != nil {
		return err
	}
	if res.Result.Incomplete {
		if dir != "" {
			return fmt.Errorf("%w; finish it with: lagstar fit --resume %s", errInterrupted, dir)
		}
		return errInterrupted
	}
	return nil
}

func printSummary(res *fit.Outcome, o *fitOptions, stdout io.Writer) error {
	if o.format == "json" {
		b, err := res.Summary.JSON()
		if err != nil {
			return err
		}
		_, err = stdout.Write(b)
		return err
	}
	if o.intro != "" {
		fmt.Fprintln(stdout, o.intro)
	}
	return report.WriteTable(stdout, res.Summary)
}

func isTerminal(w io.Writer) bool {
	f, ok := w.(*os.File)
	if !ok {
		return false
	}
	st, err := f.Stat()
	return err == nil && st.Mode()&os.ModeCharDevice != 0
}

// chainProgress draws one progress line per chain (or model, or other
// unit) on a terminal (stderr), each with its steps done and an estimated
// time left, redrawn in place a few times a second. It is safe for
// concurrent use.
type chainProgress struct {
	mu      sync.Mutex
	w       io.Writer
	unit    string // what each line counts: "chain", "model", ...
	done    []int
	total   []int
	base    []int // steps already done when the first report came (a resumed run)
	start   time.Time
	drawn   int // lines on screen
	stop    chan struct{}
	stopped chan struct{}
}

func newChainProgress(w io.Writer, unit string) *chainProgress {
	p := &chainProgress{w: w, unit: unit, start: time.Now(), stop: make(chan struct{}), stopped: make(chan struct{})}
	go func() {
		defer close(p.stopped)
		tick := time.NewTicker(200 * time.Millisecond)
		defer tick.Stop()
		for {
			select {
			case <-p.stop:
				return
			case <-tick.C:
				p.draw()
			}
		}
	}()
	return p
}

func (p *chainProgress) update(chain, chains, done, total int) {
	p.mu.Lock()
	defer p.mu.Unlock()
	if p.done == nil {
		p.done, p.total, p.base = make([]int, chains), make([]int, chains), make([]int, chains)
		for c := range p.base {
			p.base[c] = -1
		}
	}
	if p.base[chain] < 0 {
		p.base[chain] = done - 1
	}
	p.done[chain], p.total[chain] = done, total
}

func (p *chainProgress) draw() {
	p.mu.Lock()
	defer p.mu.Unlock()
	if p.done == nil {
		return
	}
	var b strings.Builder
	if p.drawn > 0 {
		fmt.Fprintf(&b, "\x1b[%dA", p.drawn)
	}
	elapsed := time.Since(p.start).Seconds()
	const width = 30
	for c := range p.done {
		frac := float64(p.done[c]) / float64(max(p.total[c], 1))
		// The rate counts only steps taken since this run started.
		base := max(p.base[c], 0)
		ran := float64(p.done[c]-base) / float64(max(p.total[c]-base, 1))
		eta := "?"
		if ran > 0.01 {
			eta = (time.Duration(elapsed*(1-ran)/ran) * time.Second).Round(time.Second).String()
		}
		n := int(frac * width)
		fmt.Fprintf(&b, "\r\x1b[K%s %d [%s%s] %3.0f%%  %d/%d  ETA %s\n", p.unit, c+1,
			strings.Repeat("=", n), strings.Repeat(" ", width-n), 100*frac, p.done[c], p.total[c], eta)
	}
	p.drawn = len(p.done)
	io.WriteString(p.w, b.String())
}

// finish stops redrawing and clears the lines.
func (p *chainProgress) finish() {
	close(p.stop)
	<-p.stopped
	p.mu.Lock()
	defer p.mu.Unlock()
	if p.drawn > 0 {
		fmt.Fprintf(p.w, "\x1b[%dA", p.drawn)
		for range p.drawn {
			io.WriteString(p.w, "\r\x1b[K\n")
		}
		fmt.Fprintf(p.w, "\x1b[%dA", p.drawn)
	}
}

// parseErr returns the error of a (value, error) pair.
func parseErr(_ int64, err error) error { return err }
