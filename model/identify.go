package model

import (
	"fmt"
	"slices"
	"strconv"
	"strings"
)

// Identify refuses option combinations that do not determine the model's
// parameters from the data, each with a message saying why. The rules are
// those documented in README.md ("Identification"):
//
//   - a stationary first occasion needs paths equal over time;
//   - cross-lags and residual correlations need at least two outcomes;
//   - carry-over needs at least two occasions, and with random intercepts at
//     least three (two occasions cannot separate a stable person difference
//     from carry-over);
//   - random intercepts need at least two occasions;
//   - a binary outcome with random intercepts and carry-over free over time
//     needs at least four occasions;
//   - carry-over needs some person observed at two consecutive occasions,
//     and random intercepts some person observed at two occasions (a grid
//     of many occasions where everyone answered once carries no
//     within-person information).
func Identify(sp *Spec, pan *Panel) error {
	p := &problems{}
	T := pan.T()
	J := len(sp.Outcomes)
	f := sp.Path
	if sp.Within.PathsFree && T > 1 {
		var empty []string
		for t, n := range pan.AnsweredAt() {
			if n == 0 {
				empty = append(empty, strconv.Itoa(pan.Occasions[t]))
			}
		}
		if len(empty) > 0 {
			p.addf(f, 0, "dynamics.over_time: free needs answers at every occasion, and nobody answered at occasion %s: the paths into and out of an unobserved occasion cannot be told apart. Use dynamics.over_time: equal", strings.Join(empty, ", "))
		}
	}
	if sp.Means.Free && sp.Means.Anchor != AnchorAuto && sp.Means.Anchor != AnchorFirst {
		occ, _ := strconv.Atoi(sp.Means.Anchor)
		t := slices.Index(pan.Occasions, occ)
		if t < 0 {
			p.addf(f, 0, "means.anchor: occasion %d is not an occasion of the data (%s)", occ, clip(intTexts(pan.Occasions), 8))
		} else {
			for j, o := range pan.Outcomes {
				if o.Type.Categorical() && pan.ObservedAt(j)[t] == 0 {
					p.addf(f, 0, "means.anchor: nobody answered outcome %q at occasion %d, so its thresholds cannot be set there; choose an occasion with answers, or auto", o.Name, occ)
				}
			}
		}
	}
	if sp.Within.StationaryStart && sp.Within.PathsFree {
		p.addf(f, 0, "dynamics.first_occasion: stationary needs dynamics.over_time: equal; a stationary distribution exists only when the carry-over paths and innovations are the same at every occasion")
	}
	if sp.Within.MovingAverage {
		identifyMovingAverage(p, sp, T)
	}
	if sp.Between.RandomSlopes {
		identifyGrowth(p, sp, pan)
	}
	if sp.Within.LatentLag() {
		identifyLatentLag(p, sp, pan)
	}
	if sp.Within.Lags == LagsCross && J < 2 {
		p.addf(f, 0, "dynamics.lags: cross needs at least two outcomes (there is %d); use lags: own for one outcome", J)
	}
	if sp.Within.ResidualCorrelation && J < 2 {
		p.addf(f, 0, "dynamics.residual_correlation: true needs at least two outcomes (there is %d)", J)
	}
	if sp.Within.Lags != LagsNone && T < 2 {
		p.addf(f, 0, "dynamics.lags: %s needs at least two occasions; the data have %d", sp.Within.Lags, T)
	}
	if sp.Between.RandomIntercepts && T < 2 {
		p.addf(f, 0, "person_differences.random_intercepts: true needs at least two occasions; with one, the person difference and the occasion residual cannot be told apart")
	}
	if sp.Between.RandomIntercepts && sp.Within.Lags != LagsNone && T == 2 {
		p.addf(f, 0, "person_differences.random_intercepts with dynamics.lags: %s needs at least three occasions; with two, a stable person difference and carry-over explain the same association", sp.Within.Lags)
	}
	if sp.Between.RandomIntercepts && sp.Within.Lags != LagsNone && sp.Within.PathsFree && T == 3 {
		for _, o := range pan.Outcomes {
			if o.Type == Binary {
				p.addf(f, 0, "outcome %q is binary: random intercepts with carry-over free over time need at least four occasions; use dynamics.over_time: equal", o.Name)
			}
		}
	}
	if T >= 2 && (sp.Within.Lags != LagsNone || sp.Between.RandomIntercepts) {
		repeated, consecutive := withinInformation(pan)
		if sp.Within.Lags != LagsNone && !consecutive {
			p.addf(f, 0, "dynamics.lags: %s needs some person observed at two consecutive occasions; in %s nobody is", sp.Within.Lags, pan.File)
		}
		if sp.Between.RandomIntercepts && !repeated {
			p.addf(f, 0, "person_differences.random_intercepts: true needs some person observed at two occasions or more; in %s everyone was observed once", pan.File)
		}
	}
	return p.err()
}

// identifyLatentLag checks the occasions a lagged latent response needs.
// The first occasion is given: its mean, variance and loading on the
// random intercept are its own, so it must have answers. With random
// intercepts the model needs four occasions: with three, a binary
// outcome gives three marginal probabilities and three tetrachoric
// correlations for as many parameters (the threshold, two intercepts,
// the intercept variance, the first occasion's loading and the
// carry-over), none to spare; carry-over free over time adds one path
// per occasion and needs a fifth.
func identifyLatentLag(p *problems, sp *Spec, pan *Panel) {
	f, T := sp.Path, pan.T()
	for j, o := range pan.Outcomes {
		if T > 0 && pan.ObservedAt(j)[0] == 0 {
			p.addf(f, sp.Within.LagOnLine, "dynamics.lag_on: latent_response takes the first occasion (%d) as given, but nobody answered outcome %q there; drop the occasion from the data or use lag_on: residuals", pan.Occasions[0], o.Name)
		}
	}
	if !sp.Between.RandomIntercepts || sp.Within.Lags == LagsNone {
		return
	}
	need, why := 4, "with three, a binary outcome gives three probabilities and three correlations for the threshold, two intercepts, the intercept variance, the first occasion's loading and the carry-over, none to spare"
	if sp.Within.PathsFree {
		need, why = 5, "carry-over free over time adds a path per occasion to the four occasions the model needs with equal paths"
	}
	if T < need {
		p.addf(f, sp.Within.LagOnLine, "dynamics.lag_on: latent_response with random intercepts needs at least %d occasions (the data have %d): %s", need, T, why)
	}
}

// identifyMovingAverage checks the occasions an ARMA(1,1) within part
// needs. The first occasion is exogenous and is not an innovation of the
// process, so the moving-average term first acts at the third occasion
// (on the innovation of the second): without random intercepts that
// takes three occasions. With random intercepts it takes four: the
// covariances of the within part at lags 1, 2 and 3 are what separate a
// constant person difference (the same at every lag) from carry-over
// (geometric from lag 1 on) and the moving average (which acts at lag 1
// only), and a panel of three occasions has lags 1 and 2 alone.
func identifyMovingAverage(p *problems, sp *Spec, T int) {
	f := sp.Path
	if sp.Sampler.PathMoves {
		p.addf(f, 0, "sampler.path_moves: true is not available with dynamics.moving_average: true: the whole-path move uses the banded precision of autoregressive within parts; leave path_moves out")
	}
	switch {
	case sp.Within.StationaryStart:
		p.addf(f, 0, "dynamics.moving_average: true needs dynamics.first_occasion: free; a stationary first occasion for ARMA(1,1) residuals is not available")
	case sp.Between.RandomIntercepts && T < 4:
		p.addf(f, 0, "dynamics.moving_average: true with random intercepts needs at least four occasions (the data have %d): separating a stable person difference, carry-over and the moving average takes the within-person covariances at lags 1, 2 and 3", T)
	case T < 3:
		p.addf(f, 0, "dynamics.moving_average: true needs at least three occasions (the data have %d): the first occasion is exogenous, so the moving average first acts at the third", T)
	}
}

// identifyGrowth checks what a random slope over time scores needs. The
// between part then has three covariance parameters per outcome
// (intercept and slope variances, their covariance) on top of the within
// part's, and the data give T(T+1)/2 variances and covariances per outcome
// (T(T-1)/2 correlations for a binary one, whose variances are fixed):
//
//   - without carry-over, three occasions (a line needs two, its spread
//     around the line a third);
//   - with carry-over equal over time, four: with three occasions a
//     binary outcome gives three correlations for four parameters, and a
//     continuous one is only just determined;
//   - with carry-over free over time, five.
//
// The time scores must match the occasions and differ somewhere, and the
// moving-average and whole-path moves are not available with it.
func identifyGrowth(p *problems, sp *Spec, pan *Panel) {
	f := sp.Path
	T := pan.T()
	b := sp.Between
	const key = "person_differences.random_slopes"
	switch {
	case sp.Within.MovingAverage:
		p.addf(f, 0, "%s: true is not available with dynamics.moving_average: true; growth takes autoregressive (and cross-lagged) residuals. Leave one of them out", key)
	case sp.Sampler.PathMoves:
		p.addf(f, 0, "sampler.path_moves: true is not available with %s: true; leave path_moves out", key)
	}
	need, why := 3, "a line needs two occasions and the spread around it a third"
	if sp.Within.Lags != LagsNone {
		need, why = 4, "the intercept and slope variances, their covariance and the carry-over need the variances and covariances of four occasions (with three a binary outcome gives three correlations for four parameters)"
		if sp.Within.PathsFree {
			need, why = 5, "carry-over free over time adds a path per occasion"
		}
	}
	if T < need {
		p.addf(f, 0, "%s: true with dynamics.lags: %s needs at least %d occasions (the data have %d): %s", key, sp.Within.Lags, need, T, why)
	}
	if b.TimeScores == TimeGiven {
		if len(b.Scores) != T {
			p.addf(f, b.TimeLine, "person_differences.time_scores: %d scores given for %d occasions (%s); give one per occasion, in occasion order", len(b.Scores), T, clip(intTexts(pan.Occasions), 8))
		} else if slices.Min(b.Scores) == slices.Max(b.Scores) {
			p.addf(f, b.TimeLine, "person_differences.time_scores: every score is %g; a slope needs scores that differ", b.Scores[0])
		}
	}
	if b.TimeScores == TimeOccasions && T > 0 && float64(pan.Occasions[T-1]-pan.Occasions[0]) > 1e6 {
		p.addf(f, b.TimeLine, "person_differences.time_scores: occasion_values spans %d units; give time scores in a coarser unit as a list", pan.Occasions[T-1]-pan.Occasions[0])
	}
}

// TimeScores returns the growth time score of each grid occasion
// (person_differences.time_scores); sp and pan must have passed Identify.
func TimeScores(sp *Spec, pan *Panel) []float64 {
	T := pan.T()
	s := make([]float64, T)
	for t := range s {
		switch sp.Between.TimeScores {
		case TimeOccasions:
			s[t] = float64(pan.Occasions[t] - pan.Occasions[0])
		case TimeGiven:
			s[t] = sp.Between.Scores[t]
		default:
			s[t] = float64(t)
		}
	}
	return s
}

// withinInformation reports whether some person has observed values at
// two occasions, and whether some person has them at two consecutive
// grid occasions.
func withinInformation(pan *Panel) (repeated, consecutive bool) {
	J := pan.J()
	for i := range pan.Persons {
		seen, prev := 0, false
		for t := 0; t < pan.Len[i]; t++ {
			obs := false
			for j := 0; j < J; j++ {
				if v := pan.Y[pan.Offset[i]+t*J+j]; v == v {
					obs = true
				}
			}
			if obs {
				seen++
				if prev {
					consecutive = true
				}
			}
			prev = obs
		}
		if seen >= 2 {
			repeated = true
		}
		if repeated && consecutive {
			return
		}
	}
	return
}

// MeanAnchors returns, for each outcome, the grid occasion where its mean
// is fixed at 0 when means are free over time (-1 for continuous outcomes
// and with equal means), following means.anchor, and a note for each
// outcome whose anchor is sparsely observed or was moved from the first
// occasion. sp and pan must have passed Identify.
func MeanAnchors(sp *Spec, pan *Panel) (anchor []int, notes []string) {
	anchor = make([]int, pan.J())
	for j, o := range pan.Outcomes {
		anchor[j] = -1
		if !sp.Means.Free || !o.Type.Categorical() {
			continue
		}
		n := pan.ObservedAt(j)
		first := slices.IndexFunc(n, func(c int) bool { return c > 0 })
		best := first
		for t, c := range n {
			if c > n[best] {
				best = t
			}
		}
		sparse := 2*n[first] < n[best]
		switch sp.Means.Anchor {
		case AnchorAuto:
			anchor[j] = first
			if sparse {
				anchor[j] = best
				notes = append(notes, fmt.Sprintf("outcome %q: its means are differences from occasion %d, where its thresholds are set: only %s answered the first occasion (%d) against %d at occasion %d (means.anchor: auto; set means.anchor to choose another occasion)",
					o.Name, pan.Occasions[best], plural(n[first], "person", "persons"), pan.Occasions[first], n[best], pan.Occasions[best]))
			}
		case AnchorFirst:
			anchor[j] = first
			if sparse {
				notes = append(notes, fmt.Sprintf("outcome %q: its thresholds are set at occasion %d (means.anchor: first), which only %s answered against %d at occasion %d; the thresholds and every mean then rest on those few answers and mix slowly. Set means.anchor: auto (or %d)",
					o.Name, pan.Occasions[first], plural(n[first], "person", "persons"), n[best], pan.Occasions[best], pan.Occasions[best]))
			}
		default:
			occ, _ := strconv.Atoi(sp.Means.Anchor)
			anchor[j] = slices.Index(pan.Occasions, occ)
			if t := anchor[j]; 2*n[t] < n[best] {
				notes = append(notes, fmt.Sprintf("outcome %q: its thresholds are set at occasion %d (means.anchor), which only %s answered against %d at occasion %d; the thresholds and every mean then rest on those few answers and mix slowly",
					o.Name, occ, plural(n[t], "person", "persons"), n[best], pan.Occasions[best]))
			}
		}
	}
	return anchor, notes
}
