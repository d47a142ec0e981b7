package check

import (
	"fmt"
	"io"
	"strings"

	"github.com/lagstar/lagstar/diagnostics"
)

var kindOrder = []struct{ kind, title, unit string }{
	{"transition", "lag-1 transitions P(now | before)", "share of transitions"},
	{"lag2_transition", "lag-2 transitions", "share of transitions"},
	{"person_transition", "spread over persons of lag-1 stay shares", "sd of persons' stay shares"},
	{"run_length", "mean run length in one category", "occasions"},
	{"person_means", "spread (sd) of person means", "sd of person means"},
	{"lag1_correlation", "lag-1 correlation", "correlation"},
	{"joint_share", "same-occasion joint shares", "share of answer pairs"},
	{"lagged_joint_share", "lagged joint shares", "share of answer pairs"},
	{"category_share", "category shares per occasion", "share of answers"},
	{"occasion_mean", "means per occasion", "mean"},
}

// KindInfo returns the description of a kind of statistic and the unit
// of its values, for tables and figures.
func KindInfo(kind string) (title, unit string) {
	for _, k := range kindOrder {
		if k.kind == kind {
			return k.title, k.unit
		}
	}
	return kind, "value"
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
	fmt.Fprintf(&b, "  %-40s %10s %22s\n", "statistic", "checked", "extreme p")
	extreme := 0
	for _, s := range r.Stats {
		if s.Extreme() {
			extreme++
		}
	}
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
			flag = "  <- extreme"
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
		fmt.Fprintf(&b, "\nOther statistics with an extreme p\n%s", head)
		for _, s := range others {
			row(s)
		}
	}
	fmt.Fprintf(&b, "\np = P(replicated >= observed); extreme: p outside (0.05, 0.95). Even when the model fits, up to\n"+
		"1 statistic in 10 can be extreme by chance (fewer: posterior predictive p-values are conservative).\n"+
		"Here %d of %d are (one in ten would be %d). Read a clear excess, or extreme key statistics, as\n"+
		"misfit, not a single extreme p among many. Every statistic is in check.json.\n",
		extreme, len(r.Stats), (len(r.Stats)+5)/10)
	_, err := io.WriteString(w, b.String())
	return err
}
