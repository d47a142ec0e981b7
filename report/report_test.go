package report

import (
	"bytes"
	"context"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"image/png"
	"math"
	"regexp"
	"strings"
	"testing"

	"github.com/lagstar/lagstar/examples"
	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/priors"
	"github.com/lagstar/lagstar/sampler"
)

func TestNumNaNIsNull(t *testing.T) {
	b, err := json.Marshal(struct{ A, B, C Num }{Num(math.NaN()), Num(math.Inf(1)), 1.5})
	if err != nil {
		t.Fatal(err)
	}
	if got := string(b); got != `{"A":null,"B":null,"C":1.5}` {
		t.Errorf("got %s", got)
	}
}

func shortRun(t *testing.T, draws int) *sampler.Result {
	t.Helper()
	m, d := examples.SleepDiary()
	sp, err := model.ParseSpec("model.yaml", m)
	if err != nil {
		t.Fatal(err)
	}
	pan, err := model.ParsePanel(sp, "diary.csv", d)
	if err != nil {
		t.Fatal(err)
	}
	l := sampler.NewLayout(sp, pan, priors.Default())
	res, err := sampler.Run(context.Background(), l, sampler.Options{Chains: 2, Warmup: 20, Draws: draws, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	return res
}

// TestSummaryShape checks the fields scripts rely on and that a short run
// draws convergence warnings that name parameters.
func TestSummaryShape(t *testing.T) {
	res := shortRun(t, 30)
	s := Build(res, 0.9, "test")
	raw, err := s.JSON()
	if err != nil {
		t.Fatal(err)
	}
	var generic map[string]any
	if err := json.Unmarshal(raw, &generic); err != nil {
		t.Fatal(err)
	}
	for _, k := range []string{"program", "version", "seed", "model", "parameters", "derived", "warnings"} {
		if _, ok := generic[k]; !ok {
			t.Errorf("summary.json lacks %q", k)
		}
	}
	params := generic["parameters"].([]any)
	first := params[0].(map[string]any)
	for _, k := range []string{"name", "kind", "outcome", "index", "mean", "sd", "median", "lower", "upper", "level", "rhat", "ess_bulk", "ess_tail", "mcse_mean"} {
		if _, ok := first[k]; !ok {
			t.Errorf("parameter entry lacks %q: %v", k, first)
		}
	}
	if _, ok := first["occasion"]; ok {
		t.Error("threshold entry should omit occasion")
	}
	kinds := map[string]bool{}
	for _, p := range params {
		kinds[p.(map[string]any)["kind"].(string)] = true
	}
	for _, k := range []string{"threshold", "ri_variance", "ri_correlation", "autoregression", "crosslag", "innovation_correlation"} {
		if !kinds[k] {
			t.Errorf("no %s parameter", k)
		}
	}
	// Correlations name their pair in an outcomes list, not in outcome.
	for _, p := range params {
		e := p.(map[string]any)
		if e["kind"] != "ri_correlation" && e["kind"] != "innovation_correlation" {
			continue
		}
		pair, _ := e["outcomes"].([]any)
		if len(pair) != 2 || pair[0] != "rested" || pair[1] != "headache" {
			t.Errorf("%s: outcomes = %v, want [rested headache]", e["name"], e["outcomes"])
		}
		if _, ok := e["outcome"]; ok {
			t.Errorf("%s: a correlation should not carry outcome", e["name"])
		}
	}
	if first["level"].(float64) != 0.9 {
		t.Errorf("level = %v, want 0.9", first["level"])
	}
	if len(s.Warnings) == 0 || !strings.Contains(strings.Join(s.Warnings, " "), "effective sample size below 400") {
		t.Errorf("a 30-draw run should warn about ESS; warnings: %q", s.Warnings)
	}
	var buf bytes.Buffer
	if err := WriteTable(&buf, s); err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"Measurement", "Between persons", "Within persons", "Derived", "crosslag[rested->headache]", "icc[rested]", "5%", "95%", Caution,
		`headache: binary, "yes" is the upper category`, " answers, ", " missing (no: "} {
		if !strings.Contains(buf.String(), want) {
			t.Errorf("table lacks %q", want)
		}
	}
}

func TestDrawsCSV(t *testing.T) {
	res := shortRun(t, 5)
	b, err := DrawsCSV(res)
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSpace(string(b)), "\n")
	if len(lines) != 1+2*5 {
		t.Fatalf("draws.csv has %d lines, want 11", len(lines))
	}
	if !strings.HasPrefix(lines[0], "chain,draw,threshold[rested,1]") && !strings.HasPrefix(lines[0], `chain,draw,"threshold[rested,1]"`) {
		t.Errorf("header starts %q", lines[0][:40])
	}
}

// TestManuscriptTables round-trips a summary through summary.json and
// checks the three table formats.
func TestManuscriptTables(t *testing.T) {
	res := shortRun(t, 30)
	raw, err := Build(res, 0.9, "test").JSON()
	if err != nil {
		t.Fatal(err)
	}
	s, err := ParseSummary(raw)
	if err != nil {
		t.Fatal(err)
	}
	var md, tex, csvOut bytes.Buffer
	for _, c := range []struct {
		format string
		w      *bytes.Buffer
	}{{"md", &md}, {"latex", &tex}, {"csv", &csvOut}} {
		if err := WriteManuscriptTable(c.w, s, c.format); err != nil {
			t.Fatalf("%s: %v", c.format, err)
		}
	}
	for _, want := range []string{"| rested, threshold 1 |", "headache → rested, cross-lag", "90% interval", "| rested & headache, random-intercept correlation |", "ICC"} {
		if !strings.Contains(md.String(), want) {
			t.Errorf("markdown lacks %q", want)
		}
	}
	if !strings.Contains(tex.String(), `headache $\rightarrow$ rested`) || !strings.Contains(tex.String(), `90\% interval`) {
		t.Errorf("latex not escaped as expected:\n%s", tex.String())
	}
	recs, err := csv.NewReader(&csvOut).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	found := false
	for _, r := range recs[1:] {
		if r[2] == "crosslag[rested->headache]" {
			found = true
			if r[6] == "" || r[3] == "" {
				t.Errorf("cross-lag row lacks estimates: %v", r)
			}
		}
	}
	if !found {
		t.Error("csv lacks the cross-lag row")
	}
	if err := WriteManuscriptTable(&md, s, "xls"); err == nil {
		t.Error("unknown format accepted")
	}
}

// TestUndefinedDiagnosticsWarn: an R-hat or ESS that is undefined (NaN,
// e.g. draws that never change) fails the convergence rule and is written
// as "undefined", never as NaN.
func TestUndefinedDiagnosticsWarn(t *testing.T) {
	nan := Num(math.NaN())
	w, _ := convergenceWarnings(nil, []Entry{{Name: "stuck", Rhat: nan, ESSBulk: nan, ESSTail: 500}, {Name: "steady", Rhat: 1.001, ESSBulk: 900, ESSTail: 800}})
	all := strings.Join(w, " ")
	if len(w) != 2 || !strings.Contains(all, "stuck (undefined)") || !strings.Contains(all, "stuck (bulk undefined, tail 500)") || strings.Contains(all, "steady") {
		t.Errorf("warnings %q", w)
	}
	if strings.Contains(all, "NaN") {
		t.Errorf("warnings hold NaN: %q", w)
	}
}

// TestRuleMatchesPrintedValues: the convergence rule is judged on the
// values as printed, so the table cannot show 1.010 for a failing R-hat
// or 400 for a failing ESS.
func TestRuleMatchesPrintedValues(t *testing.T) {
	for _, c := range []struct {
		rhat, ess float64
		bad       bool
	}{
		{1.0104, 400, false},  // printed 1.010 and 400: passes
		{1.0106, 400, true},   // printed 1.011
		{1.005, 399.6, false}, // printed 400
		{1.005, 399.4, true},  // printed 399
	} {
		e := Entry{Rhat: Num(c.rhat), ESSBulk: Num(c.ess), ESSTail: 1000}
		if got := entryBad(e); got != c.bad {
			t.Errorf("R-hat %v (printed %s), ESS %v (printed %s): bad = %v, want %v", c.rhat, fr(e.Rhat), c.ess, f0(e.ESSBulk), got, c.bad)
		}
	}
}

// TestWarningsListEverything: summary.json names every unconverged
// parameter (in unconverged and in the warning), while the terminal
// table shortens long lists.
func TestWarningsListEverything(t *testing.T) {
	res := shortRun(t, 30)
	s := Build(res, 0.9, "test")
	if s.Converged || len(s.Unconverged) < 7 {
		t.Fatalf("a 30-draw run: converged %v, unconverged %v; want several", s.Converged, s.Unconverged)
	}
	all := strings.Join(s.Warnings, " ")
	for _, name := range s.Unconverged {
		if !strings.Contains(all, name+" (") {
			t.Errorf("summary warnings do not name %s", name)
		}
	}
	var buf bytes.Buffer
	if err := WriteTable(&buf, s); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(buf.String(), "more:") || !strings.Contains(buf.String(), "NOT CONVERGED") || !strings.Contains(buf.String(), " !\n") {
		t.Errorf("terminal table should shorten the lists, say NOT CONVERGED and mark rows:\n%s", buf.String())
	}
}

// TestPriorDominatedAndExplosive: a random-intercept variance or path
// whose posterior interval is at least half as wide as its prior's is
// named, and so is a posterior-mean carry-over matrix with an eigenvalue
// of modulus 1 or more. The prior interval of a random-intercept
// variance under inverse-Wishart(J+1, I) is that of inverse-gamma(1, 1/2):
// from 0.5/(-ln 0.025) to 0.5/(-ln 0.975) at the 95% level (closed form).
func TestPriorDominatedAndExplosive(t *testing.T) {
	l := shortRun(t, 30).Layout
	lo, hi, logScale, ok := priorInterval(l, Entry{Kind: "ri_variance", Outcome: "rested"}, 0.95)
	if !ok || !logScale || math.Abs(lo-0.5/-math.Log(0.025)) > 1e-9 || math.Abs(hi-0.5/-math.Log(0.975)) > 1e-9 {
		t.Errorf("prior interval of ri_variance = (%v, %v), want (%v, %v)", lo, hi, 0.5/-math.Log(0.025), 0.5/-math.Log(0.975))
	}
	es := []Entry{
		{Name: "ri_variance[rested]", Kind: "ri_variance", Outcome: "rested", Level: 0.95, Lower: 0.01, Upper: 4, Mean: 0.5},
		{Name: "ri_variance[headache]", Kind: "ri_variance", Outcome: "headache", Level: 0.95, Lower: 0.4, Upper: 0.9, Mean: 0.6},
		{Name: "autoregression[rested]", Kind: "autoregression", Outcome: "rested", Level: 0.95, Lower: -0.9, Upper: 1.2, Mean: 1.04},
		{Name: "autoregression[headache]", Kind: "autoregression", Outcome: "headache", Level: 0.95, Lower: 0.2, Upper: 0.4, Mean: 0.3},
	}
	w := strings.Join(priorDominated(l, es), " ")
	if !strings.Contains(w, "ri_variance[rested] (interval") || !strings.Contains(w, "autoregression[rested] (interval 54%") ||
		strings.Contains(w, "[headache]") {
		t.Errorf("barely-informed warning = %q; want ri_variance[rested] and autoregression[rested] only", w)
	}
	if w := explosive(l, es); len(w) != 1 || !strings.Contains(w[0], "modulus 1.040") {
		t.Errorf("explosive = %q, want one warning with modulus 1.040", w)
	}
	es[2].Mean = 0.5
	if w := explosive(l, es); len(w) != 0 {
		t.Errorf("stable carry-over warned about: %q", w)
	}
	// Common factor: autoregression 0.5 against moving average -0.42
	// warns; a moving average of -0.05 (nothing to cancel) does not.
	es = append(es, Entry{Name: "moving_average[rested]", Kind: "moving_average", Outcome: "rested", Mean: -0.42},
		Entry{Name: "moving_average[headache]", Kind: "moving_average", Outcome: "headache", Mean: -0.05})
	if w := commonFactor(es); len(w) != 1 || !strings.Contains(w[0], "for rested: autoregression 0.50 and moving average -0.42") {
		t.Errorf("commonFactor = %q, want one warning for rested", w)
	}
}

// TestDisplayNamesAndColumns: outcomes' display names label the
// manuscript rows and the caption (parameter names keep the column
// names), and the HTML report's estimate columns are the terminal's.
func TestDisplayNamesAndColumns(t *testing.T) {
	res := shortRun(t, 30)
	s := Build(res, 0.9, "test")
	s.Model.Outcomes[0].DisplayName = "How rested"
	var tex, md bytes.Buffer
	if err := WriteManuscriptTable(&md, s, "md"); err != nil {
		t.Fatal(err)
	}
	if err := WriteManuscriptTable(&tex, s, "latex"); err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"| How rested, threshold 1 |", "| headache → How rested, cross-lag |", "| How rested & headache, random-intercept correlation |"} {
		if !strings.Contains(md.String(), want) {
			t.Errorf("markdown lacks %q:\n%s", want, md.String())
		}
	}
	if !strings.Contains(tex.String(), `\caption{Random-intercept cross-lagged model of How rested and headache`) {
		t.Errorf("latex caption should use the display name:\n%s", tex.String())
	}
	var term, page bytes.Buffer
	WriteTable(&term, s)
	if err := WriteHTML(&page, s, &Draws{Names: []string{"threshold[rested,1]"}, Values: [][][]float64{{{1, 2, 3}}}}, nil); err != nil {
		t.Fatal(err)
	}
	goList := regexp.MustCompile(`\[-?\d+( -?\d+)+\]`)
	if m := goList.FindString(page.String() + term.String()); m != "" {
		t.Errorf("Go list syntax %q in the report or table", m)
	}
	for _, c := range columnHeads(0.9) {
		if !strings.Contains(term.String(), c) || !strings.Contains(page.String(), "<th>"+c+"</th>") {
			t.Errorf("column %q should head both the terminal table and the HTML table", c)
		}
	}
}

// TestFiguresArePagedNotCut: predictive-check figures and parameter
// figures put every statistic and parameter on some page; none is
// dropped.
func TestFiguresArePagedNotCut(t *testing.T) {
	stats := make([]PPCStat, 2*PPCPerPage+5)
	for i := range stats {
		stats[i] = PPCStat{Name: fmt.Sprintf("share[y=%d]", i), Kind: "category_share", Title: "category shares per occasion", Unit: "share of answers", Observed: 0.3, RepLow: 0.2, RepHigh: 0.4, PPP: 0.5}
	}
	pages, err := PPCPlotPages(stats)
	if err != nil || len(pages) != 3 {
		t.Fatalf("PPCPlotPages(%d stats) = %d pages (err %v), want 3", len(stats), len(pages), err)
	}
	for i, p := range pages {
		if _, err := png.Decode(bytes.NewReader(p)); err != nil {
			t.Errorf("page %d is not a PNG: %v", i+1, err)
		}
	}
	if got := byKind([]PPCStat{{Kind: "a"}, {Kind: "b"}, {Kind: "a"}}); len(got) != 2 || len(got[0]) != 2 {
		t.Errorf("byKind grouped %v, want two groups, the first of two", got)
	}
	n := maxPanels + 6
	s := &Summary{Complete: true, Converged: true}
	d := &Draws{Values: [][][]float64{make([][]float64, n)}}
	for i := range n {
		name := fmt.Sprintf("p%d", i)
		s.Parameters = append(s.Parameters, Entry{Name: name, Kind: "threshold", Level: 0.95})
		d.Names = append(d.Names, name)
		d.Values[0][i] = []float64{0, 1, 2, 1}
	}
	var page bytes.Buffer
	if err := WriteHTML(&page, s, d, nil); err != nil {
		t.Fatal(err)
	}
	if got := strings.Count(page.String(), `<img class="figure"`); got != 6 {
		t.Errorf("%d parameters gave %d figures, want 2 pages for each of trace, rank and density", n, got)
	}
}

// TestPlurals: counts of one are written in the singular.
func TestPlurals(t *testing.T) {
	s := &Summary{Program: "lagstar", Complete: true, Converged: true,
		Model: ModelInfo{Persons: 1, Occasions: []int{1}, Outcomes: []OutcomeInfo{{Name: "y", Type: "continuous"}}, Chains: 1, Draws: 1}}
	var b bytes.Buffer
	if err := WriteTable(&b, s); err != nil {
		t.Fatal(err)
	}
	if first, _, _ := strings.Cut(b.String(), "\n"); !strings.Contains(first, "1 person, 1 occasion, 1 outcome; 1 chain x 1 draw") {
		t.Errorf("header %q, want singular counts", first)
	}
}

// TestNextDraws: the next round's draws follow the slowest ESS (with a
// 20% margin), between 1.25 and 4 times the current draws, within the cap.
func TestNextDraws(t *testing.T) {
	for _, c := range []struct {
		c          Convergence
		draws, cap int
		want       int
	}{
		{Convergence{MinESS: 200}, 1000, 20000, 2400}, // 1000 * 1.2 * 400/200
		{Convergence{MinESS: 20}, 1000, 20000, 4000},  // at most 4x
		{Convergence{MinESS: 390}, 1000, 20000, 1250}, // at least 1.25x
		{Convergence{MinESS: 500}, 1000, 20000, 1500}, // only R-hat fails
		{Convergence{MinESS: math.NaN()}, 1000, 20000, 2000},
		{Convergence{MinESS: 100}, 1000, 3000, 3000}, // the cap
	} {
		if got := NextDraws(c.c, c.draws, c.cap); got != c.want {
			t.Errorf("NextDraws(min ESS %g, %d draws, cap %d) = %d, want %d", c.c.MinESS, c.draws, c.cap, got, c.want)
		}
	}
}
