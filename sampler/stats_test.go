package sampler

import (
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"strings"
	"testing"
)

// TestWQuadMatchesDirect: the within-path sums the latent block leaves in
// State.WQuad (and the scale block keeps up to date) must equal a direct
// evaluation of sum zeta' Sigma^{-1} zeta.
func TestWQuadMatchesDirect(t *testing.T) {
	for _, p := range problems() {
		if p.large {
			continue
		}
		l := p.layout(t)
		rng := newRand(9)
		st := NewState(l, rng)
		blocks := Blocks(l, "joint")
		for range 5 {
			Sweep(st, blocks, rng)
		}
		lat := NewLatentBlock(l)
		sc := NewScaleBlock(l)
		for step, b := range []Block{lat, sc} {
			if err := UpdateBlock(st, b, rng); err != nil {
				t.Fatal(err)
			}
			if !st.WQuadOK {
				t.Fatalf("%s: WQuadOK false after %s", p.name, b.Name())
			}
			got := 0.0
			for _, x := range st.WQuad {
				got += x
			}
			got *= -0.5
			want := st.withinQuad(st.Ystar)
			if math.Abs(got-want) > 1e-9*math.Abs(want) {
				t.Errorf("%s step %d: -1/2 sum WQuad = %.10g, direct %.10g", p.name, step, got, want)
			}
		}
	}
}

// TestExtendEqualsLongerRun: a run extended by 30 draws gives exactly the
// draws of one run with 30 more draws.
func TestExtendEqualsLongerRun(t *testing.T) {
	l := problems()[1].layout(t)
	opt := Options{Chains: 2, Warmup: 10, Draws: 20, Seed: 5}
	r, err := Start(context.Background(), l, opt)
	if err != nil {
		t.Fatal(err)
	}
	if err := r.Extend(context.Background(), 30); err != nil {
		t.Fatal(err)
	}
	opt.Draws = 50
	long, err := Run(context.Background(), l, opt)
	if err != nil {
		t.Fatal(err)
	}
	got := r.Result()
	for c := range long.Draws {
		if got.Kept[c] != 50 || !slices.Equal(got.Draws[c], long.Draws[c]) || !slices.Equal(got.DerivedDraws[c], long.DerivedDraws[c]) {
			t.Fatalf("chain %d: extended run (kept %d) differs from the longer run", c, got.Kept[c])
		}
	}
	if got.Incomplete || got.Options.Draws != 50 {
		t.Errorf("extended result: incomplete %v, draws %d", got.Incomplete, got.Options.Draws)
	}
}

// TestMomentsGiveInnovationSums: the innovation sums the covariance block
// derives from the shared moments equal a direct pass over every zeta.
func TestMomentsGiveInnovationSums(t *testing.T) {
	l := problems()[1].layout(t)
	rng := newRand(4)
	st := NewState(l, rng)
	blocks := Blocks(l, "joint")
	for range 5 {
		Sweep(st, blocks, rng)
	}
	J := l.J
	JJ := J * J
	direct := make([][]float64, len(l.Groups))
	for g := range direct {
		direct[g] = make([]float64, JJ)
	}
	w := make([]float64, l.MaxLen*J)
	z := make([]float64, J)
	for i := 0; i < l.N; i++ {
		st.fillW(w, i, st.Ystar)
		for tt := 0; tt < l.Panel.Len[i]; tt++ {
			for r := 0; r < J; r++ {
				z[r] = w[tt*J+r]
				if tt > 0 {
					for c := 0; c < J; c++ {
						z[r] -= st.A[tt*JJ+r*J+c] * w[(tt-1)*J+c]
					}
				}
			}
			g := l.GroupOf[tt]
			for a := 0; a < J; a++ {
				for b := 0; b < J; b++ {
					direct[g][a*J+b] += z[a] * z[b]
				}
			}
		}
	}
	cb := NewCovBlock(l)
	cb.rounds = 0 // statistics only
	if err := UpdateBlock(st, cb, rng); err != nil {
		t.Fatal(err)
	}
	for g := range direct {
		for k := range direct[g] {
			if math.Abs(cb.stats[g][k]-direct[g][k]) > 1e-8*(1+math.Abs(direct[g][k])) {
				t.Errorf("group %d entry %d: from moments %.10g, direct %.10g", g, k, cb.stats[g][k], direct[g][k])
			}
		}
	}
}

// TestShardedDrawsIndependentOfCores: a panel large enough for several
// shards gives identical draws at GOMAXPROCS 1, 2 and 8.
func TestShardedDrawsIndependentOfCores(t *testing.T) {
	p := problems()[1]
	p.n = 3 * personsPerShard
	l := p.layout(t)
	if len(l.ShardStart) < 3 {
		t.Fatalf("want several shards, got %d", len(l.ShardStart)-1)
	}
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	var first []float64
	for _, procs := range []int{1, 2, 8} {
		runtime.GOMAXPROCS(procs)
		res, err := Run(context.Background(), l, Options{Chains: 1, Warmup: 3, Draws: 4, Seed: 8})
		if err != nil {
			t.Fatal(err)
		}
		if first == nil {
			first = res.Draws[0]
			continue
		}
		if !slices.Equal(first, res.Draws[0]) {
			t.Fatalf("draws at GOMAXPROCS %d differ from GOMAXPROCS 1", procs)
		}
	}
}

// TestInjectInvertsExtract: Extract after Inject gives back the vector.
func TestInjectInvertsExtract(t *testing.T) {
	for _, p := range problems()[:2] {
		l := p.layout(t)
		rng := newRand(6)
		a := NewState(l, rng)
		blocks := Blocks(l, "joint")
		for range 10 {
			Sweep(a, blocks, rng)
		}
		v := a.Extract(nil)
		b := NewState(l, newRand(7))
		if err := b.Inject(v); err != nil {
			t.Fatal(err)
		}
		got := b.Extract(nil)
		for k := range v {
			if math.Abs(got[k]-v[k]) > 1e-12*(1+math.Abs(v[k])) {
				t.Errorf("%s: parameter %d: %v after Inject, want %v", p.name, k, got[k], v[k])
			}
		}
	}
}

// nanBlock is a block that breaks the state, to test error reporting.
type nanBlock struct{}

func (nanBlock) Name() string { return "test block" }
func (nanBlock) Writes() Part { return PartPaths }
func (nanBlock) Update(st *State, _ *rand.Rand) error {
	st.A[len(st.A)-1] = math.NaN()
	return nil
}

// TestSweepNamesFailingBlock: a value that is not finite after a block is
// reported with the block's name and what went wrong, and a run stops
// with that error instead of writing NaN.
func TestSweepNamesFailingBlock(t *testing.T) {
	l := problems()[1].layout(t)
	rng := newRand(3)
	st := NewState(l, rng)
	blocks := append(Blocks(l, "joint"), nanBlock{})
	err := Sweep(st, blocks, rng)
	var be *BlockError
	if !errors.As(err, &be) || be.Block != "test block" || !strings.Contains(err.Error(), "carry-over path is not finite") {
		t.Fatalf("got %v, want a BlockError naming the test block", err)
	}
	_, err = runOpts(context.Background(), l, Options{Chains: 1, Warmup: 2, Draws: 2, Seed: 1}, func(bs []Block) {
		bs[len(bs)-1] = nanBlock{}
	})
	if err == nil || !strings.Contains(err.Error(), `"test block"`) || !strings.Contains(err.Error(), "sweep 1") {
		t.Errorf("run: got %v, want the block and sweep named", err)
	}
}

// panicBlock is a block with a bug.
type panicBlock struct{}

func (panicBlock) Name() string                    { return "buggy block" }
func (panicBlock) Writes() Part                    { return 0 }
func (panicBlock) Update(*State, *rand.Rand) error { panic("index out of range [7] with length 3") }

// TestPanicBecomesError: a panic inside a chain, or inside a shard worker
// of one, ends the run with an InternalError, not a crash.
func TestPanicBecomesError(t *testing.T) {
	p := problems()[1]
	for _, n := range []int{50, 2*personsPerShard + 10} {
		p.n = n
		l := p.layout(t)
		_, err := runOpts(context.Background(), l, Options{Chains: 2, Warmup: 2, Draws: 2, Seed: 1}, func(bs []Block) { bs[len(bs)-1] = panicBlock{} })
		var ie *InternalError
		if !errors.As(err, &ie) || !strings.Contains(err.Error(), "internal error") {
			t.Errorf("%d persons: got %v, want an InternalError", n, err)
		}
		// In a shard worker: every shard's latent pass panics.
		shardPanic := func(bs []Block) {
			for k, b := range bs {
				if _, ok := b.(*LatentBlock); ok {
					bs[k] = &shardPanicBlock{}
				}
			}
		}
		if _, err := runOpts(context.Background(), l, Options{Chains: 1, Warmup: 1, Draws: 1, Seed: 1}, shardPanic); !errors.As(err, &ie) {
			t.Errorf("%d persons, panic in a shard: got %v, want an InternalError", n, err)
		}
	}
}

type shardPanicBlock struct{}

func (*shardPanicBlock) Name() string { return "buggy shard block" }
func (*shardPanicBlock) Writes() Part { return 0 }
func (*shardPanicBlock) Update(st *State, _ *rand.Rand) error {
	forShards(st.L, func(s, lo, hi int) { panic("shard bug") })
	return nil
}
