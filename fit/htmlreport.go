package fit

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"path/filepath"
	"strconv"

	"github.com/lagstar/lagstar/check"
	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/report"
)

// HTMLReport builds RUN_DIR/report.html from the run folder's summary.json,
// draws.csv and, when present, check.json, and returns its path and the
// run's summary.
func HTMLReport(runDir string) (string, *report.Summary, error) {
	raw, err := model.ReadRunFile(runDir, "summary.json")
	if err != nil {
		return "", nil, err
	}
	s, err := report.ParseSummary(raw)
	if err != nil {
		return "", nil, model.Inputf(runDir, 0, "%v", err)
	}
	rawDraws, err := model.ReadRunFile(runDir, "draws.csv")
	if err != nil {
		return "", nil, err
	}
	d, err := readDrawsColumns(rawDraws, filepath.Join(runDir, "draws.csv"))
	if err != nil {
		return "", nil, err
	}
	var ppc []report.PPCStat
	if rawCheck, err := model.ReadRunFile(runDir, "check.json"); err == nil {
		var res check.Result
		if err := json.Unmarshal(rawCheck, &res); err != nil {
			return "", nil, model.Inputf(filepath.Join(runDir, "check.json"), 0, "not valid: %v", err)
		}
		for _, st := range res.Stats {
			switch st.Kind {
			case "transition", "lag2_transition", "person_transition", "run_length", "person_means", "lag1_correlation", "joint_share":
				ppc = append(ppc, ppcStat(st))
			}
		}
	}
	var buf bytes.Buffer
	if err := report.WriteHTML(&buf, s, d, ppc); err != nil {
		return "", nil, err
	}
	out := filepath.Join(runDir, "report.html")
	return out, s, report.WriteAtomic(out, buf.Bytes())
}

// readDrawsColumns reads draws.csv into columns per chain.
func readDrawsColumns(raw []byte, file string) (*report.Draws, error) {
	recs, err := csv.NewReader(bytes.NewReader(raw)).ReadAll()
	if err != nil || len(recs) < 2 || len(recs[0]) < 3 {
		return nil, model.Inputf(file, 0, "not a draws file (columns chain, draw, then parameters)")
	}
	d := &report.Draws{Names: recs[0][2:]}
	for r, rec := range recs[1:] {
		c, err := strconv.Atoi(rec[0])
		if err != nil || c < 1 || c > 64 {
			return nil, model.Inputf(file, r+2, "chain %q is not a chain number", rec[0])
		}
		for len(d.Values) < c {
			cols := make([][]float64, len(d.Names))
			d.Values = append(d.Values, cols)
		}
		for k, x := range rec[2:] {
			v, err := strconv.ParseFloat(x, 64)
			if err != nil {
				return nil, model.Inputf(file, r+2, "column %q: %q is not a number", d.Names[k], x)
			}
			d.Values[c-1][k] = append(d.Values[c-1][k], v)
		}
	}
	return d, nil
}
