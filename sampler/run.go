package sampler

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"sync"
	"time"

	"github.com/lagstar/lagstar/model"
)

// Options controls a run.
type Options struct {
	Chains, Warmup, Draws int
	Seed                  uint64
	ThresholdUpdate       model.ThresholdUpdate
	// Progress, if not nil, is called from the chain goroutines after every
	// sweep with the chain index, the number of chains, the sweeps done and
	// the sweeps per chain; it must be safe for concurrent use.
	Progress func(chain, chains, done, total int)
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
	plain := update == model.ThresholdAlbertChib
	bs := []Block{NewLatentBlock(l)}
	anyCat := slices.Contains(l.Cat, true)
	if anyCat {
		// The scale block comes right after the latent block, whose pass
		// leaves the within-path sums it needs (State.WQuad).
		if !plain {
			bs = append(bs, NewScaleBlock(l))
		}
		bs = append(bs, NewThresholdBlock(l, update))
	}
	if l.RI {
		bs = append(bs, NewInterceptBlock(l))
		if !plain {
			bs = append(bs, NewLocationBlock(l))
		}
	}
	if l.NMean > 0 {
		bs = append(bs, NewMeanBlock(l))
	}
	if l.HasPaths() {
		bs = append(bs, NewPathBlock(l))
	}
	if l.hasFreeCovariance() {
		bs = append(bs, NewCovBlock(l))
	}
	if l.RI {
		bs = append(bs, NewPsiBlock(l))
	}
	return bs
}

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
	return runOpts(ctx, l, opt, nil)
}

// runOpts is Run with an optional change to every chain's blocks (tests
// and benchmarks compare variants of the sampler this way).
func runOpts(ctx context.Context, l *Layout, opt Options, tweak func([]Block)) (*Result, error) {
	start := time.Now()
	res := &Result{Layout: l, Params: l.Params(), Derived: l.DerivedParams(), Options: opt,
		Draws: make([][]float64, opt.Chains), DerivedDraws: make([][]float64, opt.Chains), Kept: make([]int, opt.Chains)}
	seeds := ChainSeeds(opt.Seed, opt.Chains)
	errs := make([]error, opt.Chains)
	var wg sync.WaitGroup
	for c := 0; c < opt.Chains; c++ {
		wg.Add(1)
		go func(c int) {
			defer wg.Done()
			errs[c] = runChain(ctx, l, opt, c, seeds[c], res, tweak)
		}(c)
	}
	wg.Wait()
	res.Elapsed = time.Since(start)
	for c, err := range errs {
		if err != nil {
			return nil, fmt.Errorf("chain %d: %w", c+1, err)
		}
	}
	for _, k := range res.Kept {
		if k < opt.Draws {
			res.Incomplete = true
		}
	}
	return res, nil
}

func runChain(ctx context.Context, l *Layout, opt Options, c int, seed [2]uint64, res *Result, tweak func([]Block)) error {
	rng := rand.New(rand.NewPCG(seed[0], seed[1]))
	st := NewState(l, rng)
	blocks := Blocks(l, opt.ThresholdUpdate)
	if tweak != nil {
		tweak(blocks)
	}
	np, nd := len(res.Params), len(res.Derived)
	draws := make([]float64, 0, opt.Draws*np)
	derived := make([]float64, 0, opt.Draws*nd)
	buf := make([]float64, 0, np)
	dbuf := make([]float64, 0, nd)
	dw := NewDerivedWork(l)
	total := opt.Warmup + opt.Draws
	for sweep := 0; sweep < total; sweep++ {
		if ctx.Err() != nil {
			break
		}
		st.Warmup = sweep < opt.Warmup
		if err := Sweep(st, blocks, rng); err != nil {
			return fmt.Errorf("sweep %d: %w", sweep+1, err)
		}
		if sweep >= opt.Warmup {
			buf = st.Extract(buf)
			dbuf = st.ExtractDerived(dbuf, dw)
			for _, v := range buf {
				if math.IsNaN(v) || math.IsInf(v, 0) {
					return fmt.Errorf("sweep %d: a parameter is not finite", sweep+1)
				}
			}
			draws = append(draws, buf...)
			derived = append(derived, dbuf...)
		}
		if opt.Progress != nil {
			opt.Progress(c, opt.Chains, sweep+1, total)
		}
	}
	res.Draws[c] = draws
	res.DerivedDraws[c] = derived
	res.Kept[c] = len(draws) / max(np, 1)
	if np == 0 {
		res.Kept[c] = len(derived) / max(nd, 1)
	}
	return nil
}

// Sweep runs every block once.
func Sweep(st *State, blocks []Block, rng *rand.Rand) error {
	for _, b := range blocks {
		if err := b.Update(st, rng); err != nil {
			return err
		}
	}
	return nil
}
