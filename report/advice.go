package report

import (
	"fmt"
	"github.com/lagstar/lagstar/catalog"
	"maps"
	"math"
	"math/cmplx"
	"slices"
	"strings"

	"github.com/lagstar/lagstar/sampler"
	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distuv"
)

// PriorRatioLimit is the ratio of a posterior interval's width to the
// prior's (same level; log scale for variances) above which a
// random-intercept variance or a path is reported as barely informed by
// the data.
const PriorRatioLimit = 0.5

// sparseShare is the share of the best-observed occasion's persons below
// which an occasion counts as sparse.
const sparseShare = 0.5

// sparseCause names the sparse occasion an entry rests on ("" when it
// rests on no single occasion, or on a well-observed one): the occasion
// of an occasion-specific parameter, the first occasion for the first
// occasion's covariance.
func sparseCause(l *sampler.Layout, counts []int, e Entry) (occ, n int, ok bool) {
	t := -1
	switch {
	case firstOccasion(e.Kind):
		t = 0
	case e.Occasion != nil:
		t = slices.Index(l.Panel.Occasions, *e.Occasion)
	}
	if t < 0 {
		return 0, 0, false
	}
	best := slices.Max(counts)
	if float64(counts[t]) >= sparseShare*float64(best) {
		return 0, 0, false
	}
	return l.Panel.Occasions[t], counts[t], true
}

// causeAdvice groups the unconverged entries that rest on a sparse
// occasion into one sentence per occasion.
func causeAdvice(l *sampler.Layout, bad []Entry) []string {
	if l == nil {
		return nil
	}
	counts := l.Panel.AnsweredAt()
	best := slices.Max(counts)
	byOcc := map[int][]string{}
	initial := false
	for _, e := range bad {
		if occ, _, ok := sparseCause(l, counts, e); ok {
			byOcc[occ] = append(byOcc[occ], e.Name)
			initial = initial || firstOccasion(e.Kind)
		}
	}
	var out []string
	for _, o := range slices.Sorted(maps.Keys(byOcc)) {
		t := slices.Index(l.Panel.Occasions, o)
		msg := fmt.Sprintf("likely cause: %s %s on occasion %d, which only %d %s answered (against %d at the best-observed occasion); longer runs help little there",
			strings.Join(byOcc[o], ", "), pick(len(byOcc[o]) == 1, "rests", "rest"), o, counts[t], pick(counts[t] == 1, "person", "persons"), best)
		if initial && t == 0 && l.HasPaths() && !l.PathsFree {
			msg += "; dynamics.first_occasion: stationary takes the first occasion's covariance from the carry-over process instead of estimating it"
		}
		out = append(out, msg)
	}
	return out
}

// priorInterval returns the central interval at level of the prior of a
// random-intercept variance or a path, on the entry's scale, and whether
// the entry has such a prior (other kinds: false). Variances are
// compared on the log scale.
func priorInterval(l *sampler.Layout, e Entry, level float64) (lo, hi float64, logScale, ok bool) {
	pr := l.Priors
	scale := func(name string) float64 {
		for j, o := range l.Panel.Outcomes {
			if o.Name == name {
				return l.Scale[j]
			}
		}
		return 1
	}
	a := (1 - level) / 2
	switch e.Kind {
	case "autoregression", "crosslag", "latent_autoregression", "latent_crosslag":
		// N(0, PathSD^2) on the standardized scale (the stationary start's
		// truncation to the stable region is ignored: a wider interval).
		z := distuv.UnitNormal.Quantile(1 - a)
		f := 1.0
		if isCrossLag(e.Kind) {
			f = scale(e.Outcome) / scale(e.From)
		}
		return -z * pr.PathSD * f, z * pr.PathSD * f, false, true
	case "ri_variance":
		// The diagonal of an inverse-Wishart(J + d, s I) is
		// inverse-gamma((d + 1)/2, s/2): s/2 over a Gamma((d + 1)/2, 1).
		g := distuv.Gamma{Alpha: (pr.RIDfExtra + 1) / 2, Beta: 1}
		s2 := scale(e.Outcome) * scale(e.Outcome)
		return s2 * pr.RIScale / 2 / g.Quantile(1-a), s2 * pr.RIScale / 2 / g.Quantile(a), true, true
	}
	return 0, 0, false, false
}

// priorDominated lists the random-intercept variances and paths whose
// posterior interval is at least PriorRatioLimit as wide as the prior's.
func priorDominated(l *sampler.Layout, es []Entry) []string {
	var out []string
	for _, e := range es {
		lo, hi, logScale, ok := priorInterval(l, e, float64(e.Level))
		plo, phi := float64(e.Lower), float64(e.Upper)
		if !ok || math.IsNaN(plo) || math.IsNaN(phi) {
			continue
		}
		var r float64
		if logScale {
			if !(plo > 0) {
				continue
			}
			r = math.Log(phi/plo) / math.Log(hi/lo)
		} else {
			r = (phi - plo) / (hi - lo)
		}
		if r >= PriorRatioLimit {
			out = append(out, fmt.Sprintf("%s (interval %.0f%% as wide as the prior's)", e.Name, 100*r))
		}
	}
	if len(out) == 0 {
		return nil
	}
	return []string{fmt.Sprintf("barely informed by the data: %s; the posterior there mostly restates the prior, so do not read these estimates as findings (more persons or occasions, or a simpler model, would inform them)", strings.Join(out, ", "))}
}

// explosive warns when the posterior mean carry-over matrix (of each
// occasion when paths are free over time) has an eigenvalue of modulus 1
// or more: a process that grows without bound, rarely a sensible
// description of within-person change.
func explosive(l *sampler.Layout, es []Entry) []string {
	if l == nil || !l.HasPaths() {
		return nil
	}
	idx := map[string]int{}
	for j, o := range l.Panel.Outcomes {
		idx[o.Name] = j
	}
	J := l.J
	mats := map[int][]float64{} // occasion (or -1) -> A
	for _, e := range es {
		if !isPath(e.Kind) {
			continue
		}
		occ := -1
		if e.Occasion != nil {
			occ = *e.Occasion
		}
		if mats[occ] == nil {
			mats[occ] = make([]float64, J*J)
		}
		from := e.Outcome
		if isCrossLag(e.Kind) {
			from = e.From
		}
		mats[occ][idx[e.Outcome]*J+idx[from]] = float64(e.Mean)
	}
	var out []string
	for _, o := range slices.Sorted(maps.Keys(mats)) {
		var eig mat.Eigen
		if !eig.Factorize(mat.NewDense(J, J, mats[o]), mat.EigenNone) {
			continue
		}
		m := 0.0
		for _, v := range eig.Values(nil) {
			m = max(m, cmplx.Abs(v))
		}
		if m >= 1 {
			at := ""
			if o >= 0 {
				at = fmt.Sprintf(" into occasion %d", o)
			}
			fix := "or use dynamics.first_occasion: stationary, which keeps the process stable"
			if l.Dyn {
				fix = "or compare with dynamics.lag_on: residuals, whose random intercepts carry the stable person differences the lagged response otherwise accumulates"
			}
			out = append(out, fmt.Sprintf("explosive carry-over%s: the posterior mean carry-over matrix has an eigenvalue of modulus %.3f (1 or more), a process that grows without bound; check the data's coding and spacing, %s", at, m, fix))
		}
	}
	return out
}

// isPath reports whether kind is a carry-over or cross-lag path (of the
// residuals or of a lagged latent response).
func isPath(kind string) bool {
	switch kind {
	case "autoregression", "crosslag", "latent_autoregression", "latent_crosslag":
		return true
	}
	return false
}

// isCrossLag reports whether kind is a cross-lag path.
func isCrossLag(kind string) bool { return kind == "crosslag" || kind == "latent_crosslag" }

// CommonFactorGap is how close (in posterior means) an autoregression and
// minus its moving average must be for the common-factor warning.
const CommonFactorGap = 0.15

// commonFactor warns, per outcome (and occasion), when the posterior mean
// autoregression a and moving average m nearly cancel (|a + m| below
// CommonFactorGap, with |m| at least 0.2): the ARMA(1,1) then reduces to
// white noise, a and m lie on a ridge where the data tell them apart
// poorly (the common-factor case of Box, Jenkins & Reinsel 2008), and a
// model without either fits about as well.
func commonFactor(es []Entry) []string {
	key := func(e Entry) string {
		k := e.Outcome
		if e.Occasion != nil {
			k += fmt.Sprintf(",t=%d", *e.Occasion)
		}
		return k
	}
	ar := map[string]float64{}
	for _, e := range es {
		if e.Kind == "autoregression" {
			ar[key(e)] = float64(e.Mean)
		}
	}
	var out []string
	for _, e := range es {
		if e.Kind != "moving_average" {
			continue
		}
		a, ok := ar[key(e)]
		m := float64(e.Mean)
		if !ok || math.Abs(m) < 0.2 || math.Abs(a+m) >= CommonFactorGap {
			continue
		}
		out = append(out, fmt.Sprintf("near the common-factor case for %s: autoregression %.2f and moving average %.2f nearly cancel, so the within part is close to white noise and the two are weakly determined (a ridge in the posterior); compare with the model without dynamics.moving_average (and without carry-over) before reading either", key(e), a, m))
	}
	return out
}

// firstOccasion reports whether entries of the kind rest on the first
// occasion alone (the first occasion's covariance).
func firstOccasion(kind string) bool {
	k, ok := catalog.Lookup(kind)
	return ok && k.FirstOccasion
}
