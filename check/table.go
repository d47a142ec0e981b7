package check

import (
	"fmt"
	"io"
	"strings"

	"github.com/lagstar/lagstar/diagnostics"
)

var kindOrder = []struct{ kind, title string }{
	{"transition", "lag-1 transitions P(now | before)"},
	{"lag2_transition", "lag-2 transitions"},
	{"person_transition", "spread over persons of lag-1 stay shares"},
	{"run_length", "mean run length in one category"},
	{"person_means", "spread (sd) of person means"},
	{"lag1_correlation", "lag-1 correlation"},
	{"joint_share", "same-occasion joint shares"},
	{"lagged_joint_share", "lagged joint shares"},
	{"category_share", "category shares per occasion"},
	{"occasion_mean", "means per occasion"},
}

// key kinds are always listed in full.
var key = map[string]bool{"transition": true, "lag2_transition": true, "person_transition": true, "run_length": true, "person_means": true, "lag1_correlation": true}

// WriteTable writes a readable account of the checks: counts per kind of
// statistic, the key statistics in full, and every other statistic whose
// posterior predictive p-value lies outside (0.05, 0.95).
func WriteTable(w io.Writer, r *Result) error {
	var b strings.Builder
	fmt.Fprintf(&b, "Posterior predictive checks: %d statistics, %d replicated data sets (new random intercepts and within paths)\n\n", len(r.Stats), r.Draws)
	if note := diagnostics.UnconvergedNote(r.Unconverged, "Its predictive checks describe draws that have not settled"); note != "" {
		fmt.Fprintf(&b, "Warning: the checked run is %s\n\n", note)
	}
	fmt.Fprintf(&b, "  %-40s %10s %22s\n", "statistic", "checked", "p outside (0.05,0.95)")
	for _, k := range kindOrder {
		n, ext := 0, 0
		for _, s := range r.Stats {
			if s.Kind == k.kind {
				n++
				if s.Extreme() {
					ext++
				}
			}
		}
		if n > 0 {
			fmt.Fprintf(&b, "  %-40s %10d %22d\n", k.title, n, ext)
		}
	}
	width := 9
	for _, s := range r.Stats {
		width = max(width, len(s.Name))
	}
	row := func(s Stat) {
		flag := ""
		if s.Extreme() {
			flag = "  <- not reproduced"
		}
		fmt.Fprintf(&b, "  %-*s %9.3f %9.3f [%7.3f, %7.3f] %6.3f%s\n", width, s.Name, s.Observed, s.RepMean, s.RepLow, s.RepHigh, s.PPP, flag)
	}
	head := fmt.Sprintf("  %-*s %9s %9s %18s %6s\n", width, "statistic", "observed", "replic.", "90% interval", "p")
	fmt.Fprintf(&b, "\nKey statistics\n%s", head)
	for _, s := range r.Stats {
		if key[s.Kind] {
			row(s)
		}
	}
	var others []Stat
	for _, s := range r.Stats {
		if !key[s.Kind] && s.Extreme() {
			others = append(others, s)
		}
	}
	if len(others) > 0 {
		fmt.Fprintf(&b, "\nOther statistics with p outside (0.05, 0.95)\n%s", head)
		for _, s := range others {
			row(s)
		}
	}
	b.WriteString("\np = P(replicated >= observed). Values near 0 or 1 mark features of the data the model does not\n" +
		"reproduce (with many statistics, a few do by chance). Every statistic is in check.json.\n")
	_, err := io.WriteString(w, b.String())
	return err
}
