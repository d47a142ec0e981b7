package validate

import (
	"bytes"
	"encoding/csv"
	"fmt"
	"github.com/lagstar/lagstar/runfolder"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/lagstar/lagstar/report"
)

// Verdict is one parameter's calibration outcome.
type Verdict struct {
	Scenario, Param string
	PValue          float64
	Pass            bool
}

// Judge applies the multiplicity-aware threshold: Bonferroni over every
// rank-uniformity test of the run at family-wise level alpha.
func Judge(results []*SBCResult, alpha float64) ([]Verdict, float64) {
	n := 0
	for _, r := range results {
		n += len(r.Names)
	}
	cut := alpha / float64(max(n, 1))
	var out []Verdict
	for _, r := range results {
		for p, name := range r.Names {
			out = append(out, Verdict{Scenario: r.Scenario.Name, Param: name, PValue: r.PValues[p], Pass: r.PValues[p] >= cut})
		}
	}
	return out, cut
}

// WriteSBC writes, into dir, sbc_ranks.csv (scenario, parameter,
// replication, rank), sbc_verdicts.csv (scenario, parameter, p-value,
// verdict) and one PNG of rank histograms per scenario.
func WriteSBC(dir string, results []*SBCResult, verdicts []Verdict, cut float64) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	var rb bytes.Buffer
	rw := csv.NewWriter(&rb)
	rw.Write([]string{"scenario", "parameter", "replication", "rank", "kept"})
	for _, r := range results {
		for p, name := range r.Names {
			for rep, rk := range r.Ranks[p] {
				rw.Write([]string{r.Scenario.Name, name, strconv.Itoa(rep + 1), strconv.Itoa(rk), strconv.Itoa(r.Config.Kept)})
			}
		}
		counts := make([][]int, len(r.Names))
		titles := make([]string, len(r.Names))
		for p, name := range r.Names {
			counts[p] = BinRanks(r.Ranks[p], r.Config.Kept, r.Config.Bins)
			titles[p] = fmt.Sprintf("%s (p=%.3f)", name, r.PValues[p])
		}
		var png bytes.Buffer
		title := fmt.Sprintf("SBC ranks: %s (%d replications, %d draws; shaded: 99%% binomial band)", r.Scenario.Name, r.Config.Reps, r.Config.Kept)
		if err := report.RankHistogramsPNG(&png, title, titles, counts, r.Config.Reps); err != nil {
			return err
		}
		if err := runfolder.WriteAtomic(filepath.Join(dir, "sbc_"+slug(r.Scenario.Name)+".png"), png.Bytes()); err != nil {
			return err
		}
	}
	rw.Flush()
	var vb bytes.Buffer
	vw := csv.NewWriter(&vb)
	vw.Write([]string{"scenario", "parameter", "p_value", "threshold", "verdict"})
	for _, v := range verdicts {
		verdict := "pass"
		if !v.Pass {
			verdict = "FAIL"
		}
		vw.Write([]string{v.Scenario, v.Param, strconv.FormatFloat(v.PValue, 'g', 4, 64), strconv.FormatFloat(cut, 'g', 3, 64), verdict})
	}
	vw.Flush()
	if err := runfolder.WriteAtomic(filepath.Join(dir, "sbc_ranks.csv"), rb.Bytes()); err != nil {
		return err
	}
	if err := runfolder.WriteAtomic(filepath.Join(dir, "sbc_verdicts.csv"), vb.Bytes()); err != nil {
		return err
	}
	return runfolder.WriteAtomic(filepath.Join(dir, "sbc_summary.md"), []byte(SummaryTable(results, verdicts, cut)))
}

// SummaryTable renders one Markdown row per scenario: parameters,
// replications, the smallest p-value and its parameter, the verdict.
func SummaryTable(results []*SBCResult, verdicts []Verdict, cut float64) string {
	var b strings.Builder
	fmt.Fprintf(&b, "| scenario | parameters | replications | smallest p (parameter) | verdict |\n|---|---|---|---|---|\n")
	for _, r := range results {
		minP, arg, pass := 1.0, "", true
		for _, v := range verdicts {
			if v.Scenario != r.Scenario.Name {
				continue
			}
			if v.PValue < minP {
				minP, arg = v.PValue, v.Param
			}
			pass = pass && v.Pass
		}
		verdict := "pass"
		if !pass {
			verdict = "FAIL"
		}
		fmt.Fprintf(&b, "| %s | %d | %d | %.3g (%s) | %s |\n", r.Scenario.Name, len(r.Names), r.Config.Reps, minP, arg, verdict)
	}
	fmt.Fprintf(&b, "\nBonferroni threshold over all %d tests at family-wise level 0.05: p < %.2g fails.\n", len(verdicts), cut)
	return b.String()
}

func slug(s string) string {
	var b strings.Builder
	for _, r := range strings.ToLower(s) {
		switch {
		case r >= 'a' && r <= 'z', r >= '0' && r <= '9':
			b.WriteRune(r)
		default:
			b.WriteByte('_')
		}
	}
	return strings.Trim(b.String(), "_")
}
