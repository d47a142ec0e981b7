package sampler

import (
	"math"
	"strings"
	"testing"

	"github.com/lagstar/lagstar/model"
)

// TestLevelConditionalExact: the level move's Gaussian in c (precision and
// linear coefficient, read off innovation sums next to the fixed-mean
// occasions) equals the log density it stands for, computed directly: the
// within paths' quadratic State.withinQuad with w moved by c at the fixed
// occasions, at c = -1, 0, 1 (exact for a quadratic), plus the priors.
// Cases: cross-lags with a free and a stationary start, no carry-over, and
// an anchor away from the first occasion with an occasion nobody answered.
func TestLevelConditionalExact(t *testing.T) {
	const two = "data: {csv: x.csv, person: person, occasion: occasion}\noutcomes: [{name: a, type: ordinal, categories: 4, lowest: 0}, {name: b, type: binary}]\n"
	for _, c := range []struct{ name, model string }{
		{"cross, free start", two + "dynamics: {lags: cross}\n"},
		{"cross, stationary start", two + "dynamics: {lags: cross, first_occasion: stationary}\n"},
		{"no carry-over", two + "dynamics: {lags: none}\n"},
		{"anchor at occasion 4", two + "dynamics: {lags: cross}\nmeans: {anchor: 4}\n"},
	} {
		t.Run(c.name, func(t *testing.T) {
			l := layoutFrom(t, c.model, levelData(t))
			rng := newRand(11)
			st := NewState(l, rng)
			blocks := Blocks(l, "joint")
			for range 3 {
				if err := Sweep(st, blocks, rng); err != nil {
					t.Fatal(err)
				}
			}
			lb := NewLevelBlock(l)
			lb.innovationSums(st)
			J := l.J
			ys := make([]float64, len(st.Ystar))
			for j := 0; j < J; j++ {
				if len(lb.meansOf[j]) == 0 {
					continue
				}
				prec, lin := lb.conditional(st, j)
				q := func(c float64) float64 {
					copy(ys, st.Ystar)
					for i := 0; i < l.N; i++ {
						for tt := 0; tt < l.Panel.Len[i]; tt++ {
							if lb.fixed[j][tt] {
								ys[l.Panel.Offset[i]+tt*J+j] += c
							}
						}
					}
					v := st.withinQuad(ys)
					for _, x := range st.Tau[j] {
						v -= 0.5 * (x + c) * (x + c) / (l.Priors.ThresholdSD * l.Priors.ThresholdSD)
					}
					for _, idx := range lb.meansOf[j] {
						x := st.Mean[idx]
						v -= 0.5 * (x + c) * (x + c) / (l.Priors.MeanSD * l.Priors.MeanSD)
					}
					return v
				}
				q0, qp, qm := q(0), q(1), q(-1)
				wantPrec, wantLin := -(qp + qm - 2*q0), (qp-qm)/2
				if math.Abs(prec-wantPrec) > 1e-8*math.Abs(wantPrec) || math.Abs(lin-wantLin) > 1e-8*(1+math.Abs(wantLin)) {
					t.Errorf("outcome %d: precision %.10g, linear %.10g; direct %.10g, %.10g", j, prec, lin, wantPrec, wantLin)
				}
			}
			// After a move of every outcome, the innovation sums kept
			// current by hand equal those recomputed from the new state.
			if err := UpdateBlock(st, lb, rng); err != nil {
				t.Fatal(err)
			}
			kept := append([]float64(nil), lb.rsum...)
			lb.innovationSums(st)
			for k, v := range lb.rsum {
				if math.Abs(v-kept[k]) > 1e-9*(1+math.Abs(v)) {
					t.Fatalf("innovation sum %d after the move: kept %.10g, recomputed %.10g", k, kept[k], v)
				}
			}
		})
	}
}

// levelData is a small ordinal + binary panel where nobody answered
// outcome a at occasion 3 and three in four persons skipped occasion 1.
func levelData(t *testing.T) []byte {
	t.Helper()
	raw, err := Simulate(Truth{Names: []string{"a", "b"}, Types: []model.OutcomeType{model.Ordinal, model.Binary}, Tau: [][]float64{{-0.5, 0, 0.6}, {0.2}},
		Psi: []float64{0.5, 0.1, 0.1, 0.4}, A: []float64{0.3, 0.1, -0.2, 0.25}, Sigma: []float64{1, 0.2, 0.2, 1}, Sigma1: []float64{1, 0.2, 0.2, 1}}, 60, 7, newRand(4))
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSpace(string(raw)), "\n")
	for k := 1; k < len(lines); k++ {
		f := strings.Split(lines[k], ",")
		switch {
		case f[1] == "3":
			f[2] = "NA"
		case f[1] == "1" && k%28 >= 7:
			f[2], f[3] = "NA", "NA"
		}
		lines[k] = strings.Join(f, ",")
	}
	return []byte(strings.Join(lines, "\n") + "\n")
}
