package compare

import (
	"context"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/sampler"
	"gonum.org/v1/gonum/mat"
)

// mvn is a multivariate normal density with mean mu and covariance cov,
// through gonum's Cholesky factorization.
type mvn struct {
	mu   []float64
	chol mat.Cholesky
	l    *mat.TriDense
}

func newMVN(t *testing.T, mu []float64, cov *mat.SymDense) *mvn {
	t.Helper()
	m := &mvn{mu: mu}
	if !m.chol.Factorize(cov) {
		t.Fatal("covariance not positive definite")
	}
	m.l = mat.NewTriDense(len(mu), mat.Lower, nil)
	m.chol.LTo(m.l)
	return m
}

func (m *mvn) logProb(y []float64) float64 {
	n := len(y)
	d := mat.NewVecDense(n, nil)
	for k := range y {
		d.SetVec(k, y[k]-m.mu[k])
	}
	var x mat.VecDense
	if err := m.chol.SolveVecTo(&x, d); err != nil {
		panic(err)
	}
	return -0.5*mat.Dot(d, &x) - 0.5*m.chol.LogDet() - 0.5*float64(n)*math.Log(2*math.Pi)
}

// draw writes mu + L z (z standard normal) into dst.
func (m *mvn) draw(dst []float64, rng *rand.Rand) {
	n := len(dst)
	z := make([]float64, n)
	for k := range z {
		z[k] = rng.NormFloat64()
	}
	for a := 0; a < n; a++ {
		v := m.mu[a]
		for b := 0; b <= a; b++ {
			v += m.l.At(a, b) * z[b]
		}
		dst[a] = v
	}
}

// drawOf fits briefly and returns the layout, the last draw and a state
// holding it.
func drawOf(t *testing.T, yaml string, tr sampler.Truth, n, T int) (*sampler.Layout, []float64, *sampler.State) {
	t.Helper()
	csv, err := sampler.Simulate(tr, n, T, rand.New(rand.NewPCG(5, 6)))
	if err != nil {
		t.Fatal(err)
	}
	l := layoutFrom(t, yaml, csv)
	res, err := sampler.Run(context.Background(), l, sampler.Options{Chains: 1, Warmup: 40, Draws: 1, Seed: 2})
	if err != nil {
		t.Fatal(err)
	}
	v := res.Vectors()[0]
	st := sampler.NewState(l, rand.New(rand.NewPCG(1, 1)))
	if err := st.Inject(v); err != nil {
		t.Fatal(err)
	}
	return l, v, st
}

// fullCov builds, independently of the package's code, the covariance of
// person i's latent responses on the standardized scale over cells
// (t, j), t < T: Psi + Cov(w_t, w_s), with Cov(w_t, w_s) = A^{t-s} V_s and
// V_1 = Sigma_1, V_t = A V_{t-1} A' + Sigma.
func fullCov(st *sampler.State, T int) *mat.SymDense {
	J := st.L.J
	JJ := J * J
	V := make([]*mat.Dense, T)
	V[0] = mat.NewDense(J, J, append([]float64(nil), st.Sig[:JJ]...))
	A := mat.NewDense(J, J, append([]float64(nil), st.A[JJ:2*JJ]...))
	for t := 1; t < T; t++ {
		var av, ava mat.Dense
		av.Mul(A, V[t-1])
		ava.Mul(&av, A.T())
		ava.Add(&ava, mat.NewDense(J, J, append([]float64(nil), st.Sig[t*JJ:(t+1)*JJ]...)))
		V[t] = &ava
	}
	S := mat.NewSymDense(T*J, nil)
	for t := 0; t < T; t++ {
		for s := 0; s <= t; s++ {
			c := mat.DenseCopyOf(V[s])
			for k := s; k < t; k++ {
				var next mat.Dense
				next.Mul(A, c)
				c = &next
			}
			for a := 0; a < J; a++ {
				for b := 0; b < J; b++ {
					v := c.At(a, b)
					if st.L.RI {
						v += st.Psi[a*J+b]
					}
					S.SetSym(t*J+a, s*J+b, v)
				}
			}
		}
	}
	return S
}

// TestPersonLikelihoodContinuousExact: with continuous outcomes only, the
// person-level log likelihood is the exact multivariate normal density of
// the person's values on the data's own scale (through gonum's Cholesky).
func TestPersonLikelihoodContinuousExact(t *testing.T) {
	tr := sampler.Truth{Names: []string{"x", "z"}, Types: []model.OutcomeType{model.Continuous, model.Continuous},
		Psi: []float64{0.6, 0.2, 0.2, 0.5}, A: []float64{0.4, 0.1, 0, 0.3}, Sigma: []float64{1, 0.3, 0.3, 1}, Sigma1: []float64{1, 0.2, 0.2, 1}}
	yaml := `data: {csv: d.csv, person: person, occasion: occasion}
outcomes: [{name: x, type: continuous}, {name: z, type: continuous}]
dynamics: {lags: cross}
means: {over_time: free}
`
	const T = 4
	l, v, st := drawOf(t, yaml, tr, 60, T)
	ll, _, err := LogLik(l, [][]float64{v}, 50)
	if err != nil {
		t.Fatal(err)
	}
	S := fullCov(st, T)
	J := l.J
	pan := l.Panel
	for i := 0; i < 8; i++ {
		if pan.Len[i] != T {
			continue
		}
		mu := make([]float64, T*J)
		y := make([]float64, T*J)
		cov := mat.NewSymDense(T*J, nil)
		for c := 0; c < T*J; c++ {
			j := c % J
			mu[c] = l.Center[j] + l.Scale[j]*st.Nu[c]
			y[c] = pan.Y[pan.Offset[i]+c]
			for d := 0; d <= c; d++ {
				cov.SetSym(c, d, l.Scale[j]*l.Scale[d%J]*S.At(c, d))
			}
		}
		if want := newMVN(t, mu, cov).logProb(y); math.Abs(ll[0][i]-want) > 1e-8*math.Abs(want) {
			t.Errorf("person %d: log likelihood %.10g, exact %.10g", i, ll[0][i], want)
		}
	}
}

// TestPersonLikelihoodMixed: a continuous and a binary outcome; the
// likelihood (density of the continuous values times the probability of
// the binary answers given them) agrees with brute-force importance
// sampling from the other direction: draws of the binary latent responses
// from their marginal normal, weighted by whether they fall in the answers'
// intervals and by the continuous values' conditional density.
func TestPersonLikelihoodMixed(t *testing.T) {
	tr := sampler.Truth{Names: []string{"x", "b"}, Types: []model.OutcomeType{model.Continuous, model.Binary}, Tau: [][]float64{nil, {0.2}},
		Psi: []float64{0.5, 0.2, 0.2, 0.6}, A: []float64{0.3, 0.1, 0.15, 0.3}, Sigma: []float64{1, 0.3, 0.3, 1}, Sigma1: []float64{1, 0.2, 0.2, 1}}
	yaml := `data: {csv: d.csv, person: person, occasion: occasion}
outcomes: [{name: x, type: continuous}, {name: b, type: binary}]
dynamics: {lags: cross}
means: {over_time: equal}
`
	const T = 3
	l, v, st := drawOf(t, yaml, tr, 80, T)
	ll, rel, err := LogLik(l, [][]float64{v}, 2000)
	if err != nil {
		t.Fatal(err)
	}
	S := fullCov(st, T)
	pan := l.Panel
	J := l.J
	rng := rand.New(rand.NewPCG(9, 9))
	for i := 0; i < 3; i++ {
		if pan.Len[i] != T {
			continue
		}
		var ci, ki []int // continuous and binary cells
		for c := 0; c < T*J; c++ {
			if c%J == 0 {
				ci = append(ci, c)
			} else {
				ki = append(ki, c)
			}
		}
		sub := func(r, c []int) *mat.Dense {
			m := mat.NewDense(len(r), len(c), nil)
			for a, x := range r {
				for b, y := range c {
					m.Set(a, b, S.At(x, y))
				}
			}
			return m
		}
		Skk, Sck, Scc := sub(ki, ki), sub(ci, ki), sub(ci, ci)
		var SkkInv mat.Dense
		if err := SkkInv.Inverse(Skk); err != nil {
			t.Fatal(err)
		}
		var B, cond mat.Dense // B = S_ck S_kk^{-1}; cond = S_cc - B S_kc
		B.Mul(Sck, &SkkInv)
		cond.Mul(&B, Sck.T())
		cond.Sub(Scc, &cond)
		condSym := mat.NewSymDense(len(ci), nil)
		for a := range ci {
			for b := 0; b <= a; b++ {
				condSym.SetSym(a, b, (cond.At(a, b)+cond.At(b, a))/2)
			}
		}
		zero := make([]float64, len(ci))
		cn := newMVN(t, zero, condSym)
		kkSym := mat.NewSymDense(len(ki), nil)
		for a := range ki {
			for b := 0; b <= a; b++ {
				kkSym.SetSym(a, b, Skk.At(a, b))
			}
		}
		marg := newMVN(t, make([]float64, len(ki)), kkSym)
		yc := make([]float64, len(ci))
		for a, c := range ci {
			yc[a] = st.Y[pan.Offset[i]+c] // standardized
		}
		const M = 400_000
		sum, sumSq := 0.0, 0.0
		z := make([]float64, len(ki))
		resid := make([]float64, len(ci))
		for range M {
			marg.draw(z, rng)
			in := true
			for b, c := range ki {
				ystar := st.Nu[c] + z[b]
				if (pan.Y[pan.Offset[i]+c] == 1) != (ystar > st.Tau[1][0]) {
					in = false
					break
				}
			}
			if !in {
				continue
			}
			for a, c := range ci {
				m := st.Nu[c]
				for b := range ki {
					m += B.At(a, b) * z[b]
				}
				resid[a] = yc[a] - m
			}
			w := math.Exp(cn.logProb(resid))
			sum += w
			sumSq += w * w
		}
		want := math.Log(sum/M) - float64(len(ci))*math.Log(l.Scale[0])
		mean := sum / M
		seBF := math.Sqrt((sumSq/M-mean*mean)/M) / mean // relative se of the brute force
		t.Logf("person %d: %.4f (GHK rel. se %.3g), brute force %.4f (rel. se %.3g)", i, ll[0][i], rel, want, seBF)
		if d := math.Abs(ll[0][i] - want); d > 4*math.Hypot(rel, seBF) {
			t.Errorf("person %d: log likelihood %.4f, brute force %.4f", i, ll[0][i], want)
		}
	}
}

// TestPersonLikelihoodLatentLagExact: under a lagged latent response with
// continuous outcomes the person-level log likelihood is the exact normal
// density built here from the dynamic equations themselves, independently
// of the package's intercept-and-loading form: stacking y*_1 = c_1 +
// Lambda b + zeta_1 and y*_t = c_t + b + A y*_t-1 + zeta_t as
// (I - L) y* = c + G b + zeta (L the block subdiagonal of A), y* has mean
// (I - L)^-1 c and covariance (I - L)^-1 (G Psi G' + diag Sigma_t)
// (I - L)^-T.
func TestPersonLikelihoodLatentLagExact(t *testing.T) {
	tr := sampler.Truth{Names: []string{"x", "z"}, Types: []model.OutcomeType{model.Continuous, model.Continuous},
		Psi: []float64{0.6, 0.2, 0.2, 0.5}, A: []float64{0.4, 0.1, -0.1, 0.3}, Sigma: []float64{1, 0.3, 0.3, 0.8}, Sigma1: []float64{1.2, 0.2, 0.2, 1},
		Lag: true, LagIntercepts: []float64{1, -1, 0.5, 0.2, 0.4, 0.3, 0.6, 0.1}, Loadings: []float64{1.5, 0.2, -0.3, 1.2}}
	yaml := `data: {csv: d.csv, person: person, occasion: occasion}
outcomes: [{name: x, type: continuous}, {name: z, type: continuous}]
dynamics: {lags: cross, lag_on: latent_response}
means: {over_time: free}
`
	const T = 4
	l, v, st := drawOf(t, yaml, tr, 60, T)
	ll, _, err := LogLik(l, [][]float64{v}, 50)
	if err != nil {
		t.Fatal(err)
	}
	J := l.J
	JJ, n := J*J, T*J
	c, lam := st.DynamicForm()
	IL := mat.NewDense(n, n, nil)
	G := mat.NewDense(n, J, nil)
	D := mat.NewDense(n, n, nil)
	for s := 0; s < T; s++ {
		for a := 0; a < J; a++ {
			IL.Set(s*J+a, s*J+a, 1)
			for b := 0; b < J; b++ {
				if s > 0 {
					IL.Set(s*J+a, (s-1)*J+b, -st.A[s*JJ+a*J+b])
				}
				D.Set(s*J+a, s*J+b, st.Sig[s*JJ+a*J+b])
				switch {
				case s == 0:
					G.Set(a, b, lam[a*J+b])
				case a == b:
					G.Set(s*J+a, b, 1)
				}
			}
		}
	}
	var inv, gp, mid, left, cov mat.Dense
	if err := inv.Inverse(IL); err != nil {
		t.Fatal(err)
	}
	gp.Mul(G, mat.NewDense(J, J, append([]float64(nil), st.Psi...)))
	mid.Mul(&gp, G.T())
	mid.Add(&mid, D)
	left.Mul(&inv, &mid)
	cov.Mul(&left, inv.T())
	var mean mat.VecDense
	mean.MulVec(&inv, mat.NewVecDense(n, c))
	pan := l.Panel
	checked := 0
	for i := 0; i < 10; i++ {
		if pan.Len[i] != T {
			continue
		}
		mu := make([]float64, n)
		y := make([]float64, n)
		sym := mat.NewSymDense(n, nil)
		for a := 0; a < n; a++ {
			j := a % J
			mu[a] = l.Center[j] + l.Scale[j]*mean.AtVec(a)
			y[a] = pan.Y[pan.Offset[i]+a]
			for b := 0; b <= a; b++ {
				sym.SetSym(a, b, l.Scale[j]*l.Scale[b%J]*(cov.At(a, b)+cov.At(b, a))/2)
			}
		}
		checked++
		if want := newMVN(t, mu, sym).logProb(y); math.Abs(ll[0][i]-want) > 1e-8*math.Abs(want) {
			t.Errorf("person %d: log likelihood %.10g, exact %.10g", i, ll[0][i], want)
		}
	}
	if checked == 0 {
		t.Fatal("no complete person to check")
	}
}
