package fit

import (
	"errors"
	"math"
	"math/rand/v2"
	"strconv"

	"github.com/lagstar/lagstar/internal/dense"
	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/runfolder"
	"github.com/lagstar/lagstar/sampler"
)

// SimulateOptions says what data to generate.
type SimulateOptions struct {
	ModelPath, TruthPath string
	Persons, Occasions   int
	Out                  string
	Seed                 uint64
}

// Simulate generates a long-format CSV from the model file's structure and
// the truth file's values and writes it to o.Out. It returns the CSV.
func Simulate(o SimulateOptions) ([]byte, error) {
	if err := checkRange("--persons", o.Persons, 1, MaxSimPersons); err != nil {
		return nil, err
	}
	if err := checkRange("--occasions", o.Occasions, 1, MaxSimOccasion); err != nil {
		return nil, err
	}
	sp, err := model.ReadSpec(o.ModelPath)
	if err != nil {
		return nil, err
	}
	if cells := mul(o.Persons, o.Occasions, len(sp.Outcomes)); cells > MaxSimCells {
		return nil, model.Inputf("", 0, "--persons x --occasions x outcomes is %.3g cells, more than the %d one CSV may hold; simulate fewer persons or occasions (or several files)", cells, MaxSimCells)
	}
	ts, err := model.ReadTruth(o.TruthPath, sp)
	if err != nil {
		return nil, err
	}
	tr, err := truthFrom(sp, ts, o.TruthPath, o.Occasions)
	if err != nil {
		return nil, err
	}
	csv, err := sampler.Simulate(tr, o.Persons, o.Occasions, rand.New(rand.NewPCG(o.Seed, 0x73696d)))
	if err != nil {
		return nil, model.Inputf(o.TruthPath, 0, "%v", err)
	}
	if o.Out != "" {
		if err := runfolder.WriteAtomic(o.Out, csv); err != nil {
			return nil, err
		}
	}
	return csv, nil
}

// truthFrom assembles the simulator's matrices from a truth file.
func truthFrom(sp *model.Spec, ts *model.TruthSpec, file string, T int) (sampler.Truth, error) {
	J := len(sp.Outcomes)
	idx := map[string]int{}
	// Missing cells are written as the model file's first missing code
	// (by default an empty cell), so the model reads the file back as is.
	tr := sampler.Truth{PersonCol: sp.Data.Person, OccasionCol: sp.Data.Occasion, Missing: ts.Missing,
		Tau: make([][]float64, J), Codes: make([][]string, J), Sigma: make([]float64, J*J)}
	if len(sp.Data.Missing) > 0 {
		tr.MissingCode, tr.MissingSet = sp.Data.Missing[0], true
	} else if ts.Missing > 0 {
		return tr, model.Inputf(sp.Path, 0, "data.missing_codes is empty, so simulated missing cells (missing: %g in %s) could not be written; list a missing code", ts.Missing, file)
	}
	var errs []error
	bad := func(format string, args ...any) { errs = append(errs, model.Inputf(file, 0, format, args...)) }
	for j, o := range sp.Outcomes {
		idx[o.Name] = j
		tr.Names = append(tr.Names, o.Name)
		tr.Types = append(tr.Types, o.Type)
		if o.Type.Categorical() {
			tr.Tau[j] = ts.Thresholds[o.Name]
			K := len(tr.Tau[j]) + 1
			if o.Labels != nil {
				tr.Codes[j] = o.Labels
			} else {
				lo := 0
				if o.Lowest != nil {
					lo = *o.Lowest
				}
				for k := 0; k < K; k++ {
					tr.Codes[j] = append(tr.Codes[j], strconv.Itoa(lo+k))
				}
			}
		}
	}
	// Means.
	tr.Nu = make([]float64, T*J)
	for name, v := range ts.Means {
		j := idx[name]
		switch len(v) {
		case 1:
			for t := 0; t < T; t++ {
				tr.Nu[t*J+j] = v[0]
			}
		case T:
			for t := 0; t < T; t++ {
				tr.Nu[t*J+j] = v[t]
			}
		default:
			bad("means.%s: expected one value or one per occasion (%d), got %d", name, T, len(v))
			continue
		}
		if sp.Outcomes[j].Type.Categorical() && tr.Nu[j] != 0 {
			bad("means.%s: the first occasion's mean of a categorical outcome is 0 (its thresholds carry the location)", name)
		}
	}
	// Covariances: categorical variances are fixed at 1 (identification).
	fill := func(dst []float64, vars map[string]float64, pairs []model.Pair, what string, corrAllowed bool) {
		for j, o := range sp.Outcomes {
			v, ok := vars[o.Name]
			switch {
			case o.Type.Categorical() && ok:
				bad("%s.variances.%s: the variance of a categorical outcome's latent response is fixed at 1", what, o.Name)
			case o.Type.Categorical():
				v = 1
			case !ok:
				bad("%s.variances: continuous outcome %q needs a variance", what, o.Name)
				v = 1
			}
			dst[j*J+j] = v
		}
		for _, p := range pairs {
			if !corrAllowed {
				bad("%s.correlations: the model file has none (residual_correlation is false or only one outcome)", what)
				return
			}
			a, b := idx[p.A], idx[p.B]
			c := p.Value * math.Sqrt(dst[a*J+a]*dst[b*J+b])
			dst[a*J+b], dst[b*J+a] = c, c
		}
	}
	fill(tr.Sigma, ts.InnovVar, ts.InnovCorr, "innovations", sp.Within.ResidualCorrelation)
	if !sp.Within.StationaryStart {
		tr.Sigma1 = make([]float64, J*J)
		init := ts.InitVar
		if len(init) == 0 {
			init = ts.InnovVar
		}
		fill(tr.Sigma1, init, ts.InitCorr, "first_occasion", sp.Within.ResidualCorrelation)
	} else if len(ts.InitVar) > 0 || len(ts.InitCorr) > 0 {
		bad("first_occasion: the model file asks for a stationary first occasion, whose covariance follows from the paths and innovations")
	}
	if sp.Between.RandomSlopes {
		growthTruth(&tr, sp, ts, T, idx, bad)
	}
	if sp.Between.RandomIntercepts && !sp.Between.RandomSlopes {
		tr.Psi = make([]float64, J*J)
		for j, o := range sp.Outcomes {
			v, ok := ts.RIVar[o.Name]
			if !ok {
				bad("random_intercepts.variances: outcome %q needs a variance", o.Name)
			}
			tr.Psi[j*J+j] = v
		}
		for _, p := range ts.RICorr {
			a, b := idx[p.A], idx[p.B]
			c := p.Value * math.Sqrt(tr.Psi[a*J+a]*tr.Psi[b*J+b])
			tr.Psi[a*J+b], tr.Psi[b*J+a] = c, c
		}
	} else if len(ts.RIVar) > 0 && !sp.Between.RandomSlopes {
		bad("random_intercepts: the model file has person_differences.random_intercepts: false")
	}
	if sp.Within.MovingAverage {
		tr.MA = make([]float64, J)
		for j, o := range sp.Outcomes {
			tr.MA[j] = ts.MovingAvg[o.Name]
		}
	}
	if sp.Within.LatentLag() {
		lagTruth(&tr, sp, ts, T, idx, bad)
	}
	tr.A = make([]float64, J*J)
	for _, p := range ts.Paths {
		from, to := idx[p.From], idx[p.To]
		switch {
		case sp.Within.Lags == model.LagsNone:
			bad("paths: the model file has dynamics.lags: none")
		case sp.Within.Lags == model.LagsOwn && from != to:
			bad("paths: %s -> %s is a cross-lag, but the model file has dynamics.lags: own", p.From, p.To)
		}
		tr.A[to*J+from] = p.Value
	}
	for _, m := range []struct {
		name string
		v    []float64
	}{{"innovations", tr.Sigma}, {"first_occasion", tr.Sigma1}, {"random_intercepts", tr.Psi}, {"random_intercepts and random_slopes", tr.GrowthPsi}} {
		if m.v == nil {
			continue
		}
		c := append([]float64(nil), m.v...)
		if n := int(math.Round(math.Sqrt(float64(len(c))))); !dense.Cholesky(c, n) {
			bad("%s: the covariance matrix is not positive definite", m.name)
		}
	}
	if len(errs) > 0 {
		return tr, errors.Join(errs...)
	}
	return tr, nil
}

// lagTruth fills the lagged latent response's part of tr: the
// intercepts of the dynamic equation (one value for every occasion, two
// for the first occasion and the rest, or one per occasion; a categorical
// outcome's first is 0) and the first occasion's loadings.
func lagTruth(tr *sampler.Truth, sp *model.Spec, ts *model.TruthSpec, T int, idx map[string]int, bad func(string, ...any)) {
	J := len(sp.Outcomes)
	tr.Lag = true
	tr.Nu = nil
	tr.LagIntercepts = make([]float64, T*J)
	for name, v := range ts.LagIntercepts {
		j := idx[name]
		for t := 0; t < T; t++ {
			switch {
			case len(v) == 1:
				tr.LagIntercepts[t*J+j] = v[0]
			case len(v) == 2:
				tr.LagIntercepts[t*J+j] = v[min(t, 1)]
			case len(v) == T:
				tr.LagIntercepts[t*J+j] = v[t]
			default:
				bad("lag_intercepts.%s: expected one value, two (the first occasion's and the rest's) or one per occasion (%d), got %d", name, T, len(v))
				return
			}
		}
		if sp.Outcomes[j].Type.Categorical() && tr.LagIntercepts[j] != 0 {
			bad("lag_intercepts.%s: the first occasion's intercept of a categorical outcome is 0 (its thresholds carry the location)", name)
		}
	}
	if sp.Between.RandomIntercepts {
		tr.Loadings = make([]float64, J*J)
		for j := 0; j < J; j++ {
			tr.Loadings[j*J+j] = 1
		}
		for _, p := range ts.FirstLoadings {
			from, to := idx[p.From], idx[p.To]
			if from != to && sp.Within.Lags != model.LagsCross {
				bad("first_loadings: %s -> %s loads one outcome on another's random intercept, which the model file has only with dynamics.lags: cross", p.From, p.To)
			}
			tr.Loadings[to*J+from] = p.Value
		}
	}
}

// growthTruth fills the growth part of tr: the covariance of the
// intercepts and slopes (random_intercepts and random_slopes), their
// means (the means section gives the mean intercepts, at time score 0;
// random_slopes.means the mean slopes) and the time scores of T
// occasions.
func growthTruth(tr *sampler.Truth, sp *model.Spec, ts *model.TruthSpec, T int, idx map[string]int, bad func(string, ...any)) {
	J := len(sp.Outcomes)
	n := 2 * J
	psi := make([]float64, n*n)
	for j, o := range sp.Outcomes {
		v, ok := ts.RIVar[o.Name]
		if !ok {
			bad("random_intercepts.variances: outcome %q needs a variance", o.Name)
		}
		psi[j*n+j] = v
		v, ok = ts.SlopeVar[o.Name]
		if !ok {
			bad("random_slopes.variances: outcome %q needs a slope variance", o.Name)
		}
		psi[(J+j)*n+J+j] = v
	}
	set := func(r, c int, v float64) {
		x := v * math.Sqrt(psi[r*n+r]*psi[c*n+c])
		psi[r*n+c], psi[c*n+r] = x, x
	}
	for _, p := range ts.RICorr {
		set(idx[p.A], idx[p.B], p.Value)
	}
	for _, p := range ts.SlopeCorr {
		set(J+idx[p.A], J+idx[p.B], p.Value)
	}
	for _, p := range ts.WithInterc {
		set(idx[p.A], J+idx[p.B], p.Value)
	}
	tr.GrowthPsi = psi
	tr.GrowthMean = make([]float64, n)
	for j := 0; j < J; j++ {
		tr.GrowthMean[j] = tr.Nu[j] // one value (checked below)
		tr.GrowthMean[J+j] = ts.SlopeMean[sp.Outcomes[j].Name]
	}
	for name, v := range ts.Means {
		if len(v) != 1 {
			bad("means.%s: with random slopes the means follow the growth line; give the mean intercept (one value, at time score 0) here and the mean slope under random_slopes.means", name)
		}
	}
	tr.Nu = nil
	tr.Time = make([]float64, T)
	for t := range tr.Time {
		switch sp.Between.TimeScores {
		case model.TimeGiven:
			if len(sp.Between.Scores) != T {
				bad("--occasions is %d, but person_differences.time_scores lists %d scores in %s; simulate as many occasions as scores", T, len(sp.Between.Scores), sp.Path)
				return
			}
			tr.Time[t] = sp.Between.Scores[t]
		default: // simulated occasions are 1, 2, ..., T: equally spaced
			tr.Time[t] = float64(t)
		}
	}
}
