package sampler

import (
	"fmt"
	"math"
	"slices"
	"testing"

	"github.com/lagstar/lagstar/internal/dense"
	"github.com/lagstar/lagstar/model"
)

// growthTruthValues adds the growth parameters of tr to the true values
// of truthValues (which leaves the random intercepts out: tr.Psi is nil).
func growthTruthValues(tr Truth, l *Layout) map[string]float64 {
	out := truthValues(tr, l)
	J, n := l.J, 2*l.J
	names := tr.Names
	p := tr.GrowthPsi
	corr := func(r, c int) float64 { return p[r*n+c] / math.Sqrt(p[r*n+r]*p[c*n+c]) }
	for j := 0; j < J; j++ {
		if !l.Cat[j] {
			out[fmt.Sprintf("intercept_mean[%s]", names[j])] = tr.GrowthMean[j]
		}
		out[fmt.Sprintf("slope_mean[%s]", names[j])] = tr.GrowthMean[J+j]
		out[fmt.Sprintf("ri_variance[%s]", names[j])] = p[j*n+j]
		out[fmt.Sprintf("slope_variance[%s]", names[j])] = p[(J+j)*n+J+j]
		out[fmt.Sprintf("intercept_slope_correlation[%s]", names[j])] = corr(j, J+j)
		for k := 0; k < J; k++ {
			if k > j {
				out[fmt.Sprintf("ri_correlation[%s,%s]", names[j], names[k])] = corr(j, k)
				out[fmt.Sprintf("slope_correlation[%s,%s]", names[j], names[k])] = corr(J+j, J+k)
			}
			if k != j {
				out[fmt.Sprintf("intercept_slope_correlation[%s,%s]", names[j], names[k])] = corr(j, J+k)
			}
		}
	}
	return out
}

// TestRecoveryGrowth fits growth with autocorrelated residuals (a yearly
// binary symptom; two continuous outcomes with cross-lags, time scores
// from the occasion values) to data simulated from known values and
// requires the 95% intervals to cover at least 90% of the true values.
func TestRecoveryGrowth(t *testing.T) {
	if testing.Short() {
		t.Skip("recovery fits skipped in -short mode")
	}
	cases := []recoveryCase{
		{
			name: "binary growth with AR(1) residuals",
			yaml: `
data: {csv: x.csv, person: person, occasion: occasion}
outcomes: [{name: y, type: binary}]
person_differences: {random_slopes: true}
dynamics: {lags: own}
`,
			tr: Truth{Names: []string{"y"}, Types: []model.OutcomeType{model.Binary},
				Tau: [][]float64{{0.4}}, GrowthPsi: []float64{0.8, -0.06, -0.06, 0.05}, GrowthMean: []float64{0, -0.15},
				A: []float64{0.3}, Sigma: []float64{1}, Sigma1: []float64{1}, Missing: 0.05},
			n: 800, periods: 6,
		},
		{
			name: "ordinal and continuous, cross-lagged residuals",
			yaml: `
data: {csv: x.csv, person: person, occasion: occasion}
outcomes: [{name: a, type: ordinal, categories: 5, lowest: 0}, {name: b, type: continuous}]
person_differences: {random_slopes: true, time_scores: occasion_values}
dynamics: {lags: cross}
`,
			tr: Truth{Names: []string{"a", "b"}, Types: []model.OutcomeType{model.Ordinal, model.Continuous}, Tau: [][]float64{{-1, -0.3, 0.4, 1.1}, nil},
				GrowthPsi: []float64{
					0.7, 0.3, -0.05, 0.02,
					0.3, 0.8, 0.03, -0.04,
					-0.05, 0.03, 0.06, 0.01,
					0.02, -0.04, 0.01, 0.04},
				GrowthMean: []float64{0, -1, 0.2, 0.1},
				A:          []float64{0.3, 0.1, -0.15, 0.3}, Sigma: []float64{1, 0.3, 0.3, 0.8}, Sigma1: []float64{1, 0.2, 0.2, 1}, Missing: 0.05},
			n: 500, periods: 6,
		},
	}
	runRecovery(t, cases, 120, 27, func(c recoveryCase, l *Layout) map[string]float64 { return growthTruthValues(c.tr, l) })
}

// TestGrowthMeansAgainstExactMarginal checks the growth block on two
// continuous outcomes with cross-lagged residuals against the exact
// multivariate normal marginal: with the factors integrated out, y_i ~
// N(X mu, X Psi X' + W), X = [1, s_t] per outcome and W the covariance of
// the within part over the occasions (built here from its definition,
// w_1 ~ N(0, Sigma_1), w_t = A w_t-1 + zeta_t), so mu | y, Psi, A,
// Sigma is normal with precision N X' V^-1 X + prior precision and
// linear term X' V^-1 sum_i y_i (generalized least squares). The block
// draws mu from that marginal each time (its draws are independent), so
// the mean and covariance of its draws must match.
func TestGrowthMeansAgainstExactMarginal(t *testing.T) {
	tr := Truth{Names: []string{"a", "b"}, Types: []model.OutcomeType{model.Continuous, model.Continuous}, Tau: [][]float64{nil, nil},
		GrowthPsi: []float64{
			1.0, 0.3, -0.05, 0.02,
			0.3, 0.8, 0.03, -0.04,
			-0.05, 0.03, 0.06, 0.01,
			0.02, -0.04, 0.01, 0.04},
		GrowthMean: []float64{2, -1, 0.3, 0.1},
		A:          []float64{0.4, 0.1, -0.15, 0.3}, Sigma: []float64{1, 0.3, 0.3, 0.8}, Sigma1: []float64{1.2, 0.2, 0.2, 1}}
	const T = 5
	csv, err := Simulate(tr, 40, T, newRand(3))
	if err != nil {
		t.Fatal(err)
	}
	l := layoutFrom(t, `
data: {csv: x.csv, person: person, occasion: occasion}
outcomes: [{name: a, type: continuous}, {name: b, type: continuous}]
person_differences: {random_slopes: true, time_scores: [0, 1, 2, 4, 7]}
dynamics: {lags: cross}
`, csv)
	rng := newRand(11)
	st := NewState(l, rng)
	if err := st.DrawPrior(l.Priors, rng); err != nil {
		t.Fatal(err)
	}
	J, n := l.J, 2*l.J
	JJ, TJ := J*J, T*J
	// W over the occasions, then V = X Psi X' + W.
	v := make([]float64, TJ*TJ)
	blk := make([]float64, T*JJ) // V_t
	copy(blk, st.Sig[:JJ])
	tmp := make([]float64, JJ)
	for s := 1; s < T; s++ {
		dense.Mul(tmp, st.A[s*JJ:(s+1)*JJ], blk[(s-1)*JJ:s*JJ], J, J, J)
		dense.MulBT(blk[s*JJ:(s+1)*JJ], tmp, st.A[s*JJ:(s+1)*JJ], J, J, J)
		for k := range JJ {
			blk[s*JJ+k] += st.Sig[s*JJ+k]
		}
	}
	for t1 := 0; t1 < T; t1++ {
		cur := slices.Clone(blk[t1*JJ : (t1+1)*JJ]) // cov(w_t2, w_t1)
		for t2 := t1; t2 < T; t2++ {
			if t2 > t1 {
				dense.Mul(tmp, st.A[t2*JJ:(t2+1)*JJ], cur, J, J, J)
				copy(cur, tmp)
			}
			for a := 0; a < J; a++ {
				for b := 0; b < J; b++ {
					v[(t2*J+a)*TJ+t1*J+b] = cur[a*J+b]
					v[(t1*J+b)*TJ+t2*J+a] = cur[a*J+b]
				}
			}
		}
	}
	x := make([]float64, TJ*n)
	for s := 0; s < T; s++ {
		for j := 0; j < J; j++ {
			x[(s*J+j)*n+j], x[(s*J+j)*n+J+j] = 1, l.Time[s]
		}
	}
	xp := make([]float64, TJ*n)
	dense.Mul(xp, x, st.Psi, TJ, n, n)
	xpx := make([]float64, TJ*TJ)
	dense.MulBT(xpx, xp, x, TJ, n, TJ)
	for k := range v {
		v[k] += xpx[k]
	}
	vinv := make([]float64, TJ*TJ)
	if !dense.Inverse(vinv, v, TJ, make([]float64, TJ*TJ), make([]float64, TJ)) {
		t.Fatal("V not positive definite")
	}
	vx := make([]float64, TJ*n)
	dense.Mul(vx, vinv, x, TJ, TJ, n)
	q := make([]float64, n*n)
	dense.MulTA(q, x, vx, TJ, n, n)
	ysum := make([]float64, TJ)
	for i := 0; i < l.N; i++ {
		for c := 0; c < TJ; c++ {
			ysum[c] += st.Ystar[l.Panel.Offset[i]+c]
		}
	}
	lin := make([]float64, n)
	dense.MulTA(lin, vx, ysum, TJ, n, 1)
	for a := range q {
		q[a] *= float64(l.N)
	}
	for k := 0; k < n; k++ {
		sd := growthMeanSD(l, l.Priors, k)
		q[k*n+k] += 1 / (sd * sd)
	}
	cov := make([]float64, n*n)
	if !dense.Inverse(cov, q, n, make([]float64, n*n), make([]float64, n)) {
		t.Fatal("precision not positive definite")
	}
	mean := make([]float64, n)
	dense.MulVec(mean, cov, lin, n, n)

	gb := NewGrowthBlock(l)
	const D = 20000
	sum, sq := make([]float64, n), make([]float64, n*n)
	for range D {
		if err := gb.Update(st, rng); err != nil {
			t.Fatal(err)
		}
		for a := 0; a < n; a++ {
			sum[a] += st.GMean[a]
			for b := 0; b < n; b++ {
				sq[a*n+b] += st.GMean[a] * st.GMean[b]
			}
		}
	}
	for a := 0; a < n; a++ {
		m := sum[a] / D
		se := math.Sqrt(cov[a*n+a] / D)
		if z := (m - mean[a]) / se; math.Abs(z) > 4 {
			t.Errorf("mean %d: draws %.5f, exact %.5f (z = %.1f)", a, m, mean[a], z)
		}
		for b := 0; b <= a; b++ {
			c := sq[a*n+b]/D - m*sum[b]/D
			want := cov[a*n+b]
			// The sample covariance's sd is about sqrt((s_aa s_bb + s_ab^2)/D).
			tol := 5 * math.Sqrt((cov[a*n+a]*cov[b*n+b]+want*want)/D)
			if math.Abs(c-want) > tol {
				t.Errorf("covariance (%d,%d): draws %.3g, exact %.3g (tolerance %.2g)", a, b, c, want, tol)
			}
		}
	}
}

// TestGrowthResumeAndCores: a growth fit of a panel large enough for
// several shards gives the same draws at GOMAXPROCS 1 and 8, and resumed
// from a mid-run checkpoint (which carries the slopes and growth means in
// the term's own storage) the same draws as uninterrupted.
func TestGrowthResumeAndCores(t *testing.T) {
	if testing.Short() {
		t.Skip("large panel skipped in -short mode")
	}
	tr := Truth{Names: []string{"a", "b"}, Types: []model.OutcomeType{model.Binary, model.Continuous}, Tau: [][]float64{{0.2}, nil},
		GrowthPsi: []float64{0.5, 0.1, 0, 0, 0.1, 0.8, 0, 0, 0, 0, 0.05, 0.01, 0, 0, 0.01, 0.04}, GrowthMean: []float64{0, 1, -0.1, 0.2},
		A: []float64{0.4, 0.1, 0, 0.3}, Sigma: []float64{1, 0.2, 0.2, 1}, Sigma1: []float64{1, 0.2, 0.2, 1}, Missing: 0.05}
	csv, err := Simulate(tr, 2*personsPerShard+10, 4, newRand(4))
	if err != nil {
		t.Fatal(err)
	}
	l := layoutFrom(t, `
data: {csv: x.csv, person: person, occasion: occasion}
outcomes: [{name: a, type: binary}, {name: b, type: continuous}]
person_differences: {random_slopes: true}
dynamics: {lags: cross}
`, csv)
	requireCoresAndResume(t, l, "growth")
}
