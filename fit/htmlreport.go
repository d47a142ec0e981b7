package fit

import (
	"bytes"
	"encoding/json"
	"github.com/lagstar/lagstar/runfolder"

	"github.com/lagstar/lagstar/check"
	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/report"
)

// HTMLReport builds RUN_DIR/report.html from the run folder's summary.json,
// draws.csv and, when present, check.json, and returns its path and the
// run's summary.
func HTMLReport(runDir string) (string, *report.Summary, error) {
	s, err := runfolder.ReadSummary(runDir)
	if err != nil {
		return "", nil, err
	}
	d, err := runfolder.ReadDrawColumns(runDir)
	if err != nil {
		return "", nil, err
	}
	var ppc []report.PPCStat
	if rawCheck, err := runfolder.Read(runDir, runfolder.CheckFile); err == nil {
		var res check.Result
		if err := json.Unmarshal(rawCheck, &res); err != nil {
			return "", nil, model.Inputf(runfolder.Path(runDir, runfolder.CheckFile), 0, "not valid: %v", err)
		}
		rec, err := runfolder.ReadRecord(runDir)
		if err != nil {
			return "", nil, err
		}
		started, sha, seed := rec.ID()
		if of := res.Of; of == nil || of.Started != started || of.DataSHA256 != sha || of.Seed != seed {
			// Written for another fit in this folder (or by a version that
			// did not record it): not shown with this one.
			s.Warnings = append(s.Warnings, "check.json in this folder does not belong to this fit (it was written for an earlier run); its checks are left out of this report: run lagstar check "+runDir+" again")
			res.Stats = nil
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
	out := runfolder.Path(runDir, runfolder.ReportFile)
	return out, s, runfolder.WriteAtomic(out, buf.Bytes())
}
