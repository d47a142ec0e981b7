package sampler

import (
	"fmt"
	"math"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/lagstar/lagstar/diagnostics"
	"github.com/lagstar/lagstar/internal/dense"
	"github.com/lagstar/lagstar/model"
)

// armaMap returns the (T*J) x (T*J) matrix B with w = B zeta for the
// ARMA(1,1) within part of the state, built column by column by running
// the model's defining equations (w_1 = zeta_1, w_t = A_t w_{t-1} +
// zeta_t + M_t zeta_{t-1}) on unit innovations: an independent route to
// the covariance B D B'.
func armaMap(s *State) *mat.Dense {
	J, T := s.L.J, s.L.T
	JJ := J * J
	n := T * J
	b := mat.NewDense(n, n, nil)
	for col := 0; col < n; col++ {
		zeta := make([]float64, n)
		zeta[col] = 1
		w := make([]float64, n)
		for t := 0; t < T; t++ {
			for r := 0; r < J; r++ {
				v := zeta[t*J+r]
				if t > 0 {
					for c := 0; c < J; c++ {
						v += s.A[t*JJ+r*J+c] * w[(t-1)*J+c]
					}
					if t > 1 {
						v += s.M[t*J+r] * zeta[(t-1)*J+r]
					}
				}
				w[t*J+r] = v
			}
		}
		for k := range w {
			b.Set(k, col, w[k])
		}
	}
	return b
}

// armaCov returns B D B', D = blockdiag(Sigma_t).
func armaCov(s *State) *mat.SymDense {
	J, T := s.L.J, s.L.T
	JJ := J * J
	n := T * J
	d := mat.NewDense(n, n, nil)
	for t := 0; t < T; t++ {
		for a := 0; a < J; a++ {
			for c := 0; c < J; c++ {
				d.Set(t*J+a, t*J+c, s.Sig[t*JJ+a*J+c])
			}
		}
	}
	b := armaMap(s)
	var bd, c mat.Dense
	bd.Mul(b, d)
	c.Mul(&bd, b.T())
	sym := mat.NewSymDense(n, nil)
	for i := 0; i < n; i++ {
		for k := i; k < n; k++ {
			sym.SetSym(i, k, 0.5*(c.At(i, k)+c.At(k, i)))
		}
	}
	return sym
}

const armaPairYAML = `
data: {csv: x.csv, person: person, occasion: occasion}
outcomes: [{name: a, type: continuous}, {name: b, type: continuous}]
person_differences: {random_intercepts: false}
dynamics: {lags: cross, moving_average: true, over_time: free}
means: {over_time: equal}
`

// TestInnovationDensityIsExact checks, for paths and moving averages free
// over time, that the innovation recursion's log density (what every
// ARMA block uses) equals the multivariate normal log density under the
// covariance B D B' built independently (armaMap), and that
// WithinCovariances gives the same covariance blocks, to 1e-9.
func TestInnovationDensityIsExact(t *testing.T) {
	csv, err := Simulate(Truth{Names: []string{"a", "b"}, Types: []model.OutcomeType{model.Continuous, model.Continuous},
		Tau: [][]float64{nil, nil}, Sigma: []float64{1, 0, 0, 1}, Sigma1: []float64{1, 0, 0, 1}}, 3, 6, newRand(1))
	if err != nil {
		t.Fatal(err)
	}
	l := layoutFrom(t, armaPairYAML, csv)
	rng := newRand(2)
	s := NewState(l, rng)
	J, T := l.J, l.T
	JJ := J * J
	for k := JJ; k < len(s.A); k++ {
		s.A[k] = 0.6 * (rng.Float64() - 0.5)
	}
	for k := 2 * J; k < len(s.M); k++ {
		s.M[k] = 1.6 * (rng.Float64() - 0.5)
	}
	for g := range s.SD {
		for j := range s.SD[g] {
			s.SD[g][j] = 0.5 + rng.Float64()
		}
		s.R[g][1], s.R[g][2] = 0.4*rng.Float64(), 0
		s.R[g][2] = s.R[g][1]
	}
	if err := s.Refresh(); err != nil {
		t.Fatal(err)
	}
	cov := armaCov(s)
	v := make([]float64, T*JJ)
	blocks := make([]float64, T*T*JJ)
	s.WithinCovariances(v, blocks, make([]float64, JJ))
	for t1 := 0; t1 < T; t1++ {
		for t2 := t1; t2 < T; t2++ {
			for a := 0; a < J; a++ {
				for c := 0; c < J; c++ {
					got := blocks[(t1*T+t2)*JJ+a*J+c]
					want := cov.At(t2*J+a, t1*J+c)
					if math.Abs(got-want) > 1e-9 {
						t.Fatalf("Cov(w_%d[%d], w_%d[%d]) = %g, want %g", t2, a, t1, c, got, want)
					}
				}
			}
		}
	}
	normal, ok := newMVN(make([]float64, T*J), cov)
	if !ok {
		t.Fatal("covariance not positive definite")
	}
	w, z := make([]float64, T*J), make([]float64, T*J)
	for range 5 {
		for k := range w {
			w[k] = 2 * rng.NormFloat64()
		}
		s.innovationsInto(z, w, T)
		got := 0.0
		for u := 0; u < T; u++ {
			got += -0.5*dense.Quad(s.SigInv[u*JJ:(u+1)*JJ], z[u*J:(u+1)*J], J) - 0.5*s.LogDet[u] - 0.5*float64(J)*math.Log(2*math.Pi)
		}
		if want := normal.LogProb(w); math.Abs(got-want) > 1e-9 {
			t.Fatalf("innovation log density %.12f, multivariate normal %.12f", got, want)
		}
	}
}

// mvn is a multivariate normal density by gonum's Cholesky factorization.
type mvn struct {
	mu   []float64
	chol mat.Cholesky
	c    float64
}

func newMVN(mu []float64, cov *mat.SymDense) (*mvn, bool) {
	m := &mvn{mu: mu}
	if !m.chol.Factorize(cov) {
		return nil, false
	}
	m.c = -0.5*m.chol.LogDet() - 0.5*float64(len(mu))*math.Log(2*math.Pi)
	return m, true
}

func (m *mvn) LogProb(x []float64) float64 {
	d := mat.NewVecDense(len(x), nil)
	for k := range x {
		d.SetVec(k, x[k]-m.mu[k])
	}
	var sol mat.VecDense
	if err := m.chol.SolveVecTo(&sol, d); err != nil {
		return math.Inf(-1)
	}
	return m.c - 0.5*mat.Dot(d, &sol)
}

// TestMovingAverageZeroEqualsAR fits the same ordinal panel (simulated
// from a random-intercept AR(1)) with the autoregressive blocks and with
// the ARMA(1,1) blocks holding M at 0: the posterior means must agree
// within Monte Carlo error (4 combined MCSEs).
func TestMovingAverageZeroEqualsAR(t *testing.T) {
	if testing.Short() {
		t.Skip("fits skipped in -short mode")
	}
	tr := Truth{Names: []string{"y"}, Types: []model.OutcomeType{model.Ordinal}, Tau: [][]float64{{-0.7, 0.2, 1}},
		Psi: []float64{0.6}, A: []float64{0.4}, Sigma: []float64{1}, Sigma1: []float64{1}, Missing: 0.05}
	csv, err := Simulate(tr, 150, 6, newRand(5))
	if err != nil {
		t.Fatal(err)
	}
	const y = `
data: {csv: x.csv, person: person, occasion: occasion}
outcomes: [{name: y, type: ordinal, categories: 4, lowest: 0}]
dynamics: {lags: own%s}
means: {over_time: equal}
`
	ar := layoutFrom(t, fmt.Sprintf(y, ""), csv)
	ma := layoutFrom(t, fmt.Sprintf(y, ", moving_average: true"), csv)
	ma.maFixed = true
	ra, rm := runFit(t, ar, 4, 500, 2000, 3), runFit(t, ma, 4, 500, 2000, 4)
	chains := func(res *Result, name string) [][]float64 {
		np := len(res.Params)
		for p, par := range res.Params {
			if par.Name != name {
				continue
			}
			out := make([][]float64, len(res.Draws))
			for c := range res.Draws {
				for d := 0; d < res.Kept[c]; d++ {
					out[c] = append(out[c], res.Draws[c][d*np+p])
				}
			}
			return out
		}
		t.Fatalf("no parameter %s", name)
		return nil
	}
	for _, p := range ra.Params {
		ca, cm := chains(ra, p.Name), chains(rm, p.Name)
		sa, sm := diagnostics.Summarize(ca, 0.95), diagnostics.Summarize(cm, 0.95)
		se := math.Hypot(diagnostics.MCSEMean(ca), diagnostics.MCSEMean(cm))
		t.Logf("%-20s AR %.4f  ARMA(M=0) %.4f  (combined MCSE %.4f)", p.Name, sa.Mean, sm.Mean, se)
		if math.Abs(sa.Mean-sm.Mean) > 4*se {
			t.Errorf("%s: AR posterior mean %.4f, ARMA with M = 0 %.4f: differ by more than 4 MCSE (%.4f)", p.Name, sa.Mean, sm.Mean, se)
		}
	}
	for _, v := range chains(rm, "moving_average[y]")[0] {
		if v != 0 {
			t.Fatalf("moving average moved from 0 to %g", v)
		}
	}
}

// TestContinuousARMAAgainstExactLikelihood fits a continuous ARMA(1,1)
// without random intercepts to 1,500 simulated persons and compares the
// posterior means with the maximizer of the exact Gaussian likelihood
// (each person's vector normal with the covariance B D B' of armaMap and
// mean mu, maximized by Nelder-Mead): with this much data the default
// priors are flat on the likelihood's scale, so the two must agree to a
// fraction of a posterior sd (0.25 sd, plus Monte Carlo error).
func TestContinuousARMAAgainstExactLikelihood(t *testing.T) {
	if testing.Short() {
		t.Skip("fits skipped in -short mode")
	}
	const T, N = 6, 1500
	tr := Truth{Names: []string{"y"}, Types: []model.OutcomeType{model.Continuous}, Tau: [][]float64{nil},
		Nu: repeatPair(3, 3, T)[:T], A: []float64{0.5}, MA: []float64{0.3}, Sigma: []float64{2}, Sigma1: []float64{3}}
	csv, err := Simulate(tr, N, T, newRand(9))
	if err != nil {
		t.Fatal(err)
	}
	l := layoutFrom(t, `
data: {csv: x.csv, person: person, occasion: occasion}
outcomes: [{name: y, type: continuous}]
person_differences: {random_intercepts: false}
dynamics: {lags: own, moving_average: true}
means: {over_time: equal}
`, csv)
	res := runFit(t, l, 2, 500, 1500, 11)
	// Exact likelihood on the data scale; parameters mu, a, m, log s2, log s1.
	pan := l.Panel
	s := NewState(l, newRand(1))
	ybar := make([]float64, T)
	for i := 0; i < N; i++ {
		for u := 0; u < T; u++ {
			ybar[u] += pan.Y[pan.Offset[i]+u] / N
		}
	}
	scatter := mat.NewSymDense(T, nil)
	for i := 0; i < N; i++ {
		y := pan.Y[pan.Offset[i] : pan.Offset[i]+T]
		for a := 0; a < T; a++ {
			for c := a; c < T; c++ {
				scatter.SetSym(a, c, scatter.At(a, c)+(y[a]-ybar[a])*(y[c]-ybar[c]))
			}
		}
	}
	negLL := func(x []float64) float64 {
		s.A[1*1+0], s.A[2], s.A[3], s.A[4], s.A[5] = x[1], x[1], x[1], x[1], x[1]
		for u := 2; u < T; u++ {
			s.M[u] = x[2]
		}
		s.Sig[0] = math.Exp(x[4])
		for u := 1; u < T; u++ {
			s.Sig[u] = math.Exp(x[3])
		}
		if math.Abs(x[2]) >= 1 {
			return math.Inf(1)
		}
		cov := armaCov(s)
		var chol mat.Cholesky
		if !chol.Factorize(cov) {
			return math.Inf(1)
		}
		// sum_i (y_i - mu)(y_i - mu)' = S + N (ybar - mu)(ybar - mu)'.
		sc := mat.NewSymDense(T, nil)
		for a := 0; a < T; a++ {
			for c := a; c < T; c++ {
				sc.SetSym(a, c, scatter.At(a, c)+N*(ybar[a]-x[0])*(ybar[c]-x[0]))
			}
		}
		var inv mat.SymDense
		if err := chol.InverseTo(&inv); err != nil {
			return math.Inf(1)
		}
		tr := 0.0
		for a := 0; a < T; a++ {
			for c := 0; c < T; c++ {
				tr += inv.At(a, c) * sc.At(c, a)
			}
		}
		return 0.5*N*chol.LogDet() + 0.5*tr
	}
	x := nelderMead(negLL, []float64{3, 0.3, 0.1, math.Log(2), math.Log(3)}, 0.2, 6000)
	mle := map[string]float64{"mean[y]": x[0], "autoregression[y]": x[1], "moving_average[y]": x[2],
		"innovation_variance[y]": math.Exp(x[3]), "initial_variance[y]": math.Exp(x[4])}
	sum := summarize(res)
	np := len(res.Params)
	for p, par := range res.Params {
		want, ok := mle[par.Name]
		if !ok {
			t.Fatalf("no maximum-likelihood value for %s", par.Name)
		}
		var xs, xx float64
		n := 0
		for c := range res.Draws {
			for d := 0; d < res.Kept[c]; d++ {
				v := res.Draws[c][d*np+p]
				xs += v
				xx += v * v
				n++
			}
		}
		m := xs / float64(n)
		sd := math.Sqrt(xx/float64(n) - m*m)
		t.Logf("%-24s posterior mean %.4f (sd %.4f), maximum likelihood %.4f", par.Name, sum[par.Name].mean, sd, want)
		if math.Abs(m-want) > 0.25*sd+3*sd/math.Sqrt(float64(n)/20) {
			t.Errorf("%s: posterior mean %.4f is %.2f posterior sd from the maximum-likelihood value %.4f", par.Name, m, math.Abs(m-want)/sd, want)
		}
	}
}

// nelderMead minimizes f from x0 by the simplex method of Nelder & Mead
// (1965, Computer Journal 7:308) with the standard coefficients, from a
// simplex of side step, for iters iterations, restarting once from the
// best point.
func nelderMead(f func([]float64) float64, x0 []float64, step float64, iters int) []float64 {
	n := len(x0)
	best := append([]float64(nil), x0...)
	for range 2 {
		pts := make([][]float64, n+1)
		val := make([]float64, n+1)
		for i := range pts {
			pts[i] = append([]float64(nil), best...)
			if i > 0 {
				pts[i][i-1] += step
			}
			val[i] = f(pts[i])
		}
		at := func(c []float64, d []float64, k float64) []float64 {
			out := make([]float64, n)
			for q := range out {
				out[q] = c[q] + k*(d[q]-c[q])
			}
			return out
		}
		for range iters {
			// order
			for i := 1; i <= n; i++ {
				for k := i; k > 0 && val[k] < val[k-1]; k-- {
					val[k], val[k-1] = val[k-1], val[k]
					pts[k], pts[k-1] = pts[k-1], pts[k]
				}
			}
			c := make([]float64, n)
			for _, p := range pts[:n] {
				for q := range c {
					c[q] += p[q] / float64(n)
				}
			}
			r := at(c, pts[n], -1)
			fr := f(r)
			switch {
			case fr < val[0]:
				e := at(c, pts[n], -2)
				if fe := f(e); fe < fr {
					pts[n], val[n] = e, fe
				} else {
					pts[n], val[n] = r, fr
				}
			case fr < val[n-1]:
				pts[n], val[n] = r, fr
			default:
				k := at(c, pts[n], 0.5)
				if fk := f(k); fk < val[n] {
					pts[n], val[n] = k, fk
				} else {
					for i := 1; i <= n; i++ {
						pts[i] = at(pts[0], pts[i], 0.5)
						val[i] = f(pts[i])
					}
				}
			}
		}
		bi := 0
		for i := range val {
			if val[i] < val[bi] {
				bi = i
			}
		}
		best = pts[bi]
		step /= 10
	}
	return best
}

// TestWithinAutocorrelations: the derived lag-1..3 autocorrelations of an
// ARMA(1,1) (two outcomes, cross-lags) equal the correlations far out in
// a long panel under the independently built covariance B D B' (armaMap),
// where the process has forgotten its start, to 1e-8.
func TestWithinAutocorrelations(t *testing.T) {
	const T = 80
	csv, err := Simulate(Truth{Names: []string{"a", "b"}, Types: []model.OutcomeType{model.Continuous, model.Continuous},
		Tau: [][]float64{nil, nil}, Sigma: []float64{1, 0, 0, 1}, Sigma1: []float64{1, 0, 0, 1}}, 2, T, newRand(1))
	if err != nil {
		t.Fatal(err)
	}
	l := layoutFrom(t, strings.Replace(armaPairYAML, "over_time: free", "over_time: equal", 1), csv)
	s := NewState(l, newRand(2))
	J := l.J
	JJ := J * J
	a := []float64{0.5, 0.2, -0.1, 0.3}
	for u := 1; u < T; u++ {
		copy(s.A[u*JJ:(u+1)*JJ], a)
	}
	for u := 2; u < T; u++ {
		s.M[u*J], s.M[u*J+1] = -0.4, 0.35
	}
	for g := range s.SD {
		s.SD[g][0], s.SD[g][1] = 1.2, 0.8
		s.R[g][1], s.R[g][2] = 0.3, 0.3
	}
	if err := s.Refresh(); err != nil {
		t.Fatal(err)
	}
	names := map[string]int{}
	for k, p := range l.DerivedParams() {
		names[p.Name] = k
	}
	got := s.ExtractDerived(nil, NewDerivedWork(l))
	cov := armaCov(s)
	last := T - 1
	for j, o := range []string{"a", "b"} {
		for k := 1; k <= 3; k++ {
			want := cov.At(last*J+j, (last-k)*J+j) / math.Sqrt(cov.At(last*J+j, last*J+j)*cov.At((last-k)*J+j, (last-k)*J+j))
			idx, ok := names[fmt.Sprintf("within_autocorrelation[%s,lag=%d]", o, k)]
			if !ok {
				t.Fatalf("no derived autocorrelation for %s at lag %d", o, k)
			}
			if math.Abs(got[idx]-want) > 1e-8 {
				t.Errorf("within_autocorrelation[%s,lag=%d] = %.10f, far-out correlation %.10f", o, k, got[idx], want)
			}
		}
	}
}

// TestMovingAverageResumeAndCores: an ARMA(1,1) fit of several shards of
// persons gives the same draws at GOMAXPROCS 1 and 8, and a run resumed
// from a part-way checkpoint (on one core) gives the uninterrupted draws:
// the moving-average blocks' adapted state and State.M survive a
// checkpoint.
func TestMovingAverageResumeAndCores(t *testing.T) {
	if testing.Short() {
		t.Skip("large panel skipped in -short mode")
	}
	tr := Truth{Names: []string{"a", "b"}, Types: []model.OutcomeType{model.Binary, model.Binary}, Tau: [][]float64{{0.2}, {-0.3}},
		Psi: []float64{0.5, 0.1, 0.1, 0.4}, A: []float64{0.4, 0.1, 0, 0.3}, MA: []float64{-0.3, 0.2},
		Sigma: []float64{1, 0.2, 0.2, 1}, Sigma1: []float64{1, 0.2, 0.2, 1}, Missing: 0.05}
	csv, err := Simulate(tr, 2*personsPerShard+10, 4, newRand(4))
	if err != nil {
		t.Fatal(err)
	}
	l := layoutFrom(t, `
data: {csv: x.csv, person: person, occasion: occasion}
outcomes: [{name: a, type: binary}, {name: b, type: binary}]
dynamics: {lags: cross, moving_average: true}
means: {over_time: equal}
`, csv)
	requireCoresAndResume(t, l, "ARMA")
}
