package diagnostics

import (
	"cmp"
	"fmt"
	"math"
	"slices"
	"strings"

	"gonum.org/v1/gonum/dsp/fourier"
	"gonum.org/v1/gonum/mathext"
)

// Split halves every chain (dropping the middle draw of odd lengths), as
// split-R-hat and split-ESS require.
func Split(chains [][]float64) [][]float64 {
	out := make([][]float64, 0, 2*len(chains))
	for _, c := range chains {
		h := len(c) / 2
		out = append(out, c[:h], c[len(c)-h:])
	}
	return out
}

// RankNormalize replaces each draw by Phi^{-1}((r - 3/8)/(S + 1/4)), r its
// average rank among all S pooled draws (Blom 1958 offsets), keeping the
// chain structure.
func RankNormalize(chains [][]float64) [][]float64 {
	S := 0
	for _, c := range chains {
		S += len(c)
	}
	vals := make([]float64, 0, S)
	for _, c := range chains {
		vals = append(vals, c...)
	}
	order := make([]int32, S)
	for i := range order {
		order[i] = int32(i)
	}
	slices.SortFunc(order, func(a, b int32) int { return cmp.Compare(vals[a], vals[b]) })
	z := make([]float64, S)
	for lo := 0; lo < S; {
		hi := lo
		for hi+1 < S && vals[order[hi+1]] == vals[order[lo]] {
			hi++
		}
		r := float64(lo+hi)/2 + 1 // average 1-based rank of the ties
		v := mathext.NormalQuantile((r - 0.375) / (float64(S) + 0.25))
		for k := lo; k <= hi; k++ {
			z[order[k]] = v
		}
		lo = hi + 1
	}
	out := make([][]float64, len(chains))
	off := 0
	for ci, c := range chains {
		out[ci] = z[off : off+len(c)]
		off += len(c)
	}
	return out
}

// fold returns |x - m| chain by chain.
func fold(chains [][]float64, m float64) [][]float64 {
	out := make([][]float64, len(chains))
	for ci, c := range chains {
		out[ci] = make([]float64, len(c))
		for i, v := range c {
			out[ci][i] = math.Abs(v - m)
		}
	}
	return out
}

func pool(chains [][]float64) []float64 {
	var all []float64
	for _, c := range chains {
		all = append(all, c...)
	}
	return all
}

func meanVar(x []float64) (float64, float64) {
	m := 0.0
	for _, v := range x {
		m += v
	}
	m /= float64(len(x))
	s := 0.0
	for _, v := range x {
		s += (v - m) * (v - m)
	}
	return m, s / float64(len(x)-1)
}

// RhatBasic is the potential scale reduction factor of Gelman & Rubin
// (1992) in the form sqrt(((n-1)/n W + B/n)/W), on the chains as given.
func RhatBasic(chains [][]float64) float64 {
	n := float64(len(chains[0]))
	means := make([]float64, len(chains))
	w := 0.0
	for i, c := range chains {
		m, v := meanVar(c)
		means[i] = m
		w += v
	}
	w /= float64(len(chains))
	_, vm := meanVar(means)
	b := n * vm
	r := math.Sqrt(((n-1)/n*w + b/n) / w)
	if math.IsNaN(r) || math.IsInf(r, 0) {
		return math.NaN()
	}
	return r
}

// Rhat is the rank-normalized split R-hat: the larger of the bulk value
// (on rank-normalized split chains) and the tail value (on the
// rank-normalized split chains of |x - median|).
func Rhat(chains [][]float64) float64 {
	if constant(chains) {
		return math.NaN()
	}
	s := Split(chains)
	m := Quantile(pool(chains), 0.5)
	return math.Max(RhatBasic(RankNormalize(s)), RhatBasic(RankNormalize(fold(s, m))))
}

func constant(chains [][]float64) bool {
	first := chains[0][0]
	for _, c := range chains {
		for _, v := range c {
			if v != first {
				return false
			}
		}
	}
	return true
}

// autocov returns the biased autocovariances (divisor n, Geyer 1992) of x
// at lags 0..n-1, by FFT with zero padding.
func autocov(x []float64) []float64 {
	n := len(x)
	m := 1
	for m < 2*n {
		m <<= 1
	}
	mean := 0.0
	for _, v := range x {
		mean += v
	}
	mean /= float64(n)
	seq := make([]float64, m)
	for i, v := range x {
		seq[i] = v - mean
	}
	f := fourier.NewFFT(m)
	coef := f.Coefficients(nil, seq)
	for i, c := range coef {
		coef[i] = complex(real(c)*real(c)+imag(c)*imag(c), 0)
	}
	back := f.Sequence(nil, coef) // unnormalized inverse: m * sum
	out := make([]float64, n)
	for i := range out {
		out[i] = back[i] / float64(m) / float64(n)
	}
	return out
}

// ESS is the effective sample size of the chains as given (no splitting or
// rank normalization), with multi-chain autocorrelations, Geyer's initial
// positive and monotone sequences, the antithetic-friendly estimate
// tau = -1 + 2 sum rho + rho_{max+1}, and tau >= 1/log10(S).
func ESS(chains [][]float64) float64 {
	M := len(chains)
	n := len(chains[0])
	if n < 4 || constant(chains) {
		return math.NaN()
	}
	acov := make([][]float64, M)
	means := make([]float64, M)
	for i, c := range chains {
		acov[i] = autocov(c)
		means[i], _ = meanVar(c)
	}
	meanAt := func(t int) float64 {
		s := 0.0
		for i := range acov {
			s += acov[i][t]
		}
		return s / float64(M)
	}
	fn := float64(n)
	meanVarW := meanAt(0) * fn / (fn - 1)
	varPlus := meanVarW * (fn - 1) / fn
	if M > 1 {
		_, vm := meanVar(means)
		varPlus += vm
	}
	rho := make([]float64, n)
	rho[0] = 1
	rhoEven, rhoOdd := 1.0, 1-(meanVarW-meanAt(1))/varPlus
	rho[1] = rhoOdd
	t := 0
	for t < n-5 && !math.IsNaN(rhoEven+rhoOdd) && rhoEven+rhoOdd > 0 {
		t += 2
		rhoEven = 1 - (meanVarW-meanAt(t))/varPlus
		rhoOdd = 1 - (meanVarW-meanAt(t+1))/varPlus
		if rhoEven+rhoOdd >= 0 {
			rho[t] = rhoEven
			rho[t+1] = rhoOdd
		}
	}
	maxT := t
	if rhoEven > 0 {
		rho[maxT] = rhoEven
	}
	// Geyer's initial monotone sequence.
	for t = 0; t <= maxT-4; {
		t += 2
		if rho[t]+rho[t+1] > rho[t-2]+rho[t-1] {
			rho[t] = (rho[t-2] + rho[t-1]) / 2
			rho[t+1] = rho[t]
		}
	}
	S := float64(M * n)
	tau := -1.0
	for k := 0; k < maxT; k++ {
		tau += 2 * rho[k]
	}
	tau += rho[maxT]
	tau = math.Max(tau, 1/math.Log10(S))
	return S / tau
}

// ESSBulk is the ESS of the rank-normalized split chains.
func ESSBulk(chains [][]float64) float64 { return ESS(RankNormalize(Split(chains))) }

// ESSTail is the smaller ESS of the indicators I(x <= q05) and I(x <= q95)
// on split chains.
func ESSTail(chains [][]float64) float64 {
	return math.Min(ESSQuantile(chains, 0.05), ESSQuantile(chains, 0.95))
}

// ESSQuantile is the ESS of the indicator I(x <= q_p) on split chains.
func ESSQuantile(chains [][]float64, p float64) float64 {
	return ESS(indicator(Split(chains), Quantile(pool(chains), p)))
}

func indicator(chains [][]float64, q float64) [][]float64 {
	out := make([][]float64, len(chains))
	for i, c := range chains {
		out[i] = make([]float64, len(c))
		for k, v := range c {
			if v <= q {
				out[i][k] = 1
			}
		}
	}
	return out
}

// ESSMean is the ESS of split chains without rank normalization, the one
// that sets the Monte Carlo error of the mean.
func ESSMean(chains [][]float64) float64 { return ESS(Split(chains)) }

// MCSEMean is sd(x)/sqrt(ESSMean).
func MCSEMean(chains [][]float64) float64 {
	_, v := meanVar(pool(chains))
	return math.Sqrt(v / ESSMean(chains))
}

// MCSEQuantile is the Monte Carlo standard error of the p-quantile: half
// the distance between the draws at the 15.87% and 84.13% points of a
// beta(ess*p + 1, ess*(1-p) + 1) distribution, ess that of I(x <= q_p).
func MCSEQuantile(chains [][]float64, p float64) float64 {
	s := slices.Clone(pool(chains))
	slices.Sort(s)
	return mcseQuantileSorted(Split(chains), s, p)
}

func mcseQuantileSorted(split [][]float64, sorted []float64, p float64) float64 {
	ess := ESS(indicator(split, quantileSorted(sorted, p)))
	if math.IsNaN(ess) {
		return math.NaN()
	}
	a := mathext.InvRegIncBeta(ess*p+1, ess*(1-p)+1, 0.1586553)
	b := mathext.InvRegIncBeta(ess*p+1, ess*(1-p)+1, 0.8413447)
	S := len(sorted)
	i1 := max(int(math.Floor(a*float64(S))), 1)
	i2 := min(int(math.Ceil(b*float64(S))), S)
	return (sorted[i2-1] - sorted[i1-1]) / 2
}

// Quantile returns the p-quantile of x by linear interpolation between
// order statistics (Hyndman & Fan 1996 type 7).
func Quantile(x []float64, p float64) float64 {
	s := slices.Clone(x)
	slices.Sort(s)
	return quantileSorted(s, p)
}

func quantileSorted(s []float64, p float64) float64 {
	h := float64(len(s)-1) * p
	lo := math.Floor(h)
	i := int(lo)
	if i+1 >= len(s) {
		return s[len(s)-1]
	}
	return s[i] + (h-lo)*(s[i+1]-s[i])
}

// Summary is the posterior summary of one quantity.
type Summary struct {
	Mean, SD, Median, Lower, Upper float64
	Level                          float64
	Rhat, ESSBulk, ESSTail         float64
	MCSEMean                       float64
	MCSELower, MCSEUpper           float64
}

// Summarize computes the Summary of chains with a central interval of the
// given level (e.g. 0.95). It shares the sorting and rank normalization
// among the statistics, giving the same values as the separate functions.
func Summarize(chains [][]float64, level float64) Summary {
	all := pool(chains)
	sorted := slices.Clone(all)
	slices.Sort(sorted)
	m, v := meanVar(all)
	lp, up := (1-level)/2, 1-(1-level)/2
	out := Summary{Mean: m, SD: math.Sqrt(v), Median: quantileSorted(sorted, 0.5),
		Lower: quantileSorted(sorted, lp), Upper: quantileSorted(sorted, up), Level: level}
	nan := math.NaN()
	if len(chains[0]) < 4 || constant(chains) {
		out.Rhat, out.ESSBulk, out.ESSTail, out.MCSEMean, out.MCSELower, out.MCSEUpper = nan, nan, nan, nan, nan, nan
		return out
	}
	split := Split(chains)
	z := RankNormalize(split)
	out.ESSBulk = ESS(z)
	out.Rhat = math.Max(RhatBasic(z), RhatBasic(RankNormalize(fold(split, out.Median))))
	out.ESSTail = math.Min(ESS(indicator(split, quantileSorted(sorted, 0.05))), ESS(indicator(split, quantileSorted(sorted, 0.95))))
	out.MCSEMean = math.Sqrt(v / ESS(split))
	out.MCSELower = mcseQuantileSorted(split, sorted, lp)
	out.MCSEUpper = mcseQuantileSorted(split, sorted, up)
	return out
}

// UnconvergedNote is the plain statement printed with every output made
// from a run whose parameters names failed the convergence rule (R-hat <=
// 1.01, bulk- and tail-ESS >= 400), "" when names is empty. At most six
// names are listed; consequence says what follows for that output (e.g.
// "Do not report these results"), and the advice to run longer ends it.
func UnconvergedNote(names []string, consequence string) string {
	if len(names) == 0 {
		return ""
	}
	list := names
	more := ""
	if len(list) > 6 {
		list, more = list[:6], fmt.Sprintf(" and %d more", len(names)-6)
	}
	what := "parameters fail"
	if len(names) == 1 {
		what = "parameter fails"
	}
	return fmt.Sprintf("NOT CONVERGED: %d %s the convergence rule (R-hat <= 1.01, bulk- and tail-ESS >= 400): %s%s. %s; run the fit longer (lagstar fit --until-converged) first.",
		len(names), what, strings.Join(list, ", "), more, consequence)
}
