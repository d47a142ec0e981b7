package model

import (
	"os"
	"slices"
	"strconv"

	"go.yaml.in/yaml/v3"
)

// TruthSpec holds the parameter values of a truth file, used by
// `lagstar simulate` to generate data from a model file's structure. All
// values are on the latent-response scale (categorical outcomes) or the
// outcome's own scale (continuous outcomes).
type TruthSpec struct {
	Thresholds map[string][]float64
	Means      map[string][]float64 // one value, or one per occasion
	RIVar      map[string]float64
	RICorr     []Pair
	Paths      []Path
	InnovVar   map[string]float64
	InnovCorr  []Pair
	InitVar    map[string]float64
	InitCorr   []Pair
	// MovingAvg holds the moving-average coefficient of each outcome
	// (moving_averages; the model file needs dynamics.moving_average).
	MovingAvg map[string]float64
	// Growth (random_slopes; the model file needs
	// person_differences.random_slopes): the slopes' variances, their
	// correlations, their means, and the correlations of intercepts with
	// slopes (Pair.A the intercept's outcome, Pair.B the slope's).
	SlopeVar   map[string]float64
	SlopeCorr  []Pair
	SlopeMean  map[string]float64
	WithInterc []Pair
	// Lagged latent response (lag_intercepts, first_loadings; the model
	// file needs dynamics.lag_on: latent_response): the intercepts of the
	// dynamic equation per outcome (one value, the first occasion's and
	// the rest's, or one per occasion) and the first occasion's loadings
	// on the random intercepts (Path.From the intercept's outcome; absent:
	// 1 for an outcome's own, 0 otherwise).
	LagIntercepts map[string][]float64
	FirstLoadings []Path
	Missing       float64
}

// Pair is a correlation between two outcomes.
type Pair struct {
	A, B  string
	Value float64
	Line  int
}

// Path is a carry-over path from outcome From at t-1 to outcome To at t.
type Path struct {
	From, To string
	Value    float64
	Line     int
}

var truthSchema = map[string][]string{
	"":                  {"thresholds", "means", "random_intercepts", "random_slopes", "paths", "innovations", "first_occasion", "moving_averages", "lag_intercepts", "first_loadings", "missing"},
	"random_intercepts": {"variances", "correlations"},
	"random_slopes":     {"variances", "correlations", "means", "with_intercepts"},
	"with_intercepts":   {"intercept", "slope", "value"},
	"innovations":       {"variances", "correlations"},
	"first_occasion":    {"variances", "correlations"},
	"correlations":      {"outcomes", "value"},
	"paths":             {"from", "to", "value"},
	"first_loadings":    {"from", "to", "value"},
}

// ReadTruth reads a truth file and checks it against the model spec sp.
func ReadTruth(path string, sp *Spec) (*TruthSpec, error) {
	raw, err := os.ReadFile(path)
	if err != nil {
		if os.IsNotExist(err) {
			return nil, Inputf(path, 0, "truth file does not exist")
		}
		return nil, Inputf(path, 0, "cannot read truth file: %v", err)
	}
	var doc yaml.Node
	if err := yaml.Unmarshal(raw, &doc); err != nil {
		return nil, Inputf(path, 0, "not valid YAML: %v", err)
	}
	if len(doc.Content) == 0 {
		return nil, Inputf(path, 0, "truth file is empty")
	}
	p := &problems{}
	r := &truthReader{reader: reader{file: path, p: p, schema: truthSchema}, sp: sp}
	ts := &TruthSpec{Thresholds: map[string][]float64{}, Means: map[string][]float64{}, RIVar: map[string]float64{},
		InnovVar: map[string]float64{}, InitVar: map[string]float64{}, MovingAvg: map[string]float64{},
		SlopeVar: map[string]float64{}, SlopeMean: map[string]float64{}, LagIntercepts: map[string][]float64{}}
	top := r.mapping(doc.Content[0], "")
	if v, ok := top["thresholds"]; ok {
		for name, n := range r.outcomeMap(v, "thresholds") {
			ts.Thresholds[name] = r.floats(n, "thresholds."+name)
		}
	}
	if v, ok := top["means"]; ok {
		for name, n := range r.outcomeMap(v, "means") {
			ts.Means[name] = r.floats(n, "means."+name)
		}
	}
	varsCorr := func(key string, vars map[string]float64) []Pair {
		v, ok := top[key]
		if !ok {
			return nil
		}
		m := r.mapping(v, key)
		if n, ok := m["variances"]; ok {
			for name, x := range r.outcomeMap(n, key+".variances") {
				f := r.float(x, key+".variances."+name)
				if !(f > 0) {
					p.addf(path, x.Line, "%s.variances.%s: expected a positive variance, got %q", key, name, x.Value)
				}
				vars[name] = f
			}
		}
		var pairs []Pair
		if n, ok := m["correlations"]; ok {
			if n.Kind != yaml.SequenceNode {
				p.addf(path, n.Line, "%s.correlations: expected a list of {outcomes: [a, b], value: r}", key)
				return nil
			}
			for _, item := range n.Content {
				im := r.mapping(item, "correlations")
				pr := Pair{Line: item.Line}
				if b, ok := im["outcomes"]; ok {
					names := r.strList(b, key+".correlations.outcomes")
					if len(names) != 2 {
						p.addf(path, b.Line, "%s.correlations.outcomes: expected two outcome names", key)
					} else {
						pr.A, pr.B = r.outcome(names[0], b.Line, key), r.outcome(names[1], b.Line, key)
					}
				}
				if x, ok := im["value"]; ok {
					pr.Value = r.float(x, key+".correlations.value")
					if !(pr.Value > -1 && pr.Value < 1) {
						p.addf(path, x.Line, "%s.correlations.value: expected a correlation between -1 and 1, got %q", key, x.Value)
					}
				}
				pairs = append(pairs, pr)
			}
		}
		return pairs
	}
	ts.RICorr = varsCorr("random_intercepts", ts.RIVar)
	ts.InnovCorr = varsCorr("innovations", ts.InnovVar)
	ts.InitCorr = varsCorr("first_occasion", ts.InitVar)
	if v, ok := top["random_slopes"]; ok {
		if !sp.Between.RandomSlopes {
			p.addf(path, v.Line, "random_slopes: the model file has no person_differences.random_slopes: true")
		}
		ts.SlopeCorr = varsCorr("random_slopes", ts.SlopeVar)
		r.slopeExtras(v, ts)
	} else if sp.Between.RandomSlopes {
		p.addf(path, 0, "random_slopes: the model file has person_differences.random_slopes: true; give the slopes' variances (random_slopes.variances) and, if not 0, their means, correlations and correlations with the intercepts")
	}
	ts.Paths = r.paths(top, "paths")
	ts.FirstLoadings = r.paths(top, "first_loadings")
	lag := sp.Within.LatentLag()
	if v, ok := top["lag_intercepts"]; ok {
		if !lag {
			p.addf(path, v.Line, "lag_intercepts: the model file has no dynamics.lag_on: latent_response (give means instead)")
		}
		for name, n := range r.outcomeMap(v, "lag_intercepts") {
			ts.LagIntercepts[name] = r.floats(n, "lag_intercepts."+name)
		}
	}
	if v, ok := top["first_loadings"]; ok && !(lag && sp.Between.RandomIntercepts) {
		p.addf(path, v.Line, "first_loadings: only used with dynamics.lag_on: latent_response and random intercepts")
	}
	if v, ok := top["means"]; ok && lag {
		p.addf(path, v.Line, "means: with dynamics.lag_on: latent_response give the intercepts of the lagged equation under lag_intercepts (the occasion means follow from them and the carry-over)")
	}
	if v, ok := top["moving_averages"]; ok {
		if !sp.Within.MovingAverage {
			p.addf(path, v.Line, "moving_averages: the model file has no dynamics.moving_average: true")
		}
		for name, x := range r.outcomeMap(v, "moving_averages") {
			f := r.float(x, "moving_averages."+name)
			if !(f > -1 && f < 1) {
				p.addf(path, x.Line, "moving_averages.%s: expected a coefficient between -1 and 1 (invertible), got %q", name, x.Value)
			}
			ts.MovingAvg[name] = f
		}
	}
	if v, ok := top["missing"]; ok {
		ts.Missing = r.float(v, "missing")
		if !(ts.Missing >= 0 && ts.Missing < 1) {
			p.addf(path, v.Line, "missing: expected a share from 0 up to 1, got %q", v.Value)
		}
	}
	for _, o := range sp.Outcomes {
		if o.Type.Categorical() {
			th, ok := ts.Thresholds[o.Name]
			if !ok {
				p.addf(path, 0, "thresholds: outcome %q needs its thresholds", o.Name)
				continue
			}
			if o.Type == Binary && len(th) != 1 {
				p.addf(path, 0, "thresholds.%s: a binary outcome has one threshold, got %d", o.Name, len(th))
			}
			if o.Categories != 0 && len(th) != o.Categories-1 {
				p.addf(path, 0, "thresholds.%s: %d categories need %d thresholds, got %d", o.Name, o.Categories, o.Categories-1, len(th))
			}
			if !slices.IsSorted(th) {
				p.addf(path, 0, "thresholds.%s: thresholds must increase", o.Name)
			}
		} else if _, ok := ts.InnovVar[o.Name]; !ok {
			p.addf(path, 0, "innovations.variances: continuous outcome %q needs its innovation variance", o.Name)
		}
	}
	for _, o := range sp.Outcomes {
		if _, ok := ts.MovingAvg[o.Name]; sp.Within.MovingAverage && !ok {
			p.addf(path, 0, "moving_averages: outcome %q needs its moving-average coefficient (the model file has dynamics.moving_average: true)", o.Name)
		}
	}
	if err := p.err(); err != nil {
		return nil, err
	}
	return ts, nil
}

// paths reads a list of {from, to, value} under key (nil when absent).
func (r *truthReader) paths(top map[string]*yaml.Node, key string) []Path {
	v, ok := top[key]
	if !ok {
		return nil
	}
	if v.Kind != yaml.SequenceNode {
		r.p.addf(r.file, v.Line, "%s: expected a list of {from: a, to: b, value: x}", key)
		return nil
	}
	var out []Path
	for _, item := range v.Content {
		im := r.mapping(item, key)
		pa := Path{Line: item.Line}
		if x, ok := im["from"]; ok {
			pa.From = r.outcome(x.Value, x.Line, key+".from")
		}
		if x, ok := im["to"]; ok {
			pa.To = r.outcome(x.Value, x.Line, key+".to")
		}
		if x, ok := im["value"]; ok {
			pa.Value = r.float(x, key+".value")
		}
		out = append(out, pa)
	}
	return out
}

// slopeExtras reads random_slopes.means and random_slopes.with_intercepts
// (the section's keys were checked by varsCorr).
func (r *truthReader) slopeExtras(n *yaml.Node, ts *TruthSpec) {
	if n.Kind != yaml.MappingNode {
		return
	}
	for i := 0; i+1 < len(n.Content); i += 2 {
		k, v := n.Content[i], n.Content[i+1]
		switch k.Value {
		case "means":
			for name, x := range r.outcomeMap(v, "random_slopes.means") {
				ts.SlopeMean[name] = r.float(x, "random_slopes.means."+name)
			}
		case "with_intercepts":
			if v.Kind != yaml.SequenceNode {
				r.p.addf(r.file, v.Line, "random_slopes.with_intercepts: expected a list of {intercept: a, slope: b, value: r}")
				continue
			}
			for _, item := range v.Content {
				im := r.mapping(item, "with_intercepts")
				pr := Pair{Line: item.Line}
				if x, ok := im["intercept"]; ok {
					pr.A = r.outcome(x.Value, x.Line, "random_slopes.with_intercepts.intercept")
				} else {
					r.p.addf(r.file, item.Line, "random_slopes.with_intercepts: missing key \"intercept\" (an outcome)")
				}
				if x, ok := im["slope"]; ok {
					pr.B = r.outcome(x.Value, x.Line, "random_slopes.with_intercepts.slope")
				} else {
					r.p.addf(r.file, item.Line, "random_slopes.with_intercepts: missing key \"slope\" (an outcome)")
				}
				if x, ok := im["value"]; ok {
					pr.Value = r.float(x, "random_slopes.with_intercepts.value")
					if !(pr.Value > -1 && pr.Value < 1) {
						r.p.addf(r.file, x.Line, "random_slopes.with_intercepts.value: expected a correlation between -1 and 1, got %q", x.Value)
					}
				}
				ts.WithInterc = append(ts.WithInterc, pr)
			}
		}
	}
}

type truthReader struct {
	reader
	sp *Spec
}

// outcomeMap reads a mapping keyed by outcome names.
func (r *truthReader) outcomeMap(n *yaml.Node, key string) map[string]*yaml.Node {
	out := map[string]*yaml.Node{}
	if n.Kind != yaml.MappingNode {
		r.p.addf(r.file, n.Line, "%s: expected outcome names with values", key)
		return out
	}
	for i := 0; i+1 < len(n.Content); i += 2 {
		name := r.outcome(n.Content[i].Value, n.Content[i].Line, key)
		out[name] = n.Content[i+1]
	}
	return out
}

func (r *truthReader) outcome(name string, line int, key string) string {
	names := make([]string, len(r.sp.Outcomes))
	for i, o := range r.sp.Outcomes {
		names[i] = o.Name
	}
	if !slices.Contains(names, name) {
		r.p.addf(r.file, line, "%s: %q is not an outcome of the model file%s", key, name, suggest(name, names))
	}
	return name
}

func (r *truthReader) float(n *yaml.Node, key string) float64 {
	f, err := strconv.ParseFloat(n.Value, 64)
	if err != nil || n.Kind != yaml.ScalarNode {
		r.p.addf(r.file, n.Line, "%s: expected a number, got %q", key, n.Value)
	}
	return f
}

func (r *truthReader) floats(n *yaml.Node, key string) []float64 {
	if n.Kind == yaml.ScalarNode {
		return []float64{r.float(n, key)}
	}
	if n.Kind != yaml.SequenceNode {
		r.p.addf(r.file, n.Line, "%s: expected a number or a list of numbers", key)
		return nil
	}
	out := make([]float64, len(n.Content))
	for i, c := range n.Content {
		out[i] = r.float(c, key)
	}
	return out
}
