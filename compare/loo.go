package compare

import (
	"math"
	"slices"
)

// logSumExp returns log(sum exp(x)).
func logSumExp(x []float64) float64 {
	m := slices.Max(x)
	if math.IsInf(m, -1) {
		return m
	}
	s := 0.0
	for _, v := range x {
		s += math.Exp(v - m)
	}
	return m + math.Log(s)
}

// gpdFit fits a generalized Pareto distribution to exceedances x (all
// positive) by the empirical-Bayes method of Zhang & Stephens (2009,
// Technometrics 51:316), with the weakly informative shrinkage of k toward
// 0.5 used for PSIS (Vehtari et al. 2024, JMLR 25:72, appendix; values of
// the grid and prior as in that appendix, written here from memory). It
// returns the shape k and scale sigma.
func gpdFit(x []float64) (k, sigma float64) {
	s := slices.Clone(x)
	slices.Sort(s)
	n := len(s)
	const prior = 3.0
	M := 30 + int(math.Sqrt(float64(n)))
	xstar := s[int(float64(n)/4+0.5)-1]
	theta := make([]float64, M)
	lt := make([]float64, M)
	for j := 0; j < M; j++ {
		theta[j] = 1/s[n-1] + (1-math.Sqrt(float64(M)/(float64(j+1)-0.5)))/prior/xstar
		a := -theta[j]
		kk := 0.0
		for _, v := range s {
			kk += math.Log1p(a * v)
		}
		kk /= float64(n)
		lt[j] = float64(n) * (math.Log(a/kk) - kk - 1)
	}
	lse := logSumExp(lt)
	thetaHat := 0.0
	for j := range theta {
		thetaHat += theta[j] * math.Exp(lt[j]-lse)
	}
	for _, v := range s {
		k += math.Log1p(-thetaHat * v)
	}
	k /= float64(n)
	sigma = -k / thetaHat
	const a = 10.0
	k = k*float64(n)/(float64(n)+a) + a*0.5/(float64(n)+a)
	return k, sigma
}

// qgpd is the quantile function of the generalized Pareto distribution.
func qgpd(p, k, sigma float64) float64 {
	return sigma * math.Expm1(-k*math.Log1p(-p)) / k
}

// PSIS returns Pareto-smoothed log importance weights (normalized to sum to
// one on the log scale) for log ratios lr, and the Pareto shape estimate k.
// The largest M = min(S/5, 3 sqrt(S)) ratios are replaced by the expected
// order statistics of a generalized Pareto fit, then truncated at S^(3/4)
// times the mean weight (Vehtari et al. 2024).
func PSIS(lr []float64) ([]float64, float64) {
	S := len(lr)
	lw := slices.Clone(lr)
	mx := slices.Max(lw)
	for i := range lw {
		lw[i] -= mx
	}
	M := int(math.Ceil(math.Min(0.2*float64(S), 3*math.Sqrt(float64(S)))))
	k := math.Inf(1)
	if M >= 5 && S > M+1 {
		order := make([]int, S)
		for i := range order {
			order[i] = i
		}
		slices.SortFunc(order, func(a, b int) int {
			switch {
			case lw[a] < lw[b]:
				return -1
			case lw[a] > lw[b]:
				return 1
			}
			return 0
		})
		cut := lw[order[S-M-1]]
		ex := make([]float64, M)
		for j := 0; j < M; j++ {
			ex[j] = math.Exp(lw[order[S-M+j]]) - math.Exp(cut)
		}
		// The fit needs positive exceedances (ties at the cut leave zeros).
		if slices.Min(ex) > 0 {
			var sigma float64
			k, sigma = gpdFit(ex)
			if !math.IsInf(k, 0) && !math.IsNaN(k) {
				for j := 0; j < M; j++ {
					v := qgpd((float64(j)+0.5)/float64(M), k, sigma) + math.Exp(cut)
					lw[order[S-M+j]] = math.Min(math.Log(v), 0)
				}
			}
		}
	}
	// Truncate at S^(3/4) times the mean weight.
	lse := logSumExp(lw)
	cap := 0.75*math.Log(float64(S)) + lse - math.Log(float64(S))
	for i := range lw {
		lw[i] = math.Min(lw[i], cap)
	}
	lse = logSumExp(lw)
	for i := range lw {
		lw[i] -= lse
	}
	return lw, k
}

// PointwiseLOO returns, for one person's log likelihoods ll over posterior
// draws, the PSIS-LOO log predictive density and the Pareto k.
func PointwiseLOO(ll []float64) (float64, float64) {
	lr := make([]float64, len(ll))
	for i, v := range ll {
		lr[i] = -v
	}
	lw, k := PSIS(lr)
	x := make([]float64, len(ll))
	for i := range ll {
		x[i] = lw[i] + ll[i]
	}
	return logSumExp(x), k
}

// PointwiseWAIC returns one person's elpd_waic term: log mean exp(ll)
// minus the variance of ll over draws (Watanabe 2010; Gelman, Hwang &
// Vehtari 2014).
func PointwiseWAIC(ll []float64) float64 {
	S := float64(len(ll))
	lppd := logSumExp(ll) - math.Log(S)
	m := 0.0
	for _, v := range ll {
		m += v
	}
	m /= S
	v := 0.0
	for _, x := range ll {
		v += (x - m) * (x - m)
	}
	return lppd - v/(S-1)
}
