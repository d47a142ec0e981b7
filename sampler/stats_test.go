package sampler

import (
	"context"
	"math"
	"slices"
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
			if err := b.Update(st, rng); err != nil {
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
			want := st.withinQuad(st.Ystar, make([]float64, l.MaxLen*l.J))
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
