package sampler

import (
	"context"
	"math"
	"slices"
	"strings"
	"testing"

	"github.com/lagstar/lagstar/model"
	"gonum.org/v1/gonum/integrate/quad"
)

// orthantByQuadrature is P(X > h, Y > k) for standard bivariate normals of
// correlation r, as int_h^inf phi(x) Phi((r x - k)/sqrt(1 - r^2)) dx by
// 2000-point Gauss-Legendre quadrature: independent of internal/bvn.
func orthantByQuadrature(h, k, r float64) float64 {
	s := math.Sqrt(1 - r*r)
	f := func(x float64) float64 {
		return math.Exp(-x*x/2) / math.Sqrt(2*math.Pi) * 0.5 * math.Erfc(-(r*x-k)/(s*math.Sqrt2))
	}
	return quad.Fixed(f, math.Max(h, -10), 10, 2000, quad.Legendre{}, 0)
}

// TestTransitionsExact: for a univariate binary model with known
// parameters (threshold 0.3, carry-over 0.6, intercept variance 0.5,
// innovation variance 1, stationary within part), the transition
// probabilities equal the bivariate-normal orthant computation by
// quadrature to 1e-6, for a typical person (correlation 0.6, variance
// 1/(1-0.36)) and averaged over persons (the intercept variance added).
func TestTransitionsExact(t *testing.T) {
	tr := Truth{Names: []string{"y"}, Types: []model.OutcomeType{model.Binary}, Tau: [][]float64{{0.3}}, Psi: []float64{0.5}, A: []float64{0.6}, Sigma: []float64{1}, Missing: 0}
	csv, err := Simulate(tr, 30, 4, newRand(1))
	if err != nil {
		t.Fatal(err)
	}
	l := layoutFrom(t, "data: {csv: x.csv, person: person, occasion: occasion}\noutcomes: [{name: y, type: binary}]\ndynamics: {lags: own, first_occasion: stationary}\nmeans: {over_time: equal}\n", csv)
	st := NewState(l, newRand(2))
	// Parameters: threshold, ri_variance, autoregression.
	if err := st.Inject([]float64{0.3, 0.5, 0.6}); err != nil {
		t.Fatal(err)
	}
	got := map[string]float64{}
	for k, v := range st.ExtractDerived(nil, NewDerivedWork(l)) {
		got[l.DerivedParams()[k].Name] = v
	}
	V := 1 / (1 - 0.36)
	for _, c := range []struct {
		scope     string
		variance  float64
		covarianc float64
	}{{"typical", V, 0.6 * V}, {"average", V + 0.5, 0.6*V + 0.5}} {
		sd, r := math.Sqrt(c.variance), c.covarianc/c.variance
		h := 0.3 / sd
		pYes := 0.5 * math.Erfc(h/math.Sqrt2)
		both := orthantByQuadrature(h, h, r)
		stay := both / pYes
		onset := (pYes - both) / (1 - pYes) // P(no then yes) = P(yes now) - P(both)
		for name, want := range map[string]float64{"p_stay_" + c.scope + "[y,1]": stay, "p_onset_" + c.scope + "[y]": onset} {
			v, ok := got[name]
			if !ok {
				t.Fatalf("no derived quantity %s among %v", name, l.DerivedParams())
			}
			if math.Abs(v-want) > 1e-6 {
				t.Errorf("%s = %.9f, quadrature %.9f", name, v, want)
			}
		}
	}
}

// TestTransitionsCoverEmpirical: fitted to a large simulated binary panel
// (20,000 persons x 4 waves), the 95% intervals of the average-person
// transition probabilities cover the panel's own transition shares (the
// truth's shares up to sampling error of about 0.004).
func TestTransitionsCoverEmpirical(t *testing.T) {
	if testing.Short() {
		t.Skip("large fit skipped in -short mode")
	}
	tr := Truth{Names: []string{"y"}, Types: []model.OutcomeType{model.Binary}, Tau: [][]float64{{0.4}}, Psi: []float64{0.6}, A: []float64{0.4}, Sigma: []float64{1}, Missing: 0}
	csv, err := Simulate(tr, 20000, 4, newRand(5))
	if err != nil {
		t.Fatal(err)
	}
	// Empirical shares over waves 1-3 -> 2-4.
	var yy, y1, ny, n0 float64
	prev := map[string]string{}
	for _, line := range strings.Split(strings.TrimSpace(string(csv)), "\n")[1:] {
		f := strings.Split(line, ",")
		if p, ok := prev[f[0]]; ok && f[1] != "1" {
			if p == "1" {
				y1++
				if f[2] == "1" {
					yy++
				}
			} else {
				n0++
				if f[2] == "1" {
					ny++
				}
			}
		}
		prev[f[0]] = f[2]
	}
	l := layoutFrom(t, "data: {csv: x.csv, person: person, occasion: occasion}\noutcomes: [{name: y, type: binary}]\ndynamics: {lags: own, first_occasion: stationary}\nmeans: {over_time: equal}\n", csv)
	res, err := Run(context.Background(), l, Options{Chains: 1, Warmup: 300, Draws: 400, Seed: 3, ThresholdUpdate: model.ThresholdJoint})
	if err != nil {
		t.Fatal(err)
	}
	nd := len(res.Derived)
	for k, p := range res.Derived {
		want := -1.0
		switch p.Name {
		case "p_stay_average[y,1]":
			want = yy / y1
		case "p_onset_average[y]":
			want = ny / n0
		default:
			continue
		}
		var xs []float64
		for d := 0; d < res.Kept[0]; d++ {
			xs = append(xs, res.DerivedDraws[0][d*nd+k])
		}
		lo, hi := quantileOf(xs, 0.025), quantileOf(xs, 0.975)
		if want < lo || want > hi {
			t.Errorf("%s: 95%% interval [%.4f, %.4f] misses the panel's share %.4f", p.Name, lo, hi, want)
		}
		t.Logf("%s: [%.4f, %.4f], panel share %.4f", p.Name, lo, hi, want)
	}
}

func quantileOf(xs []float64, p float64) float64 {
	s := append([]float64(nil), xs...)
	slices.Sort(s)
	return s[int(math.Round(p*float64(len(s)-1)))]
}
