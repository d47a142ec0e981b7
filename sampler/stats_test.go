package sampler

import (
	"math"
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
