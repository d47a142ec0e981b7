package sampler

import (
	"context"
	"fmt"
	"math"
	"strings"
	"testing"

	"github.com/lagstar/lagstar/model"
)

// lagTruthValues maps the parameter names of a lagged-latent-response
// layout to their values in tr (intercepts free over time or equal from
// the second occasion on, as the layout has them).
func lagTruthValues(tr Truth, l *Layout) map[string]float64 {
	out := truthValues(tr, l)
	J := l.J
	n := tr.Names
	for j := 0; j < J; j++ {
		for t, o := range l.Panel.Occasions {
			c := 0.0
			if tr.LagIntercepts != nil {
				c = tr.LagIntercepts[t*J+j]
			}
			out[fmt.Sprintf("lag_intercept[%s,t=%d]", n[j], o)] = c
			if t == 1 {
				out[fmt.Sprintf("lag_intercept[%s]", n[j])] = c
			}
		}
		for k := 0; k < J; k++ {
			lam := 0.0
			if j == k {
				lam = 1
			}
			if tr.Loadings != nil {
				lam = tr.Loadings[j*J+k]
			}
			out[fmt.Sprintf("first_loading[%s<-ri:%s]", n[j], n[k])] = lam
			if j == k {
				out[fmt.Sprintf("latent_autoregression[%s]", n[j])] = tr.A[j*J+j]
			} else {
				out[fmt.Sprintf("latent_crosslag[%s->%s]", n[k], n[j])] = tr.A[j*J+k]
			}
		}
	}
	return out
}

// TestRecoveryLatentLag fits lagged latent responses (a binary outcome
// with random intercepts; an ordinal and a continuous outcome with
// cross-lags and intercepts free over time) to data simulated from known
// values and requires the 95% intervals to cover at least 90% of them.
func TestRecoveryLatentLag(t *testing.T) {
	if testing.Short() {
		t.Skip("recovery fits skipped in -short mode")
	}
	cases := []recoveryCase{
		{
			name: "binary, random intercepts",
			yaml: `
data: {csv: x.csv, person: person, occasion: occasion}
outcomes: [{name: y, type: binary}]
dynamics: {lags: own, lag_on: latent_response}
means: {over_time: equal}
`,
			tr: Truth{Names: []string{"y"}, Types: []model.OutcomeType{model.Binary}, Tau: [][]float64{{0.3}},
				Psi: []float64{0.5}, A: []float64{0.4}, Sigma: []float64{1}, Sigma1: []float64{1}, Lag: true,
				LagIntercepts: []float64{0, -0.2, -0.2, -0.2, -0.2, -0.2}, Loadings: []float64{1.6}, Missing: 0.05},
			n: 800, periods: 6,
		},
		{
			name: "ordinal and continuous, cross-lagged",
			yaml: `
data: {csv: x.csv, person: person, occasion: occasion}
outcomes: [{name: a, type: ordinal, categories: 4, lowest: 0}, {name: b, type: continuous}]
dynamics: {lags: cross, lag_on: latent_response}
`,
			tr: Truth{Names: []string{"a", "b"}, Types: []model.OutcomeType{model.Ordinal, model.Continuous}, Tau: [][]float64{{-0.8, 0, 0.9}, nil},
				Psi: []float64{0.4, 0.1, 0.1, 0.5}, A: []float64{0.3, 0.15, -0.1, 0.35}, Sigma: []float64{1, 0.3, 0.3, 0.8}, Sigma1: []float64{1, 0.2, 0.2, 1.2}, Lag: true,
				LagIntercepts: []float64{0, 2, 0.1, 1.2, 0.2, 1.4, 0, 1.3, 0.3, 1.5}, Loadings: []float64{1.3, 0.2, -0.1, 1.5}, Missing: 0.05},
			n: 600, periods: 5,
		},
	}
	runRecovery(t, cases, 140, 31, func(c recoveryCase, l *Layout) map[string]float64 { return lagTruthValues(c.tr, l) })
}

// TestLatentLagWithoutInterceptsEqualsResidualAR: without random
// intercepts the lagged latent response is the residual carry-over model
// with its means written as m_t = c_t + A m_t-1 (term_dynamic.go), so on
// the same data the two fits must give the same posterior of the shared
// parameters (carry-over, thresholds, innovation and first-occasion
// variances), up to Monte Carlo error and the small difference between
// normal(0, 5^2) priors on c_t and on m_t. Checked: posterior means
// within 0.2 posterior sd (about 4 Monte Carlo standard errors of the
// difference at these run lengths).
func TestLatentLagWithoutInterceptsEqualsResidualAR(t *testing.T) {
	if testing.Short() {
		t.Skip("fits skipped in -short mode")
	}
	tr := Truth{Names: []string{"a", "b"}, Types: []model.OutcomeType{model.Ordinal, model.Continuous}, Tau: [][]float64{{-0.6, 0.2, 1}, nil},
		Nu: repeatPair(0, 1, 6), A: []float64{0.5, 0.1, 0.2, 0.4}, Sigma: []float64{1, 0.3, 0.3, 0.7}, Sigma1: []float64{1, 0.2, 0.2, 1.1}, Missing: 0.05}
	csv, err := Simulate(tr, 300, 6, newRand(77))
	if err != nil {
		t.Fatal(err)
	}
	const head = "data: {csv: x.csv, person: person, occasion: occasion}\noutcomes: [{name: a, type: ordinal, categories: 4, lowest: 0}, {name: b, type: continuous}]\nperson_differences: {random_intercepts: false}\nmeans: {over_time: free}\n"
	lag := summarize(runFit(t, layoutFrom(t, head+"dynamics: {lags: cross, lag_on: latent_response}\n", csv), 2, 1000, 3000, 15))
	res := summarize(runFit(t, layoutFrom(t, head+"dynamics: {lags: cross}\n", csv), 2, 1000, 3000, 16))
	pairs := map[string]string{
		"latent_autoregression[a]": "autoregression[a]", "latent_autoregression[b]": "autoregression[b]",
		"latent_crosslag[a->b]": "crosslag[a->b]", "latent_crosslag[b->a]": "crosslag[b->a]",
		"threshold[a,1]": "threshold[a,1]", "threshold[a,3]": "threshold[a,3]",
		"innovation_variance[b]": "innovation_variance[b]", "innovation_correlation[a,b]": "innovation_correlation[a,b]",
		"initial_variance[b]": "initial_variance[b]",
	}
	for a, b := range pairs {
		x, y := lag[a], res[b]
		sd := (x.hi - x.lo) / (2 * 1.96)
		t.Logf("%-28s lagged %.4f  residual %.4f  (sd %.4f)", a, x.mean, y.mean, sd)
		if !(sd > 0) || math.Abs(x.mean-y.mean) > 0.2*sd {
			t.Errorf("%s: lagged-response mean %.4f, residual-model mean %.4f differ by more than 0.2 sd (%.4f)", a, x.mean, y.mean, sd)
		}
	}
}

// TestLatentLagResumeAndCores: a lagged latent response over several
// shards of persons gives the same draws whatever GOMAXPROCS is, and a
// run stopped and resumed from its checkpoint (the term's own storage
// included) equals the uninterrupted one.
func TestLatentLagResumeAndCores(t *testing.T) {
	if testing.Short() {
		t.Skip("large panel skipped in -short mode")
	}
	tr := Truth{Names: []string{"a", "b"}, Types: []model.OutcomeType{model.Binary, model.Continuous}, Tau: [][]float64{{0.2}, nil},
		Psi: []float64{0.5, 0.1, 0.1, 0.6}, A: []float64{0.4, 0.1, 0, 0.3}, Sigma: []float64{1, 0.2, 0.2, 1}, Sigma1: []float64{1, 0.2, 0.2, 1},
		Lag: true, LagIntercepts: []float64{0, 1, 0.1, 0.5, 0.1, 0.5, 0.1, 0.5}, Loadings: []float64{1.2, 0, 0.1, 1.4}, Missing: 0.05}
	csv, err := Simulate(tr, 2*personsPerShard+10, 4, newRand(4))
	if err != nil {
		t.Fatal(err)
	}
	l := layoutFrom(t, `
data: {csv: x.csv, person: person, occasion: occasion}
outcomes: [{name: a, type: binary}, {name: b, type: continuous}]
dynamics: {lags: cross, lag_on: latent_response}
`, csv)
	requireCoresAndResume(t, l, "lagged latent response")
}

// TestLatentLagTransitionsCoverEmpirical: fitted to a large simulated
// binary panel with a lagged latent response that starts far from its
// settled state (first loading 0.5 against 1/(1 - 0.5) = 2), the 95%
// intervals of the average-person transition probabilities at each
// occasion cover the panel's own transition shares: the derived
// quantities follow the between part S_t b and the means m_t as they
// change over the occasions.
func TestLatentLagTransitionsCoverEmpirical(t *testing.T) {
	if testing.Short() {
		t.Skip("large fit skipped in -short mode")
	}
	tr := Truth{Names: []string{"y"}, Types: []model.OutcomeType{model.Binary}, Tau: [][]float64{{0.4}}, Psi: []float64{0.6}, A: []float64{0.5},
		Sigma: []float64{1}, Sigma1: []float64{1}, Lag: true, LagIntercepts: []float64{0, 0.1, 0.1, 0.1}, Loadings: []float64{0.5}}
	csv, err := Simulate(tr, 20000, 4, newRand(8))
	if err != nil {
		t.Fatal(err)
	}
	// Empirical shares per wave: after a 1 (stay) and after a 0 (onset).
	stay, after1, onset, after0 := map[string]float64{}, map[string]float64{}, map[string]float64{}, map[string]float64{}
	prev := map[string]string{}
	for _, line := range strings.Split(strings.TrimSpace(string(csv)), "\n")[1:] {
		f := strings.Split(line, ",")
		if p, ok := prev[f[0]]; ok {
			if p == "1" {
				after1[f[1]]++
				if f[2] == "1" {
					stay[f[1]]++
				}
			} else {
				after0[f[1]]++
				if f[2] == "1" {
					onset[f[1]]++
				}
			}
		}
		prev[f[0]] = f[2]
	}
	l := layoutFrom(t, "data: {csv: x.csv, person: person, occasion: occasion}\noutcomes: [{name: y, type: binary}]\ndynamics: {lags: own, lag_on: latent_response}\nmeans: {over_time: equal}\n", csv)
	res, err := Run(context.Background(), l, Options{Chains: 1, Warmup: 300, Draws: 400, Seed: 3, ThresholdUpdate: model.ThresholdJoint})
	if err != nil {
		t.Fatal(err)
	}
	nd := len(res.Derived)
	checked := 0
	for k, p := range res.Derived {
		var want float64
		switch {
		case strings.HasPrefix(p.Name, "p_stay_average[y,1,t="):
			w := strings.TrimSuffix(strings.TrimPrefix(p.Name, "p_stay_average[y,1,t="), "]")
			want = stay[w] / after1[w]
		case strings.HasPrefix(p.Name, "p_onset_average[y,t="):
			w := strings.TrimSuffix(strings.TrimPrefix(p.Name, "p_onset_average[y,t="), "]")
			want = onset[w] / after0[w]
		default:
			continue
		}
		var xs []float64
		for d := 0; d < res.Kept[0]; d++ {
			xs = append(xs, res.DerivedDraws[0][d*nd+k])
		}
		lo, hi := quantileOf(xs, 0.025), quantileOf(xs, 0.975)
		t.Logf("%s: [%.4f, %.4f], panel share %.4f", p.Name, lo, hi, want)
		if want < lo || want > hi {
			t.Errorf("%s: 95%% interval [%.4f, %.4f] misses the panel's share %.4f", p.Name, lo, hi, want)
		}
		checked++
	}
	if checked != 6 {
		t.Errorf("checked %d transition probabilities, want 6", checked)
	}
}

// TestLatentLagUnansweredOccasionNoted: an occasion nobody answered gets
// no free intercept of the lagged equation, and the summary's notes say
// so.
func TestLatentLagUnansweredOccasionNoted(t *testing.T) {
	var b strings.Builder
	b.WriteString("person,occasion,y\n")
	for p := 1; p <= 20; p++ {
		for s := 1; s <= 5; s++ {
			v := fmt.Sprint((p * s) % 2)
			if s == 3 {
				v = "NA"
			}
			fmt.Fprintf(&b, "%d,%d,%s\n", p, s, v)
		}
	}
	l := layoutFrom(t, "data: {csv: x.csv, person: person, occasion: occasion}\noutcomes: [{name: y, type: binary}]\ndynamics: {lags: own, lag_on: latent_response}\nmeans: {over_time: free}\n", []byte(b.String()))
	if l.DynIdx[2] != -1 || l.NDyn != 3 {
		t.Errorf("DynIdx %v (%d free), want occasion 3 fixed and 3 free intercepts", l.DynIdx, l.NDyn)
	}
	if len(l.Notes) != 1 || !strings.Contains(l.Notes[0], "answered by nobody at occasion 3") {
		t.Errorf("notes %q", l.Notes)
	}
}
