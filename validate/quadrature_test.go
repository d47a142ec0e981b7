package validate

import (
	"context"
	"fmt"
	"math"
	"strings"
	"testing"

	"github.com/lagstar/lagstar/diagnostics"
	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/priors"
	"github.com/lagstar/lagstar/sampler"
	"gonum.org/v1/gonum/integrate/quad"
	"gonum.org/v1/gonum/stat/distuv"
)

var stdNormal = distuv.UnitNormal

// fitDraws fits model text to csv with default priors and returns the
// pooled draws of each parameter by name, with a summary per name.
func fitDraws(t *testing.T, yaml, csv string, chains, warmup, draws int) map[string]diagnostics.Summary {
	t.Helper()
	sp, err := model.ParseSpec("q.yaml", []byte(yaml))
	if err != nil {
		t.Fatal(err)
	}
	pan, err := model.ParsePanel(sp, "q.csv", []byte(csv))
	if err != nil {
		t.Fatal(err)
	}
	if err := model.Identify(sp, pan); err != nil {
		t.Fatal(err)
	}
	l := sampler.NewLayout(sp, pan, priors.Default())
	res, err := sampler.Run(context.Background(), l, sampler.Options{Chains: chains, Warmup: warmup, Draws: draws, Seed: 11})
	if err != nil {
		t.Fatal(err)
	}
	out := map[string]diagnostics.Summary{}
	for p, par := range res.Params {
		out[par.Name] = diagnostics.Summarize(res.ParamChains(p, draws), 0.95)
	}
	return out
}

// gridMoments returns the mean and sd of an unnormalized density on a grid
// (trapezoid rule on a fine grid: the densities are smooth and decay fast).
func gridMoments(logf func(x float64) float64, lo, hi float64, n int) (float64, float64) {
	h := (hi - lo) / float64(n)
	maxL := math.Inf(-1)
	for i := 0; i <= n; i++ {
		maxL = math.Max(maxL, logf(lo+float64(i)*h))
	}
	var z, m1, m2 float64
	for i := 0; i <= n; i++ {
		x := lo + float64(i)*h
		w := math.Exp(logf(x) - maxL)
		if i == 0 || i == n {
			w /= 2
		}
		z += w
		m1 += w * x
		m2 += w * x * x
	}
	m := m1 / z
	return m, math.Sqrt(m2/z - m*m)
}

func checkAgainst(t *testing.T, name string, s diagnostics.Summary, wantMean, wantSD float64) {
	t.Helper()
	t.Logf("%-20s MCMC mean %.4f sd %.4f (ESS %.0f); quadrature mean %.4f sd %.4f", name, s.Mean, s.SD, s.ESSBulk, wantMean, wantSD)
	if math.Abs(s.Mean-wantMean) > 4*s.MCSEMean+1e-3*wantSD {
		t.Errorf("%s: posterior mean %.4f, want %.4f (quadrature) within 4 MCSE = %.4f", name, s.Mean, wantMean, 4*s.MCSEMean)
	}
	if tol := 4 / math.Sqrt(2*s.ESSBulk); math.Abs(s.SD/wantSD-1) > tol {
		t.Errorf("%s: posterior sd %.4f, want %.4f (quadrature) within relative %.3f", name, s.SD, wantSD, tol)
	}
}

func crossSection(counts []int, labels []string) string {
	var b strings.Builder
	b.WriteString("id,wave,y\n")
	id := 0
	for k, n := range counts {
		for range n {
			id++
			fmt.Fprintf(&b, "%d,1,%s\n", id, labels[k])
		}
	}
	return b.String()
}

// TestBinaryThresholdByQuadrature: one binary outcome at one occasion, no
// random intercept: the only parameter is the threshold tau with prior
// N(0, 5^2) and likelihood Phi(tau)^n0 (1 - Phi(tau))^n1. Its posterior
// mean and sd by quadrature must match the MCMC draws.
func TestBinaryThresholdByQuadrature(t *testing.T) {
	n0, n1 := 37, 13
	csv := crossSection([]int{n0, n1}, []string{"0", "1"})
	got := fitDraws(t, `data: {csv: q.csv, person: id, occasion: wave}
outcomes: [{name: y, type: binary}]
person_differences: {random_intercepts: false}
dynamics: {lags: none}
`, csv, 4, 500, 5000)
	logf := func(tau float64) float64 {
		return -tau*tau/50 + float64(n0)*math.Log(stdNormal.CDF(tau)) + float64(n1)*math.Log(stdNormal.Survival(tau))
	}
	m, sd := gridMoments(logf, -4, 4, 20000)
	checkAgainst(t, "threshold[y,1]", got["threshold[y,1]"], m, sd)
}

// TestOrdinalThresholdsByQuadrature: one 3-category outcome at one
// occasion: thresholds tau1 < tau2 with independent N(0, 5^2) priors and
// likelihood Phi(tau1)^n0 (Phi(tau2)-Phi(tau1))^n1 (1-Phi(tau2))^n2. The
// marginal posterior means and sds come from a two-dimensional grid.
func TestOrdinalThresholdsByQuadrature(t *testing.T) {
	n := []int{14, 22, 9}
	csv := crossSection(n, []string{"1", "2", "3"})
	got := fitDraws(t, `data: {csv: q.csv, person: id, occasion: wave}
outcomes: [{name: y, type: ordinal, categories: 3, lowest: 1}]
person_differences: {random_intercepts: false}
dynamics: {lags: none}
`, csv, 4, 500, 5000)
	const g = 800
	lo, hi := -3.0, 3.0
	h := (hi - lo) / g
	logp := func(a, b float64) float64 {
		if a >= b {
			return math.Inf(-1)
		}
		return -(a*a+b*b)/50 + float64(n[0])*math.Log(stdNormal.CDF(a)) +
			float64(n[1])*math.Log(stdNormal.CDF(b)-stdNormal.CDF(a)) + float64(n[2])*math.Log(stdNormal.Survival(b))
	}
	maxL := math.Inf(-1)
	for i := 0; i <= g; i++ {
		for j := 0; j <= g; j++ {
			maxL = math.Max(maxL, logp(lo+float64(i)*h, lo+float64(j)*h))
		}
	}
	var z, ma, mb, va, vb float64
	for i := 0; i <= g; i++ {
		for j := 0; j <= g; j++ {
			a, b := lo+float64(i)*h, lo+float64(j)*h
			w := math.Exp(logp(a, b) - maxL)
			z += w
			ma += w * a
			mb += w * b
			va += w * a * a
			vb += w * b * b
		}
	}
	ma, mb = ma/z, mb/z
	checkAgainst(t, "threshold[y,1]", got["threshold[y,1]"], ma, math.Sqrt(va/z-ma*ma))
	checkAgainst(t, "threshold[y,2]", got["threshold[y,2]"], mb, math.Sqrt(vb/z-mb*mb))
}

// TestRandomInterceptProbitByQuadrature: a binary outcome at two
// occasions with a random intercept and no carry-over: parameters tau and
// psi (prior inverse-Wishart(2, 1) = inverse-gamma(1, 1/2)). The person
// likelihood integral_b prod_t P(y_t | b) N(b; 0, psi) db is computed by
// Gauss-Hermite quadrature (gonum integrate/quad) for the four response
// patterns; the joint posterior of (tau, psi) on a grid gives their means
// and sds.
func TestRandomInterceptProbitByQuadrature(t *testing.T) {
	// Pattern counts: 00, 01, 10, 11.
	pat := []int{30, 9, 8, 23}
	var b strings.Builder
	b.WriteString("id,wave,y\n")
	id := 0
	for p, cnt := range pat {
		for range cnt {
			id++
			fmt.Fprintf(&b, "%d,1,%d\n%d,2,%d\n", id, p>>1, id, p&1)
		}
	}
	got := fitDraws(t, `data: {csv: q.csv, person: id, occasion: wave}
outcomes: [{name: y, type: binary}]
person_differences: {random_intercepts: true}
dynamics: {lags: none}
means: {over_time: equal}
`, b.String(), 4, 1000, 6000)
	// Gauss-Hermite rule for integral f(x) exp(-x^2) dx.
	const nodes = 60
	xs, ws := make([]float64, nodes), make([]float64, nodes)
	quad.Hermite{}.FixedLocations(xs, ws, math.Inf(-1), math.Inf(1))
	logPost := func(tau, psi float64) float64 {
		lp := -tau*tau/50 - 2*math.Log(psi) - 0.5/psi // IG(1, 1/2) on psi
		for p, cnt := range pat {
			s := 0.0
			for k := range xs {
				bb := math.Sqrt(2*psi) * xs[k]
				pr := 1.0
				for _, y := range []int{p >> 1, p & 1} {
					if y == 1 {
						pr *= stdNormal.Survival(tau - bb)
					} else {
						pr *= stdNormal.CDF(tau - bb)
					}
				}
				s += ws[k] * pr
			}
			lp += float64(cnt) * math.Log(s/math.Sqrt(math.Pi))
		}
		return lp
	}
	// Grid in (tau, log psi) with the Jacobian psi, wide enough for the
	// heavy upper tail of psi.
	const g = 500
	tLo, tHi, uLo, uHi := -2.5, 3.0, math.Log(1e-3), math.Log(1e4)
	ht, hu := (tHi-tLo)/g, (uHi-uLo)/g
	grid := make([]float64, (g+1)*(g+1))
	maxL := math.Inf(-1)
	for i := 0; i <= g; i++ {
		for j := 0; j <= g; j++ {
			u := uLo + float64(j)*hu
			v := logPost(tLo+float64(i)*ht, math.Exp(u)) + u
			grid[i*(g+1)+j] = v
			maxL = math.Max(maxL, v)
		}
	}
	var z, mt, mp, vt, vp float64
	for i := 0; i <= g; i++ {
		for j := 0; j <= g; j++ {
			tau, psi := tLo+float64(i)*ht, math.Exp(uLo+float64(j)*hu)
			w := math.Exp(grid[i*(g+1)+j] - maxL)
			z += w
			mt += w * tau
			mp += w * psi
			vt += w * tau * tau
			vp += w * psi * psi
		}
	}
	mt, mp = mt/z, mp/z
	checkAgainst(t, "threshold[y,1]", got["threshold[y,1]"], mt, math.Sqrt(vt/z-mt*mt))
	checkAgainst(t, "ri_variance[y]", got["ri_variance[y]"], mp, math.Sqrt(vp/z-mp*mp))
}
