package report

import (
	"encoding/json"
	"fmt"
	"github.com/lagstar/lagstar/catalog"
	"math"
	"slices"
	"strconv"
	"strings"
	"sync"

	"github.com/lagstar/lagstar/diagnostics"
	"github.com/lagstar/lagstar/sampler"
)

// Program is the program name written into outputs.
const Program = "lagstar"

// Num is a float64 that encodes NaN and infinities as JSON null.
type Num float64

// MarshalJSON implements json.Marshaler.
func (n Num) MarshalJSON() ([]byte, error) {
	f := float64(n)
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return []byte("null"), nil
	}
	return []byte(strconv.FormatFloat(f, 'g', 10, 64)), nil
}

// Entry is the summary of one parameter or derived quantity.
type Entry struct {
	Name    string `json:"name"`
	Kind    string `json:"kind"`
	Outcome string `json:"outcome,omitempty"`
	From    string `json:"from,omitempty"`
	// Outcomes names the pair of a correlation (ri_correlation,
	// innovation_correlation, initial_correlation); Outcome is then empty.
	Outcomes []string `json:"outcomes,omitempty"`
	Occasion *int     `json:"occasion,omitempty"`
	Index    int      `json:"index,omitempty"`
	Mean     Num      `json:"mean"`
	SD       Num      `json:"sd"`
	Median   Num      `json:"median"`
	Lower    Num      `json:"lower"`
	Upper    Num      `json:"upper"`
	Level    Num      `json:"level"`
	Rhat     Num      `json:"rhat"`
	ESSBulk  Num      `json:"ess_bulk"`
	ESSTail  Num      `json:"ess_tail"`
	MCSEMean Num      `json:"mcse_mean"`
	// MCSELower and MCSEUpper are the Monte Carlo standard errors of the
	// interval bounds.
	MCSELower Num `json:"mcse_lower"`
	MCSEUpper Num `json:"mcse_upper"`
	table     bool
}

// OutcomeInfo describes one outcome in the summary: its categories in
// order (the last is the highest: for a binary outcome the one whose
// probability is modelled), how many answers were observed and missing
// on the persons' occasions, and how often each category was given.
type OutcomeInfo struct {
	Name string `json:"name"`
	// DisplayName is the name tables and the report show (display_name in
	// the model file; omitted when not given).
	DisplayName string   `json:"display_name,omitempty"`
	Type        string   `json:"type"`
	Categories  []string `json:"categories,omitempty"`
	Highest     string   `json:"highest_category,omitempty"`
	Observed    int      `json:"observed"`
	Missing     int      `json:"missing"`
	Counts      []int    `json:"category_counts,omitempty"`
}

// ModelInfo describes the fitted model and data.
type ModelInfo struct {
	File                string        `json:"file"`
	DataFile            string        `json:"data_file"`
	Persons             int           `json:"persons"`
	Rows                int           `json:"rows"`
	Occasions           []int         `json:"occasions"`
	Outcomes            []OutcomeInfo `json:"outcomes"`
	RandomIntercepts    bool          `json:"random_intercepts"`
	Lags                string        `json:"lags"`
	ResidualCorrelation bool          `json:"residual_correlation"`
	PathsOverTime       string        `json:"paths_over_time"`
	FirstOccasion       string        `json:"first_occasion"`
	MeansOverTime       string        `json:"means_over_time"`
	// MovingAverage: ARMA(1,1) within parts (dynamics.moving_average).
	MovingAverage bool `json:"moving_average,omitempty"`
	// LagOn is "latent_response" when the latent response is regressed on
	// its previous value (dynamics.lag_on), else omitted.
	LagOn string `json:"lag_on,omitempty"`
	// RandomSlopes: growth (person_differences.random_slopes) over
	// TimeScores, one per occasion; MeansOverTime is then "growth line".
	RandomSlopes bool      `json:"random_slopes,omitempty"`
	TimeScores   []float64 `json:"time_scores,omitempty"`
	// MeanAnchor gives, per categorical outcome with free means, the
	// occasion whose mean is fixed at 0 (the others are differences from it).
	MeanAnchor      map[string]int `json:"mean_anchor,omitempty"`
	Priors          []string       `json:"priors"`
	Chains          int            `json:"chains"`
	Warmup          int            `json:"warmup"`
	Draws           int            `json:"draws"`
	ThresholdUpdate string         `json:"threshold_update"`
	Notes           []string       `json:"notes,omitempty"`
}

// Summary is the content of summary.json.
type Summary struct {
	Program    string     `json:"program"`
	Version    string     `json:"version"`
	Seed       uint64     `json:"seed"`
	Complete   bool       `json:"complete"`
	Model      ModelInfo  `json:"model"`
	RunLength  *RunLength `json:"run_length,omitempty"`
	Parameters []Entry    `json:"parameters"`
	Derived    []Entry    `json:"derived"`
	// Converged says whether every parameter and tabled derived quantity
	// meets the convergence rule (R-hat <= 1.01, bulk- and tail-ESS >=
	// 400); Unconverged names those that do not, all of them.
	Converged   bool     `json:"converged"`
	Unconverged []string `json:"unconverged"`
	Warnings    []string `json:"warnings"`
	// brief holds the warnings as the terminal shows them (long lists
	// shortened); summary.json holds them whole.
	brief []string
}

// RunLength records what run-until-converged did.
type RunLength struct {
	Rounds        int  `json:"rounds"`
	DrawsPerChain int  `json:"draws_per_chain"`
	MaxDraws      int  `json:"max_draws"`
	Converged     bool `json:"converged"`
	// StoppedBy says why sampling stopped: StopConverged, StopDrawCap,
	// StopTimeLimit or StopInterrupted.
	StoppedBy string `json:"stopped_by"`
	// TimeLimitSeconds is the time limit asked for (omitted when none).
	TimeLimitSeconds float64 `json:"time_limit_seconds,omitempty"`
}

// Reasons a run until converged stopped (RunLength.StoppedBy).
const (
	StopConverged   = "converged"
	StopDrawCap     = "draw cap"
	StopTimeLimit   = "time limit"
	StopInterrupted = "interrupted"
)

// Convergence is the convergence rule applied to a result: to every
// parameter and every tabled derived quantity, the set summary.json's
// converged judges.
type Convergence struct {
	OK bool
	// Worst names the first failing quantity with its diagnostics.
	Worst string
	// MinESS is the smallest bulk- or tail-ESS (NaN when one is
	// undefined); RhatFails says whether some R-hat fails.
	MinESS    float64
	RhatFails bool
}

// CheckConvergence applies the convergence rule to res.
func CheckConvergence(res *sampler.Result) Convergence {
	es := entries(res.Params, res.Draws, res.Kept, 0.95)
	es = append(es, entriesOf(res.Derived, res.DerivedDraws, res.Kept, 0.95, func(p sampler.Param) bool { return catalog.Tabled(p.Kind) })...)
	c := Convergence{OK: true, MinESS: math.Inf(1)}
	for _, e := range es {
		r, b, t := float64(e.Rhat), float64(e.ESSBulk), float64(e.ESSTail)
		if math.IsNaN(b) || math.IsNaN(t) {
			c.MinESS = math.NaN()
		} else if !math.IsNaN(c.MinESS) {
			c.MinESS = min(c.MinESS, b, t)
		}
		if rhatBad(r) {
			c.RhatFails = true
		}
		if entryBad(e) && c.OK {
			c.OK = false
			c.Worst = fmt.Sprintf("%s (R-hat %s, bulk-ESS %s, tail-ESS %s)", e.Name, diag(r, 3), diag(b, 0), diag(t, 0))
		}
	}
	return c
}

// Converged reports whether every parameter and tabled derived quantity of
// res has R-hat <= RhatLimit and bulk- and tail-ESS >= ESSLimit, and names
// the first one that does not otherwise.
func Converged(res *sampler.Result) (bool, string) {
	c := CheckConvergence(res)
	return c.OK, c.Worst
}

// NextDraws sizes the next round of a run until converged: the draws per
// chain at which the slowest quantity's ESS, growing in proportion to the
// draws as it does once the chains mix, reaches ESSLimit with a 20% margin;
// at least 1.25 and at most 4 times the current draws (ESS estimates from
// few draws are rough), 1.5 times when only R-hat fails, twice when an ESS
// is undefined; never more than maxDraws.
func NextDraws(c Convergence, draws, maxDraws int) int {
	var f float64
	switch {
	case math.IsNaN(c.MinESS) || c.MinESS <= 0:
		f = 2
	case c.MinESS >= ESSLimit:
		f = 1.5 // only R-hat fails
	default:
		f = 1.2 * ESSLimit / c.MinESS
	}
	f = min(max(f, 1.25), 4)
	return min(int(math.Ceil(f*float64(draws))), maxDraws)
}

// rhatBad and essBad fail a diagnostic that is past its limit or
// undefined (NaN: e.g. a parameter whose draws never change). They
// compare the value as printed (R-hat to 3 decimals, ESS to whole
// numbers), so a table can never show a passing number for a failing
// parameter or the other way round.
func rhatBad(r float64) bool { return !(math.Round(r*1000)/1000 <= RhatLimit) }
func essBad(x float64) bool  { return !(math.Round(x) >= ESSLimit) }

// entryBad reports whether e fails the convergence rule.
func entryBad(e Entry) bool {
	return rhatBad(float64(e.Rhat)) || essBad(float64(e.ESSBulk)) || essBad(float64(e.ESSTail))
}

// diag formats a diagnostic with the given decimals, "undefined" for NaN.
func diag(x float64, decimals int) string {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return "undefined"
	}
	return strconv.FormatFloat(x, 'f', decimals, 64)
}

// Thresholds of the convergence warnings (Vehtari et al. 2021, §4).
const (
	RhatLimit = 1.01
	ESSLimit  = 400
)

// Build summarizes a run at the given central-interval level.
func Build(res *sampler.Result, level float64, version string) *Summary {
	l := res.Layout
	sp := l.Spec
	s := &Summary{Program: Program, Version: version, Seed: res.Options.Seed, Complete: !res.Incomplete, Warnings: []string{}}
	mi := ModelInfo{File: sp.Path, DataFile: l.Panel.File, Persons: l.N, Rows: l.Panel.Rows, Occasions: l.Panel.Occasions,
		RandomIntercepts: l.RI, Lags: string(l.Lags), ResidualCorrelation: l.ResCorr,
		PathsOverTime: pick(l.PathsFree, "free", "equal"), FirstOccasion: pick(sp.Within.StationaryStart, "stationary", "free"),
		MeansOverTime: pick(l.MeansFree, "free", "equal"), Priors: l.Priors.Describe(l.J),
		Chains: res.Options.Chains, Warmup: res.Options.Warmup, Draws: res.Options.Draws,
		ThresholdUpdate: string(res.Options.ThresholdUpdate), Notes: append(slices.Clip(l.Panel.Notes), l.Notes...), MovingAverage: l.MA}
	if l.MA {
		mi.Priors = append(slices.Clip(mi.Priors), fmt.Sprintf("moving averages: normal(0, %g^2) truncated to (-1, 1)", l.Priors.PathSD))
	}
	if l.Growth {
		// The growth priors replace those of the occasion means and the
		// random-intercept covariance.
		mi.RandomSlopes, mi.TimeScores, mi.MeansOverTime = true, l.Time, "growth line"
		mi.Priors = slices.DeleteFunc(slices.Clone(mi.Priors), func(p string) bool {
			return strings.HasPrefix(p, "occasion means:") || strings.HasPrefix(p, "random-intercept covariance:")
		})
		mi.Priors = append(mi.Priors, sampler.GrowthPriors(l)...)
	}
	if l.Dyn {
		mi.LagOn = "latent_response"
		mi.Priors = slices.DeleteFunc(slices.Clone(mi.Priors), func(p string) bool { return strings.HasPrefix(p, "occasion means:") })
		mi.Priors = append(mi.Priors, fmt.Sprintf("intercepts of the lagged equation: normal(0, %g^2)", l.Priors.MeanSD))
		if l.RI {
			mi.Priors = append(mi.Priors, fmt.Sprintf("first-occasion loadings on the random intercepts: normal(1, %g^2) for an outcome's own, normal(0, %g^2) for another's", l.Priors.PathSD, l.Priors.PathSD))
		}
	}
	for j, o := range l.Panel.Outcomes {
		mi.Outcomes = append(mi.Outcomes, outcomeInfo(l, j))
		if t := l.Anchor[j]; t >= 0 {
			if mi.MeanAnchor == nil {
				mi.MeanAnchor = map[string]int{}
			}
			mi.MeanAnchor[o.Name] = l.Panel.Occasions[t]
		}
	}
	s.Model = mi
	s.Parameters = entries(res.Params, res.Draws, res.Kept, level)
	s.Derived = entries(res.Derived, res.DerivedDraws, res.Kept, level)
	if res.Incomplete {
		s.Warnings = append(s.Warnings, fmt.Sprintf("the run was interrupted: the chains kept %s of %d draws each; this summary is incomplete", joinInts(res.Kept), res.Options.Draws))
	}
	s.brief = slices.Clone(s.Warnings)
	add := func(full, brief []string) {
		s.Warnings = append(s.Warnings, full...)
		s.brief = append(s.brief, brief...)
	}
	checked := append(append([]Entry{}, s.Parameters...), tableOnly(s.Derived)...)
	s.Unconverged = []string{}
	for _, e := range checked {
		if entryBad(e) {
			s.Unconverged = append(s.Unconverged, e.Name)
		}
	}
	if kept := slices.Min(append([]int{math.MaxInt}, res.Kept...)); kept < 4 {
		w := fmt.Sprintf("too few draws (%d in the shortest chain) to judge convergence; nothing here can be reported", kept)
		add([]string{w}, []string{w})
	} else {
		s.Converged = len(s.Unconverged) == 0
		add(convergenceWarnings(l, checked))
		w := append(priorDominated(l, s.Parameters), explosive(l, s.Parameters)...)
		w = append(w, commonFactor(s.Parameters)...)
		add(w, w)
	}
	for _, n := range l.Panel.Notes {
		add([]string{"data: " + n}, []string{"data: " + n})
	}
	for _, n := range l.Notes {
		add([]string{"model: " + n}, []string{"model: " + n})
	}
	return s
}

// outcomeInfo counts outcome j's answers on the panel.
func outcomeInfo(l *sampler.Layout, j int) OutcomeInfo {
	pan := l.Panel
	o := pan.Outcomes[j]
	info := OutcomeInfo{Name: o.Name, DisplayName: l.Spec.Outcomes[j].DisplayName, Type: string(o.Type), Categories: o.Codes}
	if o.K > 0 {
		info.Highest = o.Codes[o.K-1]
		info.Counts = make([]int, o.K)
	}
	for i := range pan.Persons {
		for t := 0; t < pan.Len[i]; t++ {
			v := pan.Y[pan.Offset[i]+t*l.J+j]
			switch {
			case v != v:
				info.Missing++
			default:
				info.Observed++
				if o.K > 0 {
					info.Counts[int(v)]++
				}
			}
		}
	}
	return info
}

// count writes n with the singular or plural noun: count(1, "chain",
// "chains") is "1 chain".
func count(n int, one, many string) string {
	return fmt.Sprintf("%d %s", n, pick(n == 1, one, many))
}

func pick(c bool, a, b string) string {
	if c {
		return a
	}
	return b
}

func tableOnly(es []Entry) []Entry {
	var out []Entry
	for _, e := range es {
		if e.table {
			out = append(out, e)
		}
	}
	return out
}

// entries summarizes every quantity; the work is split over a fixed number
// of goroutines and results land by index, so the output does not depend on
// scheduling.
func entries(ps []sampler.Param, draws [][]float64, kept []int, level float64) []Entry {
	return entriesOf(ps, draws, kept, level, nil)
}

// entriesOf is entries for the quantities keep accepts (all when keep is
// nil), in their order; the others are not summarized at all.
func entriesOf(ps []sampler.Param, draws [][]float64, kept []int, level float64, keep func(sampler.Param) bool) []Entry {
	out := make([]Entry, len(ps))
	n := len(ps)
	minKept := kept[0]
	for _, k := range kept {
		minKept = min(minKept, k)
	}
	const workers = 4
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			chains := make([][]float64, len(draws))
			for p := w; p < n; p += workers {
				par := ps[p]
				if keep != nil && !keep(par) {
					continue
				}
				e := Entry{Name: par.Name, Kind: par.Kind, Outcome: par.Outcome, From: par.From, Outcomes: par.Pair,
					Occasion: par.Occasion, Index: par.Index, table: catalog.Tabled(par.Kind), Level: Num(level)}
				if minKept == 0 {
					nan := Num(math.NaN())
					e.Mean, e.SD, e.Median, e.Lower, e.Upper, e.Rhat, e.ESSBulk, e.ESSTail, e.MCSEMean = nan, nan, nan, nan, nan, nan, nan, nan, nan
					e.MCSELower, e.MCSEUpper = nan, nan
					out[p] = e
					continue
				}
				for c := range draws {
					chains[c] = make([]float64, minKept)
					for d := 0; d < minKept; d++ {
						chains[c][d] = draws[c][d*n+p]
					}
				}
				sm := diagnostics.Summarize(chains, level)
				e.Mean, e.SD, e.Median, e.Lower, e.Upper = Num(sm.Mean), Num(sm.SD), Num(sm.Median), Num(sm.Lower), Num(sm.Upper)
				e.Rhat, e.ESSBulk, e.ESSTail, e.MCSEMean = Num(sm.Rhat), Num(sm.ESSBulk), Num(sm.ESSTail), Num(sm.MCSEMean)
				e.MCSELower, e.MCSEUpper = Num(sm.MCSELower), Num(sm.MCSEUpper)
				out[p] = e
			}
		}(w)
	}
	wg.Wait()
	if keep != nil {
		out = slices.DeleteFunc(out, func(e Entry) bool { return e.Name == "" })
	}
	return out
}

// convergenceWarnings names every entry that fails the convergence rule
// (full: all of them; brief: lists shortened for the terminal) and, where
// failing entries rest on a sparsely observed occasion, says so instead
// of only advising longer runs.
func convergenceWarnings(l *sampler.Layout, es []Entry) (full, brief []string) {
	var rh, ess []string
	var bad []Entry
	for _, e := range es {
		if r := float64(e.Rhat); rhatBad(r) {
			rh = append(rh, fmt.Sprintf("%s (%s)", e.Name, diag(r, 3)))
		}
		b, t := float64(e.ESSBulk), float64(e.ESSTail)
		if essBad(b) || essBad(t) {
			ess = append(ess, fmt.Sprintf("%s (bulk %s, tail %s)", e.Name, diag(b, 0), diag(t, 0)))
		}
		if entryBad(e) {
			bad = append(bad, e)
		}
	}
	both := func(format string, list []string, args ...any) {
		full = append(full, fmt.Sprintf(format, append([]any{strings.Join(list, ", ")}, args...)...))
		brief = append(brief, fmt.Sprintf(format, append([]any{clipList(list)}, args...)...))
	}
	if len(rh) > 0 {
		both("R-hat above 1.01 for %s: the chains disagree, so these estimates are not yet usable; run longer (--until-converged, or raise --warmup and --draws), and if it persists simplify the model or check identification", rh)
	}
	if len(ess) > 0 {
		both("effective sample size below 400 for %s: intervals and means are not yet reliable; raise --draws (and --warmup), or use --until-converged", ess)
	}
	causes := causeAdvice(l, bad)
	return append(full, causes...), append(brief, causes...)
}

func clipList(xs []string) string {
	const most = 6
	if len(xs) <= most {
		return strings.Join(xs, ", ")
	}
	return strings.Join(xs[:most], ", ") + fmt.Sprintf(" and %d more", len(xs)-most)
}

// JSON renders the summary as indented JSON (NaN and infinities as null).
func (s *Summary) JSON() ([]byte, error) {
	b, err := json.MarshalIndent(s, "", "  ")
	if err != nil {
		return nil, err
	}
	return append(b, '\n'), nil
}

// joinInts writes numbers as "1095, 1152 and 883" (never as a Go list).
func joinInts(xs []int) string {
	t := make([]string, len(xs))
	for i, x := range xs {
		t[i] = strconv.Itoa(x)
	}
	return joinAnd(t)
}
