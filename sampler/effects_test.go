package sampler

import (
	"fmt"
	"math"
	"testing"

	"github.com/lagstar/lagstar/model"
)

// TestProbabilityEffectsExact checks the probability-scale effects of a
// binary random-intercept model with known parameters against independent
// computations: the effect of a one-sd move of the previous within part
// by the normal CDF, and the contrast (previous answer yes against no) by
// the bivariate orthant probability from one-dimensional quadrature
// (orthantByQuadrature), to 1e-6. One outcome (carry-over), then two
// (a cross-lag, with the stationary covariance found by iterating
// V = A V A' + Sigma rather than by the sampler's solver).
func TestProbabilityEffectsExact(t *testing.T) {
	pYes := func(h float64) float64 { return 0.5 * math.Erfc(h/math.Sqrt2) } // P(Z > h)
	check := func(got map[string]float64, name string, want float64) {
		t.Helper()
		v, ok := got[name]
		if !ok {
			t.Fatalf("no derived quantity %s", name)
		}
		if math.Abs(v-want) > 1e-6 {
			t.Errorf("%s = %.9f, independent %.9f", name, v, want)
		}
	}

	// One binary outcome: threshold 0.3, intercept variance 0.5, carry-over 0.6.
	tr := Truth{Names: []string{"y"}, Types: []model.OutcomeType{model.Binary}, Tau: [][]float64{{0.3}}, Psi: []float64{0.5}, A: []float64{0.6}, Sigma: []float64{1}}
	csv, err := Simulate(tr, 30, 4, newRand(1))
	if err != nil {
		t.Fatal(err)
	}
	l := layoutFrom(t, "data: {csv: x.csv, person: person, occasion: occasion}\noutcomes: [{name: y, type: binary}]\ndynamics: {lags: own, first_occasion: stationary}\nmeans: {over_time: equal}\n", csv)
	got := derivedAt(t, l, []float64{0.3, 0.5, 0.6})
	V := 1 / (1 - 0.36)
	for _, c := range []struct {
		scope string
		psi   float64
	}{{"typical", 0}, {"average", 0.5}} {
		sdInnov := math.Sqrt(1 + c.psi)
		check(got, "prob_effect_"+c.scope+"[y->y,1]", pYes((0.3-0.6*math.Sqrt(V))/sdInnov)-pYes(0.3/sdInnov))
		sd, r := math.Sqrt(V+c.psi), (0.6*V+c.psi)/(V+c.psi)
		h := 0.3 / sd
		both := orthantByQuadrature(h, h, r)
		p := pYes(h)
		check(got, "prob_contrast_"+c.scope+"[y->y,1]", both/p-(p-both)/(1-p))
	}

	// One binary outcome with ARMA(1,1) within parts (carry-over 0.6,
	// moving average -0.3): the stationary variance sigma^2 (1 + 2 a m +
	// m^2) / (1 - a^2) and lag-1 covariance a V + m sigma^2 (Box, Jenkins
	// & Reinsel 2008, ch. 3).
	csv, err = Simulate(Truth{Names: []string{"y"}, Types: []model.OutcomeType{model.Binary}, Tau: [][]float64{{0.3}}, Psi: []float64{0.5},
		A: []float64{0.6}, MA: []float64{-0.3}, Sigma: []float64{1}, Sigma1: []float64{1}}, 30, 5, newRand(1))
	if err != nil {
		t.Fatal(err)
	}
	l = layoutFrom(t, "data: {csv: x.csv, person: person, occasion: occasion}\noutcomes: [{name: y, type: binary}]\ndynamics: {lags: own, moving_average: true}\nmeans: {over_time: equal}\n", csv)
	got = derivedAt(t, l, []float64{0.3, 0.5, 0.6, -0.3})
	V = (1 + 2*0.6*-0.3 + 0.09) / (1 - 0.36)
	for _, c := range []struct {
		scope string
		psi   float64
	}{{"typical", 0}, {"average", 0.5}} {
		sdInnov := math.Sqrt(1 + c.psi)
		check(got, "prob_effect_"+c.scope+"[y->y,1]", pYes((0.3-0.6*math.Sqrt(V))/sdInnov)-pYes(0.3/sdInnov))
		sd, r := math.Sqrt(V+c.psi), (0.6*V-0.3+c.psi)/(V+c.psi)
		h := 0.3 / sd
		both := orthantByQuadrature(h, h, r)
		p := pYes(h)
		check(got, "prob_contrast_"+c.scope+"[y->y,1]", both/p-(p-both)/(1-p))
	}

	// Two binary outcomes, a -> b cross-lag 0.25.
	A := []float64{0.5, 0, 0.25, 0.3}
	S := []float64{1, 0.2, 0.2, 1}
	tr2 := Truth{Names: []string{"a", "b"}, Types: []model.OutcomeType{model.Binary, model.Binary}, Tau: [][]float64{{0.2}, {-0.4}},
		Psi: []float64{0.4, 0.1, 0.1, 0.6}, A: A, Sigma: S}
	csv, err = Simulate(tr2, 30, 4, newRand(1))
	if err != nil {
		t.Fatal(err)
	}
	l = layoutFrom(t, "data: {csv: x.csv, person: person, occasion: occasion}\noutcomes: [{name: a, type: binary}, {name: b, type: binary}]\ndynamics: {lags: cross, first_occasion: stationary}\nmeans: {over_time: equal}\n", csv)
	// Parameters: thresholds, ri variances, ri correlation, paths
	// (autoregression a, crosslag b->a, crosslag a->b, autoregression b),
	// innovation correlation.
	var vals []float64
	for _, p := range l.Params() {
		vals = append(vals, map[string]float64{"threshold[a,1]": 0.2, "threshold[b,1]": -0.4, "ri_variance[a]": 0.4, "ri_variance[b]": 0.6,
			"ri_correlation[a,b]": 0.1 / math.Sqrt(0.24), "autoregression[a]": 0.5, "crosslag[b->a]": 0, "crosslag[a->b]": 0.25,
			"autoregression[b]": 0.3, "innovation_correlation[a,b]": 0.2}[p.Name])
	}
	got = derivedAt(t, l, vals)
	v := []float64{1, 0, 0, 1}
	for range 2000 { // V = A V A' + S
		var n [4]float64
		for r := 0; r < 2; r++ {
			for c := 0; c < 2; c++ {
				x := S[r*2+c]
				for p := 0; p < 2; p++ {
					for q := 0; q < 2; q++ {
						x += A[r*2+p] * v[p*2+q] * A[c*2+q]
					}
				}
				n[r*2+c] = x
			}
		}
		copy(v, n[:])
	}
	covBA := A[2]*v[0] + A[3]*v[2] // cov(w_b,t, w_a,t-1) = (A V)_ba
	for _, c := range []struct {
		scope             string
		psiA, psiB, psiAB float64
	}{{"typical", 0, 0, 0}, {"average", 0.4, 0.6, 0.1}} {
		sdInnov := math.Sqrt(1 + c.psiB)
		check(got, "prob_effect_"+c.scope+"[a->b,1]", pYes((-0.4-0.25*math.Sqrt(v[0]))/sdInnov)-pYes(-0.4/sdInnov))
		sa, sb := math.Sqrt(v[0]+c.psiA), math.Sqrt(v[3]+c.psiB)
		r := (covBA + c.psiAB) / (sa * sb)
		ha, hb := 0.2/sa, -0.4/sb
		both := orthantByQuadrature(ha, hb, r) // P(a yes at t-1, b yes at t)
		pa, pb := pYes(ha), pYes(hb)
		check(got, "prob_contrast_"+c.scope+"[a->b,1]", both/pa-(pb-both)/(1-pa))
	}
}

// TestImpulseResponsesExact: for two binary outcomes with known paths and
// innovation covariance, the impulse responses equal A^h zeta_0 computed
// by repeated multiplication here, and the probability responses equal
// P(y*_h > tau) with mean shifted by the response and variance
// sum_{s<h} (A^s Sigma A^s')_jj (plus the intercept variance for the
// average), to 1e-9; with a moving average the first response is
// (A + M) zeta_0 and the variance sums the moving-average weights.
func TestImpulseResponsesExact(t *testing.T) {
	A := []float64{0.5, -0.1, 0.25, 0.3}
	S := []float64{1, 0.2, 0.2, 1}
	tr := Truth{Names: []string{"a", "b"}, Types: []model.OutcomeType{model.Binary, model.Binary}, Tau: [][]float64{{0.2}, {-0.4}},
		Psi: []float64{0.4, 0.1, 0.1, 0.6}, A: A, Sigma: S, Sigma1: S}
	csv, err := Simulate(tr, 30, 5, newRand(1))
	if err != nil {
		t.Fatal(err)
	}
	values := map[string]float64{"threshold[a,1]": 0.2, "threshold[b,1]": -0.4, "ri_variance[a]": 0.4, "ri_variance[b]": 0.6,
		"ri_correlation[a,b]": 0.1 / math.Sqrt(0.24), "autoregression[a]": 0.5, "crosslag[b->a]": -0.1, "crosslag[a->b]": 0.25,
		"autoregression[b]": 0.3, "innovation_correlation[a,b]": 0.2, "initial_correlation[a,b]": 0.2, "moving_average[a]": -0.3, "moving_average[b]": 0.2}
	mul := func(m, x []float64) []float64 { return []float64{m[0]*x[0] + m[1]*x[1], m[2]*x[0] + m[3]*x[1]} }
	for _, ma := range []bool{false, true} {
		l := layoutFrom(t, fmt.Sprintf("data: {csv: x.csv, person: person, occasion: occasion}\noutcomes: [{name: a, type: binary}, {name: b, type: binary}]\ndynamics: {lags: cross, moving_average: %v, impulse_horizon: 4}\nmeans: {over_time: equal}\n", ma), csv)
		var vals []float64
		for _, p := range l.Params() {
			v, ok := values[p.Name]
			if !ok {
				t.Fatalf("no value for %s", p.Name)
			}
			vals = append(vals, v)
		}
		got := derivedAt(t, l, vals)
		names := []string{"a", "b"}
		for k := 0; k < 2; k++ {
			z := []float64{0, 0}
			z[k] = 1 // unit innovation sds
			r := mul(A, z)
			if ma {
				r[0] += -0.3 * z[0]
				r[1] += 0.2 * z[1]
			}
			for h := 1; h <= 4; h++ {
				for j := 0; j < 2; j++ {
					name := fmt.Sprintf("impulse_response[%s->%s,h=%d]", names[k], names[j], h)
					if v, ok := got[name]; !ok || math.Abs(v-r[j]) > 1e-9 {
						t.Errorf("%s = %v (present %v), want %.9f", name, v, ok, r[j])
					}
				}
				r = mul(A, r)
			}
		}
		// Probabilities: W_h = sum_{m<h} psi_m S psi_m' with psi_0 = I,
		// psi_m = A^(m-1) (A + M) (the moving-average weights; A^m
		// without a moving average).
		mm := []float64{0, 0}
		if ma {
			mm = []float64{-0.3, 0.2}
		}
		w := []float64{0, 0, 0, 0}
		pw := []float64{1, 0, 0, 1}  // psi_m
		r := mul(A, []float64{1, 0}) // shock in a
		r[0] += mm[0]
		for h := 1; h <= 4; h++ {
			// w += pw S pw'
			for a := 0; a < 2; a++ {
				for b := 0; b < 2; b++ {
					for p := 0; p < 2; p++ {
						for q := 0; q < 2; q++ {
							w[a*2+b] += pw[a*2+p] * S[p*2+q] * pw[b*2+q]
						}
					}
				}
			}
			if h == 1 {
				pw = []float64{A[0] + mm[0], A[1], A[2], A[3] + mm[1]}
			} else {
				pw = []float64{A[0]*pw[0] + A[1]*pw[2], A[0]*pw[1] + A[1]*pw[3], A[2]*pw[0] + A[3]*pw[2], A[2]*pw[1] + A[3]*pw[3]}
			}
			for _, c := range []struct {
				scope string
				psi   float64
			}{{"typical", 0}, {"average", 0.6}} {
				sd := math.Sqrt(w[3] + c.psi)
				up := func(mu float64) float64 { return 0.5 * math.Erfc((-0.4-mu)/(sd*math.Sqrt2)) }
				want := up(r[1]) - up(0)
				name := fmt.Sprintf("impulse_probability_%s[a->b,h=%d]", c.scope, h)
				if v := got[name]; math.Abs(v-want) > 1e-9 {
					t.Errorf("%s = %.9f, want %.9f", name, v, want)
				}
			}
			r = mul(A, r)
		}
	}
}

// TestImpulseOrdinal: for one ordinal outcome (carry-over 0.6, three
// thresholds), the per-category impulse probabilities equal normal
// probability differences computed here, sum to 0 over the categories,
// and weight to the mean-category response.
func TestImpulseOrdinal(t *testing.T) {
	tau := []float64{-0.8, 0.1, 0.9}
	tr := Truth{Names: []string{"y"}, Types: []model.OutcomeType{model.Ordinal}, Tau: [][]float64{tau}, Psi: []float64{0.5}, A: []float64{0.6}, Sigma: []float64{1}, Sigma1: []float64{1}}
	csv, err := Simulate(tr, 40, 4, newRand(1))
	if err != nil {
		t.Fatal(err)
	}
	l := layoutFrom(t, "data: {csv: x.csv, person: person, occasion: occasion}\noutcomes: [{name: y, type: ordinal, categories: 4, lowest: 0}]\ndynamics: {lags: own, impulse_horizon: 3}\nmeans: {over_time: equal}\n", csv)
	got := derivedAt(t, l, []float64{-0.8, 0.1, 0.9, 0.5, 0.6})
	cdf := func(x float64) float64 { return 0.5 * math.Erfc(-x/math.Sqrt2) }
	pc := func(c int, mu, sd float64) float64 {
		lo, hi := math.Inf(-1), math.Inf(1)
		if c > 0 {
			lo = tau[c-1]
		}
		if c < 3 {
			hi = tau[c]
		}
		return cdf((hi-mu)/sd) - cdf((lo-mu)/sd)
	}
	w, r := 0.0, 0.6 // W_h, response
	for h := 1; h <= 3; h++ {
		w = 0.36*w + 1
		for _, sc := range []struct {
			scope string
			psi   float64
		}{{"typical", 0}, {"average", 0.5}} {
			sd := math.Sqrt(w + sc.psi)
			sum, score := 0.0, 0.0
			for c := 0; c < 4; c++ {
				name := fmt.Sprintf("impulse_category_%s[y->y,%d,h=%d]", sc.scope, c, h)
				want := pc(c, r, sd) - pc(c, 0, sd)
				v, ok := got[name]
				if !ok || math.Abs(v-want) > 1e-9 {
					t.Errorf("%s = %v (present %v), want %.9f", name, v, ok, want)
				}
				sum += v
				score += float64(c+1) * v
			}
			if math.Abs(sum) > 1e-12 {
				t.Errorf("%s, h=%d: category changes sum to %g", sc.scope, h, sum)
			}
			name := fmt.Sprintf("impulse_score_%s[y->y,h=%d]", sc.scope, h)
			if v := got[name]; math.Abs(v-score) > 1e-9 {
				t.Errorf("%s = %.9f, categories give %.9f", name, v, score)
			}
		}
		r *= 0.6
	}
}

// derivedAt returns the derived quantities, by name, of a state of l with
// parameters v (in Params order).
func derivedAt(t *testing.T, l *Layout, v []float64) map[string]float64 {
	t.Helper()
	st := NewState(l, newRand(2))
	if err := st.Inject(v); err != nil {
		t.Fatal(err)
	}
	got := map[string]float64{}
	for k, x := range st.ExtractDerived(nil, NewDerivedWork(l)) {
		got[l.DerivedParams()[k].Name] = x
	}
	return got
}
