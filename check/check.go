// Package check compares a fitted model's replicated data with the observed
// data: posterior predictive checks (Gelman, Meng & Stern 1996, Statistica
// Sinica 6:733) of the statistics that matter for categorical dynamics.
// Replicates draw new random intercepts and new within paths, so the whole
// structure is checked, not only the latent responses.
package check

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"

	"github.com/lagstar/lagstar/sampler"
	"gonum.org/v1/gonum/stat"
)

// Stat is one checked statistic: its observed value, the central 90%
// interval of its replicated values and the posterior predictive p-value
// P(T(y_rep) >= T(y)) (ties counted half).
type Stat struct {
	Name    string `json:"name"`
	Kind    string `json:"kind"`
	Outcome string `json:"outcome"`
	// Outcomes names the pair of a joint statistic, the earlier occasion's
	// outcome first for lagged ones; Outcome is then empty.
	Outcomes []string `json:"outcomes,omitempty"`
	Observed float64  `json:"observed"`
	RepMean  float64  `json:"replicated_mean"`
	RepLow   float64  `json:"replicated_lower"`
	RepHigh  float64  `json:"replicated_upper"`
	PPP      float64  `json:"ppp"`
}

// Result holds every statistic and how many posterior draws were used.
type Result struct {
	Draws int    `json:"draws"`
	Seed  uint64 `json:"seed"`
	Stats []Stat `json:"stats"`
	// Unconverged names the parameters of the checked run that failed the
	// convergence rule: replicates from such draws check a posterior that
	// has not been found yet.
	Unconverged []string `json:"unconverged_parameters"`
	// Of identifies the fit the draws came from (set by whoever reads them
	// from a run folder), so a check is never shown with another fit.
	Of *Source `json:"of_run,omitempty"`
}

// Source identifies a fit: when it started, its data and its seed.
type Source struct {
	Started    string `json:"started"`
	DataSHA256 string `json:"data_sha256"`
	Seed       uint64 `json:"seed"`
}

// Extreme reports whether a p-value lies outside (0.05, 0.95).
func (s Stat) Extreme() bool { return s.PPP < 0.05 || s.PPP > 0.95 }

// Run replicates the data for n posterior draws, evenly spaced over the
// given draws (each a parameter vector in the order of Layout.Params), and
// compares the statistics with the observed data of l.
func Run(l *sampler.Layout, draws [][]float64, n int, seed uint64) (*Result, error) {
	return RunProgress(l, draws, n, seed, nil)
}

// RunProgress is Run that reports each replicated data set to progress
// (done, total) when progress is not nil.
func RunProgress(l *sampler.Layout, draws [][]float64, n int, seed uint64, progress func(done, total int)) (*Result, error) {
	return RunContext(context.Background(), l, draws, n, seed, progress)
}

// RunContext is RunProgress that stops with ctx's error, between two
// replicates, when ctx is cancelled.
func RunContext(ctx context.Context, l *sampler.Layout, draws [][]float64, n int, seed uint64, progress func(done, total int)) (*Result, error) {
	if len(draws) == 0 {
		return nil, fmt.Errorf("check: no posterior draws")
	}
	draws = sampler.EvenlySpaced(draws, n)
	n = len(draws)
	rng := rand.New(rand.NewPCG(seed, 0x636865636b))
	st := sampler.NewState(l, rng)
	names, obs := statistics(l, st.Y)
	reps := make([][]float64, len(obs))
	y := make([]float64, len(st.Y))
	for d := 0; d < n; d++ {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		if err := st.Inject(draws[d]); err != nil {
			return nil, err
		}
		st.Replicate(y, rng)
		_, v := statistics(l, y)
		for k := range v {
			reps[k] = append(reps[k], v[k])
		}
		if progress != nil {
			progress(d+1, n)
		}
	}
	res := &Result{Draws: n, Seed: seed}
	for k, s := range names {
		s.Observed = obs[k]
		r := slices.Clone(reps[k])
		slices.Sort(r)
		s.RepMean, s.RepLow, s.RepHigh = stat.Mean(r, nil), quantile(r, 0.05), quantile(r, 0.95)
		above := 0.0
		for _, v := range r {
			switch {
			case v > obs[k]:
				above++
			case v == obs[k]:
				above += 0.5
			}
		}
		s.PPP = above / float64(len(r))
		res.Stats = append(res.Stats, s)
	}
	return res, nil
}

func quantile(s []float64, p float64) float64 {
	h := float64(len(s)-1) * p
	i := int(h)
	if i+1 >= len(s) {
		return s[len(s)-1]
	}
	return s[i] + (h-float64(i))*(s[i+1]-s[i])
}

// statistics computes, on data y laid out as the panel (categories or
// analysis-scale values, NaN missing): per categorical outcome, the category
// shares per occasion, the lag-1 and lag-2 transition shares P(k2 | k1),
// the spread over persons of their lag-1 stay shares, the sd of person
// means and the mean run length in one category; for each pair of
// categorical outcomes, the same-occasion and lagged joint shares; for
// continuous outcomes, the mean per occasion, the sd of person means and
// the lag-1 correlation.
func statistics(l *sampler.Layout, y []float64) ([]Stat, []float64) {
	J := l.J
	pan := l.Panel
	names := make([]string, J)
	for j, o := range pan.Outcomes {
		names[j] = o.Name
	}
	var st []Stat
	var v []float64
	add := func(s Stat, x float64) {
		st = append(st, s)
		v = append(v, x)
	}
	cell := func(i, t, j int) float64 { return y[pan.Offset[i]+t*J+j] }
	for j := 0; j < J; j++ {
		codes := pan.Outcomes[j].Codes
		if !l.Cat[j] {
			for t, o := range pan.Occasions {
				var s, n float64
				for i := 0; i < l.N; i++ {
					if t < pan.Len[i] {
						if x := cell(i, t, j); x == x {
							s += x
							n++
						}
					}
				}
				add(Stat{Name: fmt.Sprintf("mean[%s,t=%d]", names[j], o), Kind: "occasion_mean", Outcome: names[j]}, s/math.Max(n, 1))
			}
		} else {
			K := l.K[j]
			for t, o := range pan.Occasions {
				count := make([]float64, K)
				n := 0.0
				for i := 0; i < l.N; i++ {
					if t < pan.Len[i] {
						if x := cell(i, t, j); x == x {
							count[int(x)]++
							n++
						}
					}
				}
				for k := 0; k < K; k++ {
					add(Stat{Name: fmt.Sprintf("share[%s=%s,t=%d]", names[j], codes[k], o), Kind: "category_share", Outcome: names[j]}, count[k]/math.Max(n, 1))
				}
			}
			trans := make([]float64, K*K)
			from := make([]float64, K)
			runs, runLen := 0.0, 0.0
			for i := 0; i < l.N; i++ {
				cur := 0.0
				for t := 0; t < pan.Len[i]; t++ {
					x := cell(i, t, j)
					if x != x {
						if cur > 0 {
							runs++
							runLen += cur
						}
						cur = 0
						continue
					}
					if t > 0 {
						if p := cell(i, t-1, j); p == p {
							trans[int(p)*K+int(x)]++
							from[int(p)]++
							if p == x {
								cur++
								continue
							}
						}
					}
					if cur > 0 {
						runs++
						runLen += cur
					}
					cur = 1
				}
				if cur > 0 {
					runs++
					runLen += cur
				}
			}
			for a := 0; a < K; a++ {
				for b := 0; b < K; b++ {
					add(Stat{Name: fmt.Sprintf("transition[%s:%s->%s]", names[j], codes[a], codes[b]), Kind: "transition", Outcome: names[j]},
						trans[a*K+b]/math.Max(from[a], 1))
				}
			}
			// Lag-2 transitions: persistence beyond one step separates
			// stable person differences from carry-over.
			trans2 := make([]float64, K*K)
			from2 := make([]float64, K)
			for i := 0; i < l.N; i++ {
				for t := 2; t < pan.Len[i]; t++ {
					p, x := cell(i, t-2, j), cell(i, t, j)
					if p == p && x == x {
						trans2[int(p)*K+int(x)]++
						from2[int(p)]++
					}
				}
			}
			for a := 0; a < K; a++ {
				for b := 0; b < K; b++ {
					add(Stat{Name: fmt.Sprintf("lag2_transition[%s:%s->%s]", names[j], codes[a], codes[b]), Kind: "lag2_transition", Outcome: names[j]},
						trans2[a*K+b]/math.Max(from2[a], 1))
				}
			}
			add(Stat{Name: fmt.Sprintf("mean_run_length[%s]", names[j]), Kind: "run_length", Outcome: names[j]}, runLen/math.Max(runs, 1))
			// Person-level lag-1 transitions: the spread over persons of
			// each person's share of lag-1 steps that stay in the same
			// category. The pooled transition table above is a function of
			// the bivariate latent distribution at two adjacent occasions,
			// which carry-over alone can match whatever the random
			// intercepts; stable between-person differences show instead as
			// persons who almost always stay and persons who often move.
			var stay []float64
			for i := 0; i < l.N; i++ {
				var s, n float64
				for t := 1; t < pan.Len[i]; t++ {
					p, x := cell(i, t-1, j), cell(i, t, j)
					if p == p && x == x {
						n++
						if p == x {
							s++
						}
					}
				}
				if n > 0 {
					stay = append(stay, s/n)
				}
			}
			add(Stat{Name: fmt.Sprintf("sd_person_stay_share[%s]", names[j]), Kind: "person_transition", Outcome: names[j]}, sd(stay))
		}
		// Spread of person means.
		var pm []float64
		for i := 0; i < l.N; i++ {
			var s, n float64
			for t := 0; t < pan.Len[i]; t++ {
				if x := cell(i, t, j); x == x {
					s += x
					n++
				}
			}
			if n > 0 {
				pm = append(pm, s/n)
			}
		}
		add(Stat{Name: fmt.Sprintf("sd_person_means[%s]", names[j]), Kind: "person_means", Outcome: names[j]}, sd(pm))
		if !l.Cat[j] {
			var xs, ys []float64
			for i := 0; i < l.N; i++ {
				for t := 1; t < pan.Len[i]; t++ {
					a, b := cell(i, t-1, j), cell(i, t, j)
					if a == a && b == b {
						xs = append(xs, a)
						ys = append(ys, b)
					}
				}
			}
			add(Stat{Name: fmt.Sprintf("lag1_correlation[%s]", names[j]), Kind: "lag1_correlation", Outcome: names[j]}, corr(xs, ys))
		}
	}
	// Pairs of categorical outcomes.
	for a := 0; a < J; a++ {
		for b := 0; b < J; b++ {
			if a == b || !l.Cat[a] || !l.Cat[b] {
				continue
			}
			Ka, Kb := l.K[a], l.K[b]
			same := make([]float64, Ka*Kb)
			lag := make([]float64, Ka*Kb)
			var nSame, nLag float64
			for i := 0; i < l.N; i++ {
				for t := 0; t < pan.Len[i]; t++ {
					xb := cell(i, t, b)
					if xb != xb {
						continue
					}
					if xa := cell(i, t, a); a < b && xa == xa {
						same[int(xa)*Kb+int(xb)]++
						nSame++
					}
					if t > 0 {
						if pa := cell(i, t-1, a); pa == pa {
							lag[int(pa)*Kb+int(xb)]++
							nLag++
						}
					}
				}
			}
			ca, cb := pan.Outcomes[a].Codes, pan.Outcomes[b].Codes
			for p := 0; p < Ka; p++ {
				for q := 0; q < Kb; q++ {
					if a < b {
						add(Stat{Name: fmt.Sprintf("joint[%s=%s,%s=%s]", names[a], ca[p], names[b], cb[q]), Kind: "joint_share", Outcomes: []string{names[a], names[b]}},
							same[p*Kb+q]/math.Max(nSame, 1))
					}
					add(Stat{Name: fmt.Sprintf("lagged_joint[%s=%s->%s=%s]", names[a], ca[p], names[b], cb[q]), Kind: "lagged_joint_share", Outcomes: []string{names[a], names[b]}},
						lag[p*Kb+q]/math.Max(nLag, 1))
				}
			}
		}
	}
	return st, v
}

// sd is the sample standard deviation (0 for fewer than two values).
func sd(x []float64) float64 {
	if len(x) < 2 {
		return 0
	}
	return stat.StdDev(x, nil)
}

// corr is the Pearson correlation (0 for fewer than three pairs).
func corr(x, y []float64) float64 {
	if len(x) < 3 {
		return 0
	}
	return stat.Correlation(x, y, nil)
}
