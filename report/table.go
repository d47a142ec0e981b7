package report

import (
	"fmt"
	"github.com/lagstar/lagstar/catalog"
	"io"
	"math"
	"strings"
	"time"
)

// Caution is printed under every table and in the README.
const Caution = "Cross-lagged paths are associations under the model's assumptions, not proof of causation; lagstar gives no clinical advice."

// WriteTable writes the grouped summary table, the warnings and the caution.
func WriteTable(w io.Writer, s *Summary) error {
	all := append(append([]Entry{}, s.Parameters...), tableOnly(s.Derived)...)
	width := len("parameter")
	for _, e := range all {
		width = max(width, len(e.Name))
	}
	level := 0.95
	if len(all) > 0 {
		level = float64(all[0].Level)
	}
	cols := columnHeads(level)
	var b strings.Builder
	status := "complete"
	switch {
	case !s.Complete:
		status = "INCOMPLETE (interrupted)"
	case !s.Converged:
		status = "complete but NOT CONVERGED (rows marked ! fail R-hat <= 1.01 or ESS >= 400; see the warnings)"
	}
	fmt.Fprintf(&b, "%s %s: %s, %s, %s; %s x %s (seed %d), run %s\n",
		s.Program, s.Version, count(s.Model.Persons, "person", "persons"), count(len(s.Model.Occasions), "occasion", "occasions"), count(len(s.Model.Outcomes), "outcome", "outcomes"),
		count(s.Model.Chains, "chain", "chains"), count(s.Model.Draws, "draw", "draws"), s.Seed, status)
	for _, o := range s.Model.Outcomes {
		fmt.Fprintf(&b, "  %s\n", OutcomeLine(o))
	}
	if rl := s.RunLength; rl != nil {
		verdict := "converged"
		switch {
		case rl.Converged:
		case rl.StoppedBy == StopTimeLimit:
			verdict = fmt.Sprintf("NOT converged: stopped at the time limit (%s)", time.Duration(rl.TimeLimitSeconds*float64(time.Second)).String())
		case rl.StoppedBy == StopInterrupted:
			verdict = "NOT converged: interrupted"
		default:
			verdict = "NOT converged at the cap"
		}
		fmt.Fprintf(&b, "run until converged: %d %s, %d draws per chain (cap %d), %s\n", rl.Rounds, pick(rl.Rounds == 1, "round", "rounds"), rl.DrawsPerChain, rl.MaxDraws, verdict)
	}
	head := fmt.Sprintf("  %-*s %9s %8s %9s %9s %7s %8s %8s\n", width, cols[0], cols[1], cols[2], cols[3], cols[4], cols[5], cols[6], cols[7])
	for sec, title := range catalog.SectionTitles {
		var rows []Entry
		for _, e := range all {
			if k, ok := catalog.Lookup(e.Kind); ok && k.Section == catalog.Section(sec) {
				rows = append(rows, e)
			}
		}
		if len(rows) == 0 {
			continue
		}
		if sec == int(catalog.Between) && s.Model.RandomSlopes {
			title = "Between persons (random intercepts and slopes)"
		}
		fmt.Fprintf(&b, "\n%s\n%s", title, head)
		for _, e := range rows {
			mark := ""
			if entryBad(e) {
				mark = " !"
			}
			fmt.Fprintf(&b, "  %-*s %9s %8s %9s %9s %7s %8s %8s%s\n", width, e.Name, f3(e.Mean), f3(e.SD), f3(e.Lower), f3(e.Upper),
				fr(e.Rhat), f0(e.ESSBulk), f0(e.ESSTail), mark)
		}
	}
	writeImpulseGrid(&b, s.Derived)
	if len(s.Warnings) > 0 {
		b.WriteString("\nWarnings\n")
		ws := s.Warnings
		if len(s.brief) == len(ws) {
			ws = s.brief
		}
		for _, w := range ws {
			fmt.Fprintf(&b, "  - %s\n", w)
		}
	}
	fmt.Fprintf(&b, "\n%s\n", Caution)
	_, err := io.WriteString(w, b.String())
	return err
}

// columnHeads are the column labels of the estimates table, the same in
// the terminal and the HTML report.
func columnHeads(level float64) []string {
	return []string{"parameter", "mean", "sd", fmt.Sprintf("%.3g%%", 100*(1-level)/2), fmt.Sprintf("%.3g%%", 100*(1-(1-level)/2)), "R-hat", "ESS-bulk", "ESS-tail"}
}

// OutcomeLine describes an outcome's coding and answers in one line:
// which category is highest (for binary outcomes, the one modelled),
// observed and missing answers and the category counts.
func OutcomeLine(o OutcomeInfo) string {
	var b strings.Builder
	fmt.Fprintf(&b, "%s: %s", o.Name, o.Type)
	if o.DisplayName != "" {
		fmt.Fprintf(&b, " (%q in tables)", o.DisplayName)
	}
	switch o.Type {
	case "binary":
		fmt.Fprintf(&b, ", %q is the upper category (its probability is modelled)", o.Highest)
	case "ordinal":
		fmt.Fprintf(&b, ", categories %s (highest %q)", strings.Join(o.Categories, " < "), o.Highest)
	}
	fmt.Fprintf(&b, "; %d answers, %d missing", o.Observed, o.Missing)
	if len(o.Counts) > 0 {
		parts := make([]string, len(o.Counts))
		for k, n := range o.Counts {
			parts[k] = fmt.Sprintf("%s: %d", o.Categories[k], n)
		}
		fmt.Fprintf(&b, " (%s)", strings.Join(parts, ", "))
	}
	return b.String()
}

func bad(n Num) bool { return math.IsNaN(float64(n)) || math.IsInf(float64(n), 0) }

func f3(n Num) string {
	if bad(n) {
		return "-"
	}
	return fmt.Sprintf("%.3f", float64(n))
}

func fr(n Num) string {
	if bad(n) {
		return "-"
	}
	return fmt.Sprintf("%.3f", float64(n))
}

func f0(n Num) string {
	if bad(n) {
		return "-"
	}
	return fmt.Sprintf("%.0f", float64(n))
}

// writeImpulseGrid writes the latent impulse responses as a grid: one row
// per shocked and responding outcome, one column per occasion after the
// shock, each cell the posterior mean (summary.json has the intervals and
// diagnostics; the HTML report plots them).
func writeImpulseGrid(b *strings.Builder, derived []Entry) {
	type row struct {
		name  string
		cells []string
	}
	var rows []row
	width, maxH := len("shock -> response"), 0
	for _, e := range derived {
		if e.Kind != "impulse_response" {
			continue
		}
		name := e.From + " -> " + e.Outcome
		if len(rows) == 0 || rows[len(rows)-1].name != name {
			rows = append(rows, row{name: name})
			width = max(width, len(name))
		}
		r := &rows[len(rows)-1]
		r.cells = append(r.cells, f3(e.Mean))
		maxH = max(maxH, len(r.cells))
	}
	if len(rows) == 0 {
		return
	}
	b.WriteString("\nImpulse responses (latent within part after a one-sd innovation; posterior means by occasions after it)\n")
	fmt.Fprintf(b, "  %-*s", width, "shock -> response")
	for h := 1; h <= maxH; h++ {
		fmt.Fprintf(b, " %8s", fmt.Sprintf("h=%d", h))
	}
	b.WriteString("\n")
	for _, r := range rows {
		fmt.Fprintf(b, "  %-*s", width, r.name)
		for _, c := range r.cells {
			fmt.Fprintf(b, " %8s", c)
		}
		b.WriteString("\n")
	}
}
