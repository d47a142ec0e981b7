package report

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"github.com/lagstar/lagstar/catalog"
	"io"
	"math"
	"strconv"
	"strings"

	"github.com/lagstar/lagstar/diagnostics"
)

// ParseSummary decodes a summary.json (null numbers become NaN).
func ParseSummary(raw []byte) (*Summary, error) {
	var s struct {
		Summary
		Parameters []entryJSON `json:"parameters"`
		Derived    []entryJSON `json:"derived"`
	}
	if err := json.Unmarshal(raw, &s); err != nil {
		return nil, fmt.Errorf("summary.json is not valid: %w", err)
	}
	out := s.Summary
	out.Parameters, out.Derived = nil, nil
	recompute := out.Unconverged == nil // written before the field existed
	for _, e := range s.Parameters {
		out.Parameters = append(out.Parameters, e.entry())
	}
	for _, e := range s.Derived {
		d := e.entry()
		d.table = catalog.Tabled(d.Kind)
		out.Derived = append(out.Derived, d)
	}
	if recompute {
		out.Unconverged = []string{}
		for _, e := range append(append([]Entry{}, out.Parameters...), tableOnly(out.Derived)...) {
			if entryBad(e) {
				out.Unconverged = append(out.Unconverged, e.Name)
			}
		}
		out.Converged = len(out.Unconverged) == 0
	}
	return &out, nil
}

// entryJSON mirrors Entry with nullable numbers.
type entryJSON struct {
	Name     string   `json:"name"`
	Kind     string   `json:"kind"`
	Outcome  string   `json:"outcome"`
	From     string   `json:"from"`
	Outcomes []string `json:"outcomes"`
	Occasion *int     `json:"occasion"`
	Index    int      `json:"index"`
	Mean     *float64 `json:"mean"`
	SD       *float64 `json:"sd"`
	Median   *float64 `json:"median"`
	Lower    *float64 `json:"lower"`
	Upper    *float64 `json:"upper"`
	Level    *float64 `json:"level"`
	Rhat     *float64 `json:"rhat"`
	ESSBulk  *float64 `json:"ess_bulk"`
	ESSTail  *float64 `json:"ess_tail"`
}

func num(p *float64) Num {
	if p == nil {
		return Num(nan)
	}
	return Num(*p)
}

func (e entryJSON) entry() Entry {
	return Entry{Name: e.Name, Kind: e.Kind, Outcome: e.Outcome, From: e.From, Outcomes: e.Outcomes, Occasion: e.Occasion, Index: e.Index,
		Mean: num(e.Mean), SD: num(e.SD), Median: num(e.Median), Lower: num(e.Lower), Upper: num(e.Upper), Level: num(e.Level),
		Rhat: num(e.Rhat), ESSBulk: num(e.ESSBulk), ESSTail: num(e.ESSTail)}
}

// tableRow is one row of a manuscript table.
type tableRow struct {
	section, label string
	est, std       *Entry // raw estimate; within-person standardized (paths only)
}

// manuscriptRows picks the key estimates: thresholds, random-intercept
// variances and correlations, autoregressions and cross-lags (raw and
// within-person standardized), innovation correlations and ICCs.
func manuscriptRows(s *Summary) []tableRow {
	label := labeler(s)
	std := map[string]*Entry{}
	for i := range s.Derived {
		e := &s.Derived[i]
		std[e.Kind+"|"+e.Outcome+"|"+e.From+"|"+occ(e.Occasion)] = e
	}
	all := append(append([]*Entry{}, ptrs(s.Parameters)...), ptrs(s.Derived)...)
	var rows []tableRow
	for _, section := range catalog.ManuscriptSections {
		for _, e := range all {
			k, ok := catalog.Lookup(e.Kind)
			if !ok || k.Manuscript != section {
				continue
			}
			r := tableRow{section: section, label: label(e), est: e}
			if k.Standardized != "" {
				r.std = std[k.Standardized+"|"+e.Outcome+"|"+e.From+"|"+occ(e.Occasion)]
			}
			rows = append(rows, r)
		}
	}
	return rows
}

// ptrs returns pointers to the entries of es.
func ptrs(es []Entry) []*Entry {
	out := make([]*Entry, len(es))
	for i := range es {
		out[i] = &es[i]
	}
	return out
}

func occ(o *int) string {
	if o == nil {
		return ""
	}
	return fmt.Sprint(*o)
}

// labeler returns the function that renders an entry in words for a
// manuscript, outcomes by their display names.
func labeler(s *Summary) func(e *Entry) string {
	show := map[string]string{}
	for _, o := range s.Model.Outcomes {
		show[o.Name] = displayName(o)
	}
	name := func(n string) string {
		if d, ok := show[n]; ok {
			return d
		}
		return n
	}
	return func(e *Entry) string {
		pair := make([]string, len(e.Outcomes))
		for i, n := range e.Outcomes {
			pair[i] = name(n)
		}
		d := *e
		d.Outcome, d.From, d.Outcomes = name(e.Outcome), name(e.From), pair
		return label(&d)
	}
}

// displayName is the outcome's name in tables.
func displayName(o OutcomeInfo) string {
	if o.DisplayName != "" {
		return o.DisplayName
	}
	return o.Name
}

// label renders an entry in words for a manuscript (catalog.Kind.Label).
func label(e *Entry) string {
	return catalog.Label(e.Kind, e.Name, catalog.Names{Outcome: e.Outcome, From: e.From, Pair: e.Outcomes, Index: e.Index, Occasion: e.Occasion})
}

// WriteManuscriptTable writes the key estimates as format md, latex or csv:
// posterior mean and central interval, and for paths the within-person
// standardized estimate with its interval.
func WriteManuscriptTable(w io.Writer, s *Summary, format string) error {
	rows := manuscriptRows(s)
	if len(rows) == 0 {
		return fmt.Errorf("summary has no parameters to tabulate")
	}
	level := float64(rows[0].est.Level)
	ci := fmt.Sprintf("%.0f%% interval", 100*level)
	cell := func(e *Entry) (string, string) {
		if e == nil {
			return "", ""
		}
		return fmt.Sprintf("%.2f", float64(e.Mean)), fmt.Sprintf("[%.2f, %.2f]", float64(e.Lower), float64(e.Upper))
	}
	switch format {
	case "csv":
		var b bytes.Buffer
		cw := csv.NewWriter(&b)
		cw.Write([]string{"section", "quantity", "parameter", "mean", "lower", "upper", "std_mean", "std_lower", "std_upper", "level", "converged"})
		for _, r := range rows {
			rec := []string{r.section, r.label, r.est.Name, f(r.est.Mean), f(r.est.Lower), f(r.est.Upper), "", "", "", f(r.est.Level),
				strconv.FormatBool(!entryBad(*r.est) && (r.std == nil || !entryBad(*r.std)))}
			if r.std != nil {
				rec[6], rec[7], rec[8] = f(r.std.Mean), f(r.std.Lower), f(r.std.Upper)
			}
			cw.Write(rec)
		}
		cw.Flush()
		_, err := w.Write(b.Bytes())
		return err
	case "md":
		var b strings.Builder
		fmt.Fprintf(&b, "| Quantity | Estimate | %s | Standardized | %s |\n|---|---:|---|---:|---|\n", ci, ci)
		section := ""
		for _, r := range rows {
			if r.section != section {
				section = r.section
				fmt.Fprintf(&b, "| **%s** | | | | |\n", section)
			}
			m, i := cell(r.est)
			sm, si := cell(r.std)
			fmt.Fprintf(&b, "| %s | %s | %s | %s | %s |\n", r.label, m, i, sm, si)
		}
		fmt.Fprintf(&b, "\n%s\n", tableNote(s, ci))
		_, err := io.WriteString(w, b.String())
		return err
	case "latex":
		var b strings.Builder
		fmt.Fprintf(&b, "\\begin{table}[ht]\n\\centering\n\\caption{%s}\n\\label{tab:lagstar}\n", tex(tableCaption(s)))
		b.WriteString("\\begin{tabular}{lrlrl}\n\\hline\n")
		fmt.Fprintf(&b, "Quantity & Estimate & %s & Standardized & %s \\\\\n\\hline\n", tex(ci), tex(ci))
		section := ""
		for _, r := range rows {
			if r.section != section {
				section = r.section
				fmt.Fprintf(&b, "\\multicolumn{5}{l}{\\textit{%s}} \\\\\n", tex(section))
			}
			m, i := cell(r.est)
			sm, si := cell(r.std)
			fmt.Fprintf(&b, "%s & %s & %s & %s & %s \\\\\n", tex(strings.ReplaceAll(r.label, "→", "->")), m, i, sm, si)
		}
		b.WriteString("\\hline\n\\end{tabular}\n")
		fmt.Fprintf(&b, "\\par\\smallskip\n\\begin{minipage}{\\linewidth}\\footnotesize\\textit{Note.} %s\n\\end{minipage}\n\\end{table}\n", tex(tableNote(s, ci)))
		_, err := io.WriteString(w, b.String())
		return err
	}
	return fmt.Errorf("unknown table format %q (md, latex or csv)", format)
}

// tableCaption names the model and the data of a manuscript table.
func tableCaption(s *Summary) string {
	m := s.Model
	names := make([]string, len(m.Outcomes))
	for i, o := range m.Outcomes {
		names[i] = displayName(o)
	}
	kind := "Random-intercept cross-lagged model"
	switch {
	case m.RandomSlopes && m.Lags == "none":
		kind = "Growth model"
	case m.RandomSlopes:
		kind = "Growth model with autocorrelated residuals"
	case !m.RandomIntercepts && m.Lags == "none":
		kind = "Model without carry-over or random intercepts"
	case !m.RandomIntercepts:
		kind = "Cross-lagged panel model (no random intercepts)"
	case m.Lags == "none":
		kind = "Random-intercept model without carry-over"
	case m.Lags == "own" || len(names) == 1:
		kind = "Random-intercept autoregressive model"
	}
	return fmt.Sprintf("%s of %s: posterior estimates (N = %s, %s)", kind, joinAnd(names), count(m.Persons, "person", "persons"), count(len(m.Occasions), "occasion", "occasions"))
}

// tableNote is the note under a manuscript table: what the numbers are,
// the sample, the run and whether it converged, and the caution.
func tableNote(s *Summary, ci string) string {
	m := s.Model
	occ := ""
	if n := len(m.Occasions); n > 0 {
		occ = fmt.Sprintf(" (%d to %d)", m.Occasions[0], m.Occasions[n-1])
	}
	conv := "All parameters met the convergence rule (R-hat <= 1.01, bulk- and tail-ESS >= 400)."
	if note := diagnostics.UnconvergedNote(s.Unconverged, "Do not report these results"); note != "" {
		conv = note
	}
	if !s.Complete {
		conv = "INCOMPLETE: the run was interrupted; finish it with lagstar fit --resume before reporting. " + conv
	}
	return fmt.Sprintf("Posterior means with central %ss; categorical outcomes on the probit latent-response scale, continuous ones on their own scale. Standardized: within-person standardized paths. N = %s, %s%s; %s of %s after %d warm-up. %s %s",
		ci, count(m.Persons, "person", "persons"), count(len(m.Occasions), "occasion", "occasions"), occ, count(m.Chains, "chain", "chains"), count(m.Draws, "draw", "draws"), m.Warmup, conv, Caution)
}

// joinAnd joins names as "a", "a and b", "a, b and c".
func joinAnd(names []string) string {
	if len(names) <= 1 {
		return strings.Join(names, "")
	}
	return strings.Join(names[:len(names)-1], ", ") + " and " + names[len(names)-1]
}

func f(n Num) string {
	if bad(n) {
		return ""
	}
	return fmt.Sprintf("%.6g", float64(n))
}

func tex(s string) string {
	r := strings.NewReplacer(`\`, `\textbackslash{}`, "&", `\&`, "%", `\%`, "$", `\$`, "#", `\#`, "_", `\_`, "{", `\{`, "}", `\}`, "~", `\textasciitilde{}`, "^", `\textasciicircum{}`, "->", `$\rightarrow$`, "<=", `$\le$`, ">=", `$\ge$`)
	return r.Replace(s)
}

var nan = math.NaN()

// pairLabel names a pair of outcomes in a table label ("rested & headache").
