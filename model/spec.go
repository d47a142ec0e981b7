package model

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"time"

	"go.yaml.in/yaml/v3"
)

// OutcomeType is the measurement level of an outcome.
type OutcomeType string

// Outcome types.
const (
	Binary     OutcomeType = "binary"
	Ordinal    OutcomeType = "ordinal"
	Continuous OutcomeType = "continuous"
)

// Categorical reports whether the outcome has a latent response behind
// observed categories.
func (t OutcomeType) Categorical() bool { return t == Binary || t == Ordinal }

// Lags is the within-person carry-over structure.
type Lags string

// Carry-over structures.
const (
	LagsNone  Lags = "none"  // no carry-over
	LagsOwn   Lags = "own"   // autoregression only
	LagsCross Lags = "cross" // autoregression plus cross-lags
)

// ThresholdUpdate selects the threshold move.
type ThresholdUpdate string

// Threshold moves.
const (
	// ThresholdJoint moves thresholds and latent responses together
	// (Liu & Sabatti 2000 group move), after an Albert-Chib step.
	ThresholdJoint ThresholdUpdate = "joint"
	// ThresholdAlbertChib is the plain Gibbs step of Albert & Chib (1993),
	// kept as a baseline.
	ThresholdAlbertChib ThresholdUpdate = "albert-chib"
)

// Spec is a parsed, checked model file.
type Spec struct {
	Path     string // model file as given
	Raw      []byte // its content
	Data     DataSpec
	Outcomes []OutcomeSpec
	Between  BetweenSpec
	Within   WithinSpec
	Means    MeansSpec
	Sampler  SamplerSpec
	// AllowDegenerate keeps outcomes with an empty category or a single
	// value (noted, not refused). Only simulation-based calibration sets
	// it: its prior draws may leave a category empty, and the posterior
	// under the threshold prior is still proper. No model-file key sets it.
	AllowDegenerate bool
}

// DataSpec says where the panel is and which columns index it.
type DataSpec struct {
	File     string   // resolved path of the CSV
	Person   string   // person column
	Occasion string   // occasion column (integers; long layout)
	Missing  []string // cell texts that mean missing
	// Separator is the field separator by name (comma, semicolon, tab), or
	// "" to detect it from the header line.
	Separator string
	// Wide is true for one row per person with one column per outcome and
	// occasion (layout: wide). WideColumns is the pattern of those
	// columns' names, with {outcome} and {occasion} in it.
	Wide        bool
	WideColumns string
}

// OutcomeSpec is one outcome as the model file declares it.
type OutcomeSpec struct {
	Name string
	// DisplayName is the outcome's name in manuscript tables, captions and
	// the HTML report ("" : Name). Parameter names keep Name.
	DisplayName string
	Type        OutcomeType
	Categories  int      // 0: infer from the data
	Lowest      *int     // code of the lowest category; nil: infer
	Labels      []string // category labels, lowest first; nil: integer codes
	// MergeEmpty (empty_categories: merge) drops categories nobody used
	// instead of refusing the data.
	MergeEmpty bool
	// Columns maps occasions to this outcome's columns in wide data (nil:
	// found by data.wide_columns).
	Columns map[int]string
	Line    int // line of the entry in the model file
}

// BetweenSpec is the between-person part.
type BetweenSpec struct {
	RandomIntercepts bool
	// RandomSlopes (person_differences.random_slopes) adds a random slope
	// over the time scores: y*_ijt = mu0_j + s_t mu1_j + b_ij + s_t g_ij +
	// w_ijt, (b_i, g_i) correlated, the growth line replacing the
	// occasion means.
	RandomSlopes bool
	// TimeScores (person_differences.time_scores) says where s_t comes
	// from: TimeEqual (0, 1, 2, ... over the occasions), TimeOccasions
	// (the occasion values minus the first) or TimeGiven (Scores, one per
	// occasion). TimeLine is the key's line (0: not given).
	TimeScores string
	Scores     []float64
	TimeLine   int
}

// Time scores of growth (person_differences.time_scores).
const (
	TimeEqual     = "equally_spaced"
	TimeOccasions = "occasion_values"
	TimeGiven     = "given"
)

// WithinSpec is the within-person part.
type WithinSpec struct {
	Lags                Lags
	ResidualCorrelation bool
	residualSet         bool
	PathsFree           bool // over_time: free
	StationaryStart     bool // first_occasion: stationary
	// MovingAverage (dynamics.moving_average) adds M zeta_{t-1} to the
	// within part: ARMA(1,1) residuals with one coefficient per outcome.
	MovingAverage bool
	// ImpulseHorizon (dynamics.impulse_horizon) is the number of
	// occasions after a shock the impulse responses run to (0: none).
	ImpulseHorizon int
	// LagOn (dynamics.lag_on) says what carries over: LagOnResiduals
	// (the within-person residuals, w_t = A w_{t-1} + zeta_t) or
	// LagOnLatent (the latent response itself, y*_t = c_t + b + A y*_{t-1}
	// + zeta_t, the first occasion given). LagOnLine is the key's line.
	LagOn     string
	LagOnLine int
}

// What carries over (dynamics.lag_on).
const (
	LagOnResiduals = "residuals"
	LagOnLatent    = "latent_response"
)

// LatentLag reports whether the latent response is regressed on its
// previous value (dynamics.lag_on: latent_response).
func (w WithinSpec) LatentLag() bool { return w.LagOn == LagOnLatent }

// MeansSpec is the occasion-mean structure.
type MeansSpec struct {
	Free bool // over_time: free
	// Anchor (means.anchor) says at which occasion a categorical outcome's
	// mean is fixed at 0 when means are free (its thresholds carry the
	// location there): AnchorAuto, AnchorFirst, or an occasion value.
	Anchor string
}

// Mean anchors (means.anchor).
const (
	// AnchorAuto is the first occasion with answers, unless fewer than
	// half as many persons answered it as the best-observed occasion:
	// then the best-observed one.
	AnchorAuto = "auto"
	// AnchorFirst is the first occasion with answers.
	AnchorFirst = "first"
)

// SamplerSpec holds the sampler settings of the model file.
type SamplerSpec struct {
	Chains, Warmup, Draws int
	Seed                  uint64
	SeedSet               bool
	ThresholdUpdate       ThresholdUpdate
	// UntilConverged (the default) extends sampling in rounds until every
	// parameter has R-hat <= 1.01 and bulk- and tail-ESS >= 400, up to
	// MaxDraws per chain and, when TimeLimit > 0, about TimeLimit of
	// sampling; false keeps Draws per chain whatever the diagnostics say.
	UntilConverged bool
	MaxDraws       int
	TimeLimit      time.Duration
	// PathMoves adds exact-HMC moves of whole latent paths (all outcomes
	// categorical only).
	PathMoves bool
	// CheckpointEvery is the number of sweeps between checkpoints of each
	// chain (0: only when a chain stops).
	CheckpointEvery int
}

// schema lists the keys allowed at each level of the model file.
var schema = map[string][]string{
	"":                   {"data", "outcomes", "person_differences", "dynamics", "means", "sampler"},
	"data":               {"csv", "person", "occasion", "missing_codes", "separator", "layout", "wide_columns"},
	"outcomes":           {"name", "display_name", "type", "categories", "lowest", "labels", "empty_categories", "columns"},
	"person_differences": {"random_intercepts", "random_slopes", "time_scores"},
	"dynamics":           {"lags", "residual_correlation", "over_time", "first_occasion", "moving_average", "impulse_horizon", "lag_on"},
	"means":              {"over_time", "anchor"},
	"sampler":            {"chains", "warmup", "draws", "seed", "threshold_update", "until_converged", "max_draws", "time_limit", "path_moves", "checkpoint_every"},
}

// looksLikeCSV reports whether a would-be model file is a CSV: its first
// line holds two or more commas (semicolons, tabs) and no colon and is no
// YAML comment, and the second line as many.
func looksLikeCSV(raw []byte) bool {
	lines := strings.SplitN(string(raw), "\n", 3)
	if len(lines) < 2 || strings.Contains(lines[0], ":") || strings.HasPrefix(strings.TrimSpace(lines[0]), "#") {
		return false
	}
	for _, sep := range []string{",", ";", "\t"} {
		if n := strings.Count(lines[0], sep); n >= 2 && strings.Count(lines[1], sep) == n {
			return true
		}
	}
	return false
}

// clipText shortens s to at most n runes for a message.
func clipText(s string, n int) string {
	if r := []rune(s); len(r) > n {
		return string(r[:n-3]) + "..."
	}
	return s
}

// renamedKeys maps keys of earlier model files (section.key) to their
// present names. They are not read as aliases; an old file gets a message
// that names the new key.
var renamedKeys = map[string]string{
	".between":     "person_differences",
	".within":      "dynamics",
	"data.file":    "csv",
	"data.missing": "missing_codes",
}

// ReadSpec reads and checks the model file at path. Every problem is an
// InputError naming the file, the line and the key.
func ReadSpec(path string) (*Spec, error) {
	raw, err := os.ReadFile(path)
	if err != nil {
		if os.IsNotExist(err) {
			return nil, Inputf(path, 0, "model file does not exist")
		}
		return nil, Inputf(path, 0, "cannot read model file: %v", err)
	}
	return ParseSpec(path, raw)
}

// ParseSpec checks the model file content raw; path names it in messages and
// anchors the relative data path.
func ParseSpec(path string, raw []byte) (*Spec, error) {
	if looksLikeCSV(raw) {
		head, _, _ := strings.Cut(string(raw), "\n")
		return nil, Inputf(path, 0, "is a data file, not a model file: its first line %q looks like a CSV header. Give the model file (YAML) and name this CSV in it under data.csv", clipText(strings.TrimSpace(head), 60))
	}
	var doc yaml.Node
	if err := yaml.Unmarshal(raw, &doc); err != nil {
		return nil, Inputf(path, 0, "not valid YAML: %s", strings.TrimPrefix(err.Error(), "yaml: "))
	}
	if len(doc.Content) == 0 {
		return nil, Inputf(path, 0, "model file is empty; it needs at least the keys data and outcomes")
	}
	root := doc.Content[0]
	p := &problems{}
	sp := &Spec{Path: path, Raw: raw}
	sp.Data.Missing = []string{"", "NA"}
	sp.Within.Lags = LagsCross
	sp.Within.ImpulseHorizon = 5
	sp.Within.LagOn = LagOnResiduals
	sp.Means.Free = true
	sp.Means.Anchor = AnchorAuto
	sp.Sampler = SamplerSpec{Chains: 4, Warmup: 1000, Draws: 1000, ThresholdUpdate: ThresholdJoint, UntilConverged: true, MaxDraws: 20000, CheckpointEvery: 500}
	r := &reader{file: path, p: p, schema: schema}
	top := r.mapping(root, "")
	if top == nil {
		return nil, p.err()
	}
	if n, ok := top["data"]; ok {
		m := r.mapping(n, "data")
		if v, ok := m["csv"]; ok {
			sp.Data.File = r.str(v, "data.csv")
		}
		if v, ok := m["person"]; ok {
			sp.Data.Person = r.str(v, "data.person")
		}
		if v, ok := m["occasion"]; ok {
			sp.Data.Occasion = r.str(v, "data.occasion")
		}
		if v, ok := m["missing_codes"]; ok {
			sp.Data.Missing = r.strList(v, "data.missing_codes")
		}
		if v, ok := m["separator"]; ok {
			if c := r.choice(v, "data.separator", "auto", "comma", "semicolon", "tab"); c != "auto" {
				sp.Data.Separator = c
			}
		}
		if v, ok := m["layout"]; ok {
			sp.Data.Wide = r.choice(v, "data.layout", "long", "wide") == "wide"
		}
		need := []string{"csv", "person", "occasion"}
		if sp.Data.Wide {
			need = need[:2]
			if v, ok := m["occasion"]; ok {
				p.addf(path, v.Line, "data.occasion: not used with layout: wide, where occasions come from the column names (data.wide_columns or the outcomes' columns)")
			}
			sp.Data.WideColumns = "{outcome}_{occasion}"
			if v, ok := m["wide_columns"]; ok {
				sp.Data.WideColumns = r.str(v, "data.wide_columns")
				if strings.Count(sp.Data.WideColumns, "{outcome}") != 1 || strings.Count(sp.Data.WideColumns, "{occasion}") != 1 {
					p.addf(path, v.Line, "data.wide_columns: expected a column-name pattern with {outcome} and {occasion} once each, e.g. \"{outcome}_{occasion}\", got %q", sp.Data.WideColumns)
				}
			}
		} else if v, ok := m["wide_columns"]; ok {
			p.addf(path, v.Line, "data.wide_columns: only used with layout: wide")
		}
		for _, k := range need {
			if _, ok := m[k]; !ok && m != nil {
				p.addf(path, n.Line, "data: missing key %q", k)
			}
		}
	} else {
		p.addf(path, root.Line, "missing section \"data\" (csv, person, occasion)")
	}
	if n, ok := top["outcomes"]; ok {
		if n.Kind != yaml.SequenceNode || len(n.Content) == 0 {
			p.addf(path, n.Line, "outcomes: expected a list of outcomes, each with name and type")
		} else {
			for i, item := range n.Content {
				sp.Outcomes = append(sp.Outcomes, r.outcome(item, i))
			}
		}
	} else {
		p.addf(path, root.Line, "missing section \"outcomes\"")
	}
	if n, ok := top["person_differences"]; ok {
		m := r.mapping(n, "person_differences")
		sp.Between.RandomIntercepts = true
		if v, ok := m["random_intercepts"]; ok {
			sp.Between.RandomIntercepts = r.boolean(v, "person_differences.random_intercepts")
		}
		if v, ok := m["random_slopes"]; ok {
			sp.Between.RandomSlopes = r.boolean(v, "person_differences.random_slopes")
		}
		sp.Between.TimeScores = TimeEqual
		if v, ok := m["time_scores"]; ok {
			sp.Between.TimeLine = v.Line
			r.timeScores(v, &sp.Between)
			if !sp.Between.RandomSlopes {
				p.addf(path, v.Line, "person_differences.time_scores: only used with person_differences.random_slopes: true")
			}
		}
		if sp.Between.RandomSlopes && !sp.Between.RandomIntercepts {
			p.addf(path, n.Line, "person_differences.random_slopes: true needs random_intercepts: true; a random slope without a random intercept would force every person's line through the same level at time score 0")
		}
	} else {
		sp.Between.RandomIntercepts = true
	}
	if n, ok := top["dynamics"]; ok {
		m := r.mapping(n, "dynamics")
		if v, ok := m["lags"]; ok {
			sp.Within.Lags = Lags(r.choice(v, "dynamics.lags", "none", "own", "cross"))
		}
		if v, ok := m["residual_correlation"]; ok {
			sp.Within.ResidualCorrelation = r.boolean(v, "dynamics.residual_correlation")
			sp.Within.residualSet = true
		}
		if v, ok := m["over_time"]; ok {
			sp.Within.PathsFree = r.choice(v, "dynamics.over_time", "equal", "free") == "free"
		}
		if v, ok := m["first_occasion"]; ok {
			sp.Within.StationaryStart = r.choice(v, "dynamics.first_occasion", "free", "stationary") == "stationary"
		}
		if v, ok := m["moving_average"]; ok {
			sp.Within.MovingAverage = r.boolean(v, "dynamics.moving_average")
		}
		if v, ok := m["impulse_horizon"]; ok {
			sp.Within.ImpulseHorizon = r.intIn(v, "dynamics.impulse_horizon", 0, 50)
		}
		if v, ok := m["lag_on"]; ok {
			sp.Within.LagOn = r.choice(v, "dynamics.lag_on", LagOnResiduals, LagOnLatent)
			sp.Within.LagOnLine = v.Line
		}
	}
	if n, ok := top["means"]; ok {
		m := r.mapping(n, "means")
		if sp.Between.RandomSlopes && len(m) > 0 {
			p.addf(path, n.Line, "means: not used with person_differences.random_slopes: true; the means then follow the growth line (a mean intercept and a mean slope per outcome, the intercept fixed at 0 for a categorical outcome, whose thresholds carry its level); leave the means section out")
		}
		if v, ok := m["over_time"]; ok {
			sp.Means.Free = r.choice(v, "means.over_time", "free", "equal") == "free"
		}
		if v, ok := m["anchor"]; ok {
			sp.Means.Anchor = v.Value
			if _, err := strconv.Atoi(v.Value); v.Kind != yaml.ScalarNode || (err != nil && v.Value != AnchorAuto && v.Value != AnchorFirst) {
				p.addf(path, v.Line, "means.anchor: expected auto, first or an occasion value (a whole number), got %q", v.Value)
			}
			if !sp.Means.Free {
				p.addf(path, v.Line, "means.anchor: only used with means.over_time: free (with equal means every categorical mean is 0)")
			}
		}
	}
	if n, ok := top["sampler"]; ok {
		m := r.mapping(n, "sampler")
		if v, ok := m["chains"]; ok {
			sp.Sampler.Chains = r.intIn(v, "sampler.chains", 1, 64)
		}
		if v, ok := m["warmup"]; ok {
			sp.Sampler.Warmup = r.intIn(v, "sampler.warmup", 0, 10_000_000)
		}
		if v, ok := m["draws"]; ok {
			sp.Sampler.Draws = r.intIn(v, "sampler.draws", 1, 10_000_000)
		}
		if v, ok := m["seed"]; ok {
			s, err := strconv.ParseUint(v.Value, 10, 64)
			if err != nil || v.Kind != yaml.ScalarNode {
				p.addf(path, v.Line, "sampler.seed: expected a whole number from 0 to %d, got %q", uint64(1<<64-1), v.Value)
			}
			sp.Sampler.Seed, sp.Sampler.SeedSet = s, true
		}
		if v, ok := m["until_converged"]; ok {
			sp.Sampler.UntilConverged = r.boolean(v, "sampler.until_converged")
		}
		if v, ok := m["path_moves"]; ok {
			sp.Sampler.PathMoves = r.boolean(v, "sampler.path_moves")
		}
		if v, ok := m["checkpoint_every"]; ok {
			sp.Sampler.CheckpointEvery = r.intIn(v, "sampler.checkpoint_every", 0, 10_000_000)
		}
		if v, ok := m["max_draws"]; ok {
			sp.Sampler.MaxDraws = r.intIn(v, "sampler.max_draws", 1, 10_000_000)
		}
		if v, ok := m["time_limit"]; ok {
			d, err := time.ParseDuration(v.Value)
			if err != nil || v.Kind != yaml.ScalarNode || d <= 0 {
				p.addf(path, v.Line, "sampler.time_limit: expected a duration such as 30m, 2h or 90s, got %q", v.Value)
			}
			sp.Sampler.TimeLimit = d
		}
		if v, ok := m["threshold_update"]; ok {
			sp.Sampler.ThresholdUpdate = ThresholdUpdate(r.choice(v, "sampler.threshold_update", "joint", "albert-chib"))
		}
	}
	if sp.Between.RandomSlopes {
		// The growth line replaces the occasion means.
		sp.Means.Free = false
	}
	if sp.Within.LatentLag() {
		sp.checkLatentLag(p)
	}
	if !sp.Within.residualSet {
		sp.Within.ResidualCorrelation = len(sp.Outcomes) > 1
	}
	for _, o := range sp.Outcomes {
		if o.Columns != nil && !sp.Data.Wide {
			p.addf(path, o.Line, "outcome %q: columns is only used with data.layout: wide", o.Name)
		}
	}
	if sp.Data.File != "" && !filepath.IsAbs(sp.Data.File) {
		sp.Data.File = filepath.Join(filepath.Dir(path), sp.Data.File)
	}
	sp.checkOutcomes(p, root.Line)
	if err := p.err(); err != nil {
		return nil, err
	}
	return sp, nil
}

// checkLatentLag refuses what dynamics.lag_on: latent_response cannot be
// combined with, saying why.
func (sp *Spec) checkLatentLag(p *problems) {
	f, line := sp.Path, sp.Within.LagOnLine
	const key = "dynamics.lag_on: latent_response"
	if sp.Within.Lags == LagsNone {
		p.addf(f, line, "%s needs dynamics.lags: own or cross; with lags: none there is no previous response to regress on", key)
	}
	if sp.Within.MovingAverage {
		p.addf(f, line, "%s cannot be combined with dynamics.moving_average: true; a moving average of the innovations of a lagged latent response is a different model lagstar does not fit (use lag_on: residuals for ARMA(1,1) residuals)", key)
	}
	if sp.Within.StationaryStart {
		p.addf(f, line, "%s treats the first occasion as given, with its own mean, variance and loading on the random intercept; dynamics.first_occasion: stationary does not apply (leave it out or set it to free)", key)
	}
	if sp.Between.RandomSlopes {
		p.addf(f, line, "%s cannot be combined with person_differences.random_slopes: true; a lagged latent response carries a growth line forward, so the slope and the carry-over are confounded (use lag_on: residuals for growth with autocorrelated residuals)", key)
	}
	if sp.Sampler.PathMoves {
		p.addf(f, line, "%s cannot be combined with sampler.path_moves: true, whose moves assume carry-over of the residuals", key)
	}
	if !sp.Means.Free && sp.Within.PathsFree {
		for _, o := range sp.Outcomes {
			if o.Type == Continuous {
				p.addf(f, line, "%s with dynamics.over_time: free and means.over_time: equal: outcome %q is continuous, and an intercept equal over time on its own scale would change with the carry-over on the analysis scale; use means.over_time: free", key, o.Name)
				break
			}
		}
	}
	if a := sp.Means.Anchor; a != AnchorAuto && a != AnchorFirst {
		p.addf(f, line, "%s fixes a categorical outcome's intercept at the first occasion, which is given; means.anchor: %s does not apply (leave it out)", key, a)
	}
}

func (sp *Spec) checkOutcomes(p *problems, line int) {
	if len(sp.Outcomes) > 6 {
		p.addf(sp.Path, line, "outcomes: %d outcomes given, at most 6 are supported", len(sp.Outcomes))
	}
	seen := map[string]int{}
	for _, o := range sp.Outcomes {
		if o.Name == "" {
			continue
		}
		if prev, ok := seen[o.Name]; ok {
			p.addf(sp.Path, o.Line, "outcomes: %q is listed twice (first at line %d)", o.Name, prev)
		}
		seen[o.Name] = o.Line
		if o.Name == sp.Data.Person || o.Name == sp.Data.Occasion {
			p.addf(sp.Path, o.Line, "outcomes: %q is also the person or occasion column", o.Name)
		}
	}
}

// reader walks the YAML tree, checking keys and value types.
type reader struct {
	file   string
	p      *problems
	schema map[string][]string
}

func (r *reader) mapping(n *yaml.Node, section string) map[string]*yaml.Node {
	if n.Kind != yaml.MappingNode {
		where := section
		if where == "" {
			where = "model file"
		}
		r.p.addf(r.file, n.Line, "%s: expected a set of keys, got %q", where, clipText(n.Value, 40))
		return nil
	}
	allowed := r.schema[section]
	out := map[string]*yaml.Node{}
	for i := 0; i+1 < len(n.Content); i += 2 {
		k, v := n.Content[i], n.Content[i+1]
		name := k.Value
		if !slices.Contains(allowed, name) {
			where := "unknown key"
			if section != "" {
				where = "unknown key in " + section
			}
			hint := suggest(name, allowed)
			if now, ok := renamedKeys[section+"."+name]; ok {
				hint = fmt.Sprintf(" (this key is now called %q)", now)
			}
			r.p.addf(r.file, k.Line, "%s: %q%s; allowed: %s", where, name, hint, strings.Join(allowed, ", "))
			continue
		}
		if _, dup := out[name]; dup {
			r.p.addf(r.file, k.Line, "key %q given twice", name)
		}
		out[name] = v
	}
	return out
}

func (r *reader) str(n *yaml.Node, key string) string {
	if n.Kind != yaml.ScalarNode || n.Value == "" {
		r.p.addf(r.file, n.Line, "%s: expected a non-empty text", key)
		return ""
	}
	return n.Value
}

func (r *reader) strList(n *yaml.Node, key string) []string {
	if n.Kind == yaml.ScalarNode {
		return []string{n.Value}
	}
	if n.Kind != yaml.SequenceNode {
		r.p.addf(r.file, n.Line, "%s: expected a list of texts", key)
		return nil
	}
	out := make([]string, 0, len(n.Content))
	for _, c := range n.Content {
		if c.Kind != yaml.ScalarNode {
			r.p.addf(r.file, c.Line, "%s: expected a text, got a nested value", key)
			continue
		}
		out = append(out, c.Value)
	}
	return out
}

func (r *reader) boolean(n *yaml.Node, key string) bool {
	switch strings.ToLower(n.Value) {
	case "true", "yes", "on":
		return true
	case "false", "no", "off":
		return false
	}
	r.p.addf(r.file, n.Line, "%s: expected true or false, got %q", key, n.Value)
	return false
}

func (r *reader) choice(n *yaml.Node, key string, options ...string) string {
	if n.Kind == yaml.ScalarNode && slices.Contains(options, n.Value) {
		return n.Value
	}
	r.p.addf(r.file, n.Line, "%s: expected one of %s, got %q%s", key, strings.Join(options, ", "), n.Value, suggest(n.Value, options))
	return options[0]
}

func (r *reader) intIn(n *yaml.Node, key string, lo, hi int) int {
	v, err := strconv.Atoi(n.Value)
	if err != nil || n.Kind != yaml.ScalarNode || v < lo || v > hi {
		r.p.addf(r.file, n.Line, "%s: expected a whole number from %d to %d, got %q", key, lo, hi, n.Value)
		return lo
	}
	return v
}

func (r *reader) outcome(n *yaml.Node, i int) OutcomeSpec {
	o := OutcomeSpec{Line: n.Line}
	m := r.mapping(n, "outcomes")
	if m == nil {
		return o
	}
	key := fmt.Sprintf("outcomes[%d]", i+1)
	if v, ok := m["name"]; ok {
		o.Name = r.str(v, key+".name")
	} else {
		r.p.addf(r.file, n.Line, "%s: missing key \"name\" (the CSV column of the outcome)", key)
	}
	if o.Name != "" {
		key = fmt.Sprintf("outcome %q", o.Name)
	}
	if v, ok := m["display_name"]; ok {
		o.DisplayName = r.str(v, key+": display_name")
	}
	if v, ok := m["type"]; ok {
		o.Type = OutcomeType(r.choice(v, key+": type", "ordinal", "binary", "continuous"))
	} else {
		r.p.addf(r.file, n.Line, "%s: missing key \"type\" (ordinal, binary or continuous)", key)
	}
	if v, ok := m["categories"]; ok {
		before := len(r.p.errs)
		o.Categories = r.intIn(v, key+": categories", 2, 11)
		valid := len(r.p.errs) == before // an out-of-range value is reported once
		if o.Type == Continuous {
			r.p.addf(r.file, v.Line, "%s: categories given for a continuous outcome", key)
		}
		if valid && o.Type == Binary && o.Categories != 2 {
			r.p.addf(r.file, v.Line, "%s: a binary outcome has 2 categories, got %d", key, o.Categories)
		}
		if valid && o.Type == Ordinal && o.Categories < 3 {
			r.p.addf(r.file, v.Line, "%s: an ordinal outcome needs 3 to 11 categories, got %d (use type: binary for two)", key, o.Categories)
		}
	}
	if v, ok := m["lowest"]; ok {
		lw, err := strconv.Atoi(v.Value)
		if err != nil {
			r.p.addf(r.file, v.Line, "%s: lowest: expected a whole number (the code of the lowest category), got %q", key, v.Value)
		}
		o.Lowest = &lw
		if o.Type == Continuous {
			r.p.addf(r.file, v.Line, "%s: lowest given for a continuous outcome", key)
		}
	}
	if v, ok := m["labels"]; ok {
		o.Labels = r.strList(v, key+": labels")
		if o.Type == Continuous {
			r.p.addf(r.file, v.Line, "%s: labels given for a continuous outcome", key)
		}
		seen := map[string]bool{}
		for _, l := range o.Labels {
			if seen[l] {
				r.p.addf(r.file, v.Line, "%s: label %q listed twice", key, l)
			}
			seen[l] = true
		}
		if o.Categories != 0 && o.Categories != len(o.Labels) {
			r.p.addf(r.file, v.Line, "%s: %d labels but categories: %d", key, len(o.Labels), o.Categories)
		}
		if o.Lowest != nil {
			r.p.addf(r.file, v.Line, "%s: give either labels or lowest, not both", key)
		}
		if o.Type == Binary && len(o.Labels) != 2 {
			r.p.addf(r.file, v.Line, "%s: a binary outcome needs exactly 2 labels, got %d", key, len(o.Labels))
		}
		if o.Type == Ordinal && (len(o.Labels) < 3 || len(o.Labels) > 11) {
			r.p.addf(r.file, v.Line, "%s: an ordinal outcome needs 3 to 11 labels, got %d", key, len(o.Labels))
		}
		o.Categories = len(o.Labels)
	}
	if v, ok := m["empty_categories"]; ok {
		o.MergeEmpty = r.choice(v, key+": empty_categories", "refuse", "merge") == "merge"
		if o.Type == Continuous {
			r.p.addf(r.file, v.Line, "%s: empty_categories given for a continuous outcome", key)
		}
	}
	if v, ok := m["columns"]; ok {
		o.Columns = r.occasionColumns(v, key+": columns")
	}
	return o
}

// timeScores reads person_differences.time_scores: equally_spaced,
// occasion_values or a list of numbers (one per occasion, checked against
// the data by Identify).
func (r *reader) timeScores(n *yaml.Node, b *BetweenSpec) {
	const key = "person_differences.time_scores"
	if n.Kind == yaml.ScalarNode {
		b.TimeScores = r.choice(n, key, TimeEqual, TimeOccasions)
		return
	}
	if n.Kind != yaml.SequenceNode || len(n.Content) == 0 {
		r.p.addf(r.file, n.Line, "%s: expected equally_spaced, occasion_values or a list of numbers, one per occasion (e.g. [0, 1, 2, 4])", key)
		return
	}
	b.TimeScores = TimeGiven
	for _, c := range n.Content {
		v, err := strconv.ParseFloat(c.Value, 64)
		if c.Kind != yaml.ScalarNode || err != nil || math.IsNaN(v) || math.IsInf(v, 0) || math.Abs(v) > 1e6 {
			r.p.addf(r.file, c.Line, "%s: expected a number (at most 1e6 in size), got %q", key, clipText(c.Value, 40))
			continue
		}
		b.Scores = append(b.Scores, v)
	}
}

// occasionColumns reads a map from occasions (whole numbers) to column
// names.
func (r *reader) occasionColumns(n *yaml.Node, key string) map[int]string {
	if n.Kind != yaml.MappingNode || len(n.Content) == 0 {
		r.p.addf(r.file, n.Line, "%s: expected occasion: column pairs, e.g. {1: mood_may, 2: mood_june}", key)
		return map[int]string{}
	}
	out := map[int]string{}
	used := map[string]int{}
	for i := 0; i+1 < len(n.Content); i += 2 {
		k, v := n.Content[i], n.Content[i+1]
		occ, err := strconv.Atoi(k.Value)
		if err != nil || k.Kind != yaml.ScalarNode || occ < -1_000_000_000 || occ > 1_000_000_000 {
			r.p.addf(r.file, k.Line, "%s: occasion %q is not a whole number", key, k.Value)
			continue
		}
		if _, dup := out[occ]; dup {
			r.p.addf(r.file, k.Line, "%s: occasion %d given twice", key, occ)
		}
		col := r.str(v, fmt.Sprintf("%s: occasion %d", key, occ))
		if prev, dup := used[col]; dup && col != "" {
			r.p.addf(r.file, v.Line, "%s: column %q given for occasions %d and %d", key, col, prev, occ)
		}
		used[col] = occ
		out[occ] = col
	}
	return out
}
