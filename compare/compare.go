package compare

import (
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"

	"github.com/lagstar/lagstar/diagnostics"

	"gonum.org/v1/gonum/stat"
)

// ModelFit is one model's person-level log likelihood matrix
// (LL[draw][person]) with a name.
type ModelFit struct {
	Name  string
	LL    [][]float64
	GHKSE float64 // median relative Monte Carlo error of the GHK averages
	// Unconverged names the model's parameters that failed the
	// convergence rule in its fit.
	Unconverged []string
}

// ModelResult summarizes one model's predictive accuracy.
type ModelResult struct {
	Name     string  `json:"name"`
	ELPDLoo  float64 `json:"elpd_loo"`
	SELoo    float64 `json:"se_elpd_loo"`
	PLoo     float64 `json:"p_loo"`
	ELPDWaic float64 `json:"elpd_waic"`
	SEWaic   float64 `json:"se_elpd_waic"`
	DiffLoo  float64 `json:"elpd_diff"`
	SEDiff   float64 `json:"se_diff"`
	MaxK     jsonNum `json:"max_pareto_k"` // +Inf (null) when too few draws to fit the tail
	HighK    int     `json:"persons_k_above_0_7"`
	GHKRelSE float64 `json:"ghk_relative_se"`
	Persons  int     `json:"persons"`
	Draws    int     `json:"draws"`
	// Unconverged names the parameters that failed the convergence rule
	// in the model's fit (its elpd is then not reliable either).
	Unconverged []string `json:"unconverged_parameters"`
	pointwise   []float64
	pointwiseW  []float64
}

// Compare computes PSIS-LOO and WAIC for every model and the elpd
// difference of each from the best one (by elpd_loo), with the standard
// error sqrt(N var(elpd_i^m - elpd_i^best)) (Vehtari, Gelman & Gabry 2017).
// All models must have been fitted to the same persons.
func Compare(models []ModelFit) ([]ModelResult, error) {
	if len(models) == 0 {
		return nil, fmt.Errorf("compare: no models")
	}
	N := len(models[0].LL[0])
	var out []ModelResult
	for _, m := range models {
		if len(m.LL[0]) != N {
			return nil, fmt.Errorf("compare: %s has %d persons, %s has %d: the models must share their data", m.Name, len(m.LL[0]), models[0].Name, N)
		}
		S := len(m.LL)
		r := ModelResult{Name: m.Name, Persons: N, Draws: S, GHKRelSE: m.GHKSE, Unconverged: append([]string{}, m.Unconverged...)}
		col := make([]float64, S)
		var lppd float64
		for i := 0; i < N; i++ {
			for s := 0; s < S; s++ {
				col[s] = m.LL[s][i]
			}
			l, k := PointwiseLOO(col)
			w := PointwiseWAIC(col)
			r.pointwise = append(r.pointwise, l)
			r.pointwiseW = append(r.pointwiseW, w)
			r.ELPDLoo += l
			r.ELPDWaic += w
			lppd += logSumExp(col) - math.Log(float64(S))
			r.MaxK = jsonNum(math.Max(float64(r.MaxK), k))
			if k > 0.7 {
				r.HighK++
			}
		}
		r.PLoo = lppd - r.ELPDLoo
		r.SELoo = math.Sqrt(float64(N) * variance(r.pointwise))
		r.SEWaic = math.Sqrt(float64(N) * variance(r.pointwiseW))
		out = append(out, r)
	}
	best := 0
	for k := range out {
		if out[k].ELPDLoo > out[best].ELPDLoo {
			best = k
		}
	}
	for k := range out {
		d := make([]float64, N)
		for i := range d {
			d[i] = out[k].pointwise[i] - out[best].pointwise[i]
		}
		out[k].DiffLoo = out[k].ELPDLoo - out[best].ELPDLoo
		out[k].SEDiff = math.Sqrt(float64(N) * variance(d))
	}
	slices.SortStableFunc(out, func(a, b ModelResult) int {
		switch {
		case a.ELPDLoo > b.ELPDLoo:
			return -1
		case a.ELPDLoo < b.ELPDLoo:
			return 1
		}
		return 0
	})
	return out, nil
}

// variance is the sample variance (0 for fewer than two values).
func variance(x []float64) float64 {
	if len(x) < 2 {
		return 0
	}
	return stat.Variance(x, nil)
}

// WriteTable writes the comparison, best model first, with warnings for
// Pareto k above 0.7 (Vehtari et al. 2017: the LOO estimate of those
// persons is unreliable).
func WriteTable(w io.Writer, rs []ModelResult) error {
	var b strings.Builder
	width := 5
	for _, r := range rs {
		width = max(width, len(r.Name))
	}
	fmt.Fprintf(&b, "Person-level predictive accuracy (random intercepts and within paths integrated out by GHK)\n\n")
	for _, r := range rs {
		if note := diagnostics.UnconvergedNote(r.Unconverged, "Its elpd is not reliable and the ranking may change"); note != "" {
			fmt.Fprintf(&b, "Warning: model %s is %s\n\n", r.Name, note)
		}
	}
	fmt.Fprintf(&b, "  %-*s %10s %8s %10s %8s %7s %10s %8s %7s\n", width, "model", "elpd_loo", "se", "elpd_diff", "se_diff", "p_loo", "elpd_waic", "se", "max k")
	for _, r := range rs {
		fmt.Fprintf(&b, "  %-*s %10.1f %8.1f %10.1f %8.1f %7.1f %10.1f %8.1f %7.2f\n", width, r.Name, r.ELPDLoo, r.SELoo, r.DiffLoo, r.SEDiff, r.PLoo, r.ELPDWaic, r.SEWaic, float64(r.MaxK))
	}
	for _, r := range rs {
		if math.IsInf(float64(r.MaxK), 1) {
			fmt.Fprintf(&b, "\nWarning: %s: too few draws to fit the Pareto tail; use more --draws.\n", r.Name)
		} else if r.HighK > 0 {
			fmt.Fprintf(&b, "\nWarning: %s: %d %s with Pareto k above 0.7; their leave-one-out estimates are unreliable (refit without them, or use more draws).\n", r.Name, r.HighK, persons(r.HighK))
		}
		if r.GHKRelSE > 0.05 {
			fmt.Fprintf(&b, "\nWarning: %s: the GHK likelihoods have a median relative Monte Carlo error of %.2g; raise --ghk-points.\n", r.Name, r.GHKRelSE)
		}
	}
	b.WriteString("\nA difference of more than about 2 standard errors (elpd_diff against se_diff) favours the first model.\n" +
		"A better-predicting cross-lag model is still an association, not proof of causation.\n")
	_, err := io.WriteString(w, b.String())
	return err
}

// jsonNum encodes NaN and infinities as null.
type jsonNum float64

// MarshalJSON implements json.Marshaler.
func (n jsonNum) MarshalJSON() ([]byte, error) {
	f := float64(n)
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return []byte("null"), nil
	}
	return []byte(strconv.FormatFloat(f, 'g', 10, 64)), nil
}

// persons is "person" for 1, else "persons".
func persons(n int) string {
	if n == 1 {
		return "person"
	}
	return "persons"
}
