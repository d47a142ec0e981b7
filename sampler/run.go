package sampler

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime/debug"
	"sync"
	"time"

	"github.com/lagstar/lagstar/model"
)

// Options controls a run.
type Options struct {
	Chains, Warmup, Draws int
	Seed                  uint64
	ThresholdUpdate       model.ThresholdUpdate
	// PathMoves adds the exact-HMC move of whole latent paths
	// (LatentPathBlock) to every sweep; used only when every outcome is
	// categorical. Off by default: see docs/performance.md for its cost.
	PathMoves bool
	// Progress, if not nil, is called from the chain goroutines after every
	// sweep with the chain index, the number of chains, the sweeps done and
	// the sweeps per chain; it must be safe for concurrent use.
	Progress func(chain, chains, done, total int)
	// Checkpoint, if not nil, receives chain checkpoints (for Resume) from
	// the chain goroutines: every CheckpointEvery sweeps (0: never) and
	// when the chain stops, finished or cancelled. It must be safe for
	// concurrent use; an error stops the run.
	Checkpoint      func(chain int, data []byte) error
	CheckpointEvery int
}

// Result holds the kept draws of every chain.
type Result struct {
	Layout  *Layout
	Params  []Param
	Derived []Param
	// Draws[c] holds chain c's kept draws, draw-major: Draws[c][d*len(Params)+p].
	Draws        [][]float64
	DerivedDraws [][]float64
	// Kept[c] is the number of draws chain c kept (less than Options.Draws
	// when the run was interrupted).
	Kept       []int
	Incomplete bool
	Elapsed    time.Duration
	Options    Options
}

// Blocks returns the Gibbs blocks of the layout in sweep order. With
// model.ThresholdAlbertChib the sampler is plain data augmentation (Albert
// & Chib 1993): no joint threshold, scale or location moves, the baseline
// for benchmarks.
func Blocks(l *Layout, update model.ThresholdUpdate) []Block {
	return blocksFor(l, Options{ThresholdUpdate: update})
}

// BlocksFor returns the Gibbs blocks a run with options opt sweeps, in
// sweep order (the Geweke test uses it).
func BlocksFor(l *Layout, opt Options) []Block { return blocksFor(l, opt) }

// blocksFor returns the blocks for the options of a run: every active
// term's, in sweep-slot order (registry.go).
func blocksFor(l *Layout, opt Options) []Block { return termBlocks(l, opt) }

// ChainSeeds derives each chain's PCG seeds from the run seed, in chain
// order, before any goroutine starts.
func ChainSeeds(seed uint64, chains int) [][2]uint64 {
	master := rand.New(rand.NewPCG(seed, 0x6c61677374617221))
	out := make([][2]uint64, chains)
	for c := range out {
		out[c] = [2]uint64{master.Uint64(), master.Uint64()}
	}
	return out
}

// Run samples every chain in parallel. A cancelled context stops the chains
// at the next sweep; the result then holds what was kept and is marked
// Incomplete.
func Run(ctx context.Context, l *Layout, opt Options) (*Result, error) {
	r, err := Start(ctx, l, opt)
	if err != nil {
		return nil, err
	}
	return r.Result(), nil
}

// Runner holds every chain's state between rounds of sampling, so a run
// can be extended (Extend) with draws identical to those of one longer run.
type Runner struct {
	l      *Layout
	opt    Options
	fp     string // checkpoint fingerprint
	res    *Result
	chains []*chain
}

type chain struct {
	src    *rand.PCG // rng's source, whose state checkpoints save
	rng    *rand.Rand
	st     *State
	blocks []Block
	dw     *DerivedWork
	buf    []float64
	dbuf   []float64
	sweeps int // sweeps done, warm-up included
}

// Start creates the chains and runs warm-up plus opt.Draws sweeps.
func Start(ctx context.Context, l *Layout, opt Options) (*Runner, error) {
	return startOpts(ctx, l, opt, nil)
}

// startOpts is Start with an optional change to every chain's blocks
// (tests and benchmarks compare variants of the sampler this way).
func startOpts(ctx context.Context, l *Layout, opt Options, tweak func([]Block)) (*Runner, error) {
	r := newRunner(l, opt, tweak)
	return r, r.run(ctx)
}

// newRunner creates every chain at its starting values.
func newRunner(l *Layout, opt Options, tweak func([]Block)) *Runner {
	r := &Runner{l: l, opt: opt, fp: fingerprint(l, opt), res: &Result{Layout: l, Params: l.Params(), Derived: l.DerivedParams(), Options: opt,
		Draws: make([][]float64, opt.Chains), DerivedDraws: make([][]float64, opt.Chains), Kept: make([]int, opt.Chains)}}
	for c, seed := range ChainSeeds(opt.Seed, opt.Chains) {
		src := rand.NewPCG(seed[0], seed[1])
		rng := rand.New(src)
		ch := &chain{src: src, rng: rng, st: NewState(l, rng), blocks: blocksFor(l, opt), dw: NewDerivedWork(l)}
		if tweak != nil {
			tweak(ch.blocks)
		}
		r.chains = append(r.chains, ch)
		r.res.Draws[c] = make([]float64, 0, opt.Draws*len(r.res.Params))
		r.res.DerivedDraws[c] = make([]float64, 0, opt.Draws*len(r.res.Derived))
	}
	return r
}

// runOpts is Run with a change to the blocks.
func runOpts(ctx context.Context, l *Layout, opt Options, tweak func([]Block)) (*Result, error) {
	r, err := startOpts(ctx, l, opt, tweak)
	if err != nil {
		return nil, err
	}
	return r.Result(), nil
}

// Extend runs draws more kept sweeps on every chain.
func (r *Runner) Extend(ctx context.Context, draws int) error {
	r.res.Options.Draws += draws
	return r.run(ctx)
}

// Result returns the draws so far. It shares storage with the runner.
func (r *Runner) Result() *Result { return r.res }

// run advances every chain, in parallel, until it has the kept draws of
// Options.Draws.
func (r *Runner) run(ctx context.Context) error {
	start := time.Now()
	errs := make([]error, len(r.chains))
	var wg sync.WaitGroup
	for c := range r.chains {
		wg.Add(1)
		go func(c int) {
			defer wg.Done()
			// An unexpected panic in a chain is an error of the run (the
			// caller marks the run failed), not a crash of the program.
			defer func() {
				if p := recover(); p != nil {
					errs[c] = &InternalError{Value: p, Stack: string(debug.Stack())}
				}
			}()
			errs[c] = r.advance(ctx, c)
		}(c)
	}
	wg.Wait()
	r.res.Elapsed += time.Since(start)
	for c, err := range errs {
		if err != nil {
			return fmt.Errorf("chain %d: %w", c+1, err)
		}
	}
	r.res.Incomplete = false
	for _, k := range r.res.Kept {
		if k < r.res.Options.Draws {
			r.res.Incomplete = true
		}
	}
	return nil
}

// advance runs chain c until it has the run's kept draws, or until ctx
// is cancelled, and hands checkpoints to Options.Checkpoint: every
// CheckpointEvery sweeps and once when it stops.
func (r *Runner) advance(ctx context.Context, c int) error {
	ch := r.chains[c]
	res := r.res
	total := r.opt.Warmup + res.Options.Draws
	first := ch.sweeps // a checkpoint of this point exists already, or is not wanted
	save := func() error {
		if r.opt.Checkpoint == nil {
			return nil
		}
		b, err := r.checkpoint(c)
		if err == nil {
			err = r.opt.Checkpoint(c, b)
		}
		if err != nil {
			return &SaveError{Chain: c, Sweep: ch.sweeps, Err: err}
		}
		return nil
	}
	for ; ch.sweeps < total; ch.sweeps++ {
		if ctx.Err() != nil {
			break
		}
		sweep := ch.sweeps
		if sweep > first && r.opt.CheckpointEvery > 0 && sweep%r.opt.CheckpointEvery == 0 {
			if err := save(); err != nil {
				return err
			}
		}
		ch.st.Warmup = sweep < r.opt.Warmup
		if err := Sweep(ch.st, ch.blocks, ch.rng); err != nil {
			return fmt.Errorf("sweep %d: %w", sweep+1, err)
		}
		if sweep >= r.opt.Warmup {
			ch.buf = ch.st.Extract(ch.buf)
			ch.dbuf = ch.st.ExtractDerived(ch.dbuf, ch.dw)
			for p, v := range ch.buf {
				if math.IsNaN(v) || math.IsInf(v, 0) {
					return fmt.Errorf("sweep %d: parameter %s is %v", sweep+1, res.Params[p].Name, v)
				}
			}
			res.Draws[c] = append(res.Draws[c], ch.buf...)
			res.DerivedDraws[c] = append(res.DerivedDraws[c], ch.dbuf...)
			res.Kept[c]++
		}
		if r.opt.Progress != nil {
			r.opt.Progress(c, r.opt.Chains, sweep+1, total)
		}
	}
	return save()
}

// nonFinite names the first parameter (or, when latent is true, latent
// response) of the state that is NaN or infinite, or returns "".
func (s *State) nonFinite(latent bool) string {
	bad := func(x []float64) int {
		for i, v := range x {
			if v-v != 0 { // NaN or Inf
				return i
			}
		}
		return -1
	}
	if latent {
		if i := bad(s.Ystar); i >= 0 {
			p, t, j := s.L.Panel.CellOf(i)
			return fmt.Sprintf("the latent response of person %s at occasion %d, outcome %s,", s.L.Panel.Persons[p], s.L.Panel.Occasions[t], s.L.Panel.Outcomes[j].Name)
		}
	}
	if i := bad(s.B); i >= 0 {
		return fmt.Sprintf("the random intercept of person %s", s.L.Panel.Persons[i/s.L.J])
	}
	for j, tau := range s.Tau {
		if bad(tau) >= 0 {
			return fmt.Sprintf("a threshold of outcome %s", s.L.Panel.Outcomes[j].Name)
		}
	}
	for _, x := range []struct {
		name string
		v    []float64
	}{{"a mean", s.Mean}, {"a carry-over path", s.A}, {"the random-intercept covariance", s.Psi}, {"an innovation covariance", s.Sig}} {
		if bad(x.v) >= 0 {
			return x.name
		}
	}
	for k, x := range s.own {
		if bad(x) >= 0 {
			return "a value of the term " + s.L.Terms[k].Name()
		}
	}
	return ""
}

// Vectors returns every kept draw as a parameter vector (in the order of
// Params), chain after chain. The vectors share storage with the result.
func (r *Result) Vectors() [][]float64 {
	np := len(r.Params)
	var out [][]float64
	for c := range r.Draws {
		for d := 0; d < r.Kept[c]; d++ {
			out = append(out, r.Draws[c][d*np:(d+1)*np])
		}
	}
	return out
}

// ParamChains returns parameter p's draws, one slice per chain, the first
// n draws of each (n <= min of Kept).
func (r *Result) ParamChains(p, n int) [][]float64 {
	np := len(r.Params)
	out := make([][]float64, len(r.Draws))
	for c := range r.Draws {
		out[c] = make([]float64, n)
		for d := 0; d < n; d++ {
			out[c][d] = r.Draws[c][d*np+p]
		}
	}
	return out
}

// EvenlySpaced returns n of the vectors, evenly spaced over all of them
// (all of them when n >= len(v)).
func EvenlySpaced(v [][]float64, n int) [][]float64 {
	n = min(n, len(v))
	out := make([][]float64, n)
	for k := range out {
		out[k] = v[k*len(v)/n]
	}
	return out
}

// InternalError is a panic inside the sampler turned into an error: a bug
// of lagstar, not of the input. Stack is where it happened.
type InternalError struct {
	Value any
	Stack string
}

func (e *InternalError) Error() string {
	return fmt.Sprintf("internal error: %v (a bug in lagstar; please report it with the command and, if you can, the model file and data)", e.Value)
}
