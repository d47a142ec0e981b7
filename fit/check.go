package fit

import (
	"bytes"
	"crypto/sha256"
	"encoding/csv"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"path/filepath"
	"strconv"

	"github.com/lagstar/lagstar/check"
	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/priors"
	"github.com/lagstar/lagstar/report"
	"github.com/lagstar/lagstar/sampler"
)

// CheckOptions says which run to check and how many posterior draws to
// replicate from.
type CheckOptions struct {
	RunDir   string
	Draws    int // 0: 400
	Seed     uint64
	Progress func(done, total int)
}

// Check runs the posterior predictive checks of a finished fit from its
// run folder (run.json, data.csv, draws.csv) and writes check.json and one
// figure per kind of statistic there.
func Check(o CheckOptions) (*check.Result, error) {
	if o.Draws <= 0 {
		o.Draws = 400
	}
	run, err := loadRun(o.RunDir)
	if err != nil {
		return nil, err
	}
	res, err := check.RunProgress(run.layout, run.draws, o.Draws, o.Seed, o.Progress)
	if err != nil {
		return nil, err
	}
	res.Unconverged = append([]string{}, run.unconverged...)
	out, err := json.MarshalIndent(res, "", "  ")
	if err != nil {
		return nil, err
	}
	if err := report.WriteAtomic(filepath.Join(o.RunDir, "check.json"), append(out, '\n')); err != nil {
		return nil, err
	}
	// One figure per kind of statistic (observed against replicated
	// intervals), on as many pages as it needs: check_KIND.png,
	// check_KIND_2.png, ...
	byKind := map[string][]report.PPCStat{}
	var kinds []string
	for _, st := range res.Stats {
		if _, ok := byKind[st.Kind]; !ok {
			kinds = append(kinds, st.Kind)
		}
		byKind[st.Kind] = append(byKind[st.Kind], ppcStat(st))
	}
	for _, k := range kinds {
		pages, err := report.PPCPlotPages(byKind[k])
		if err != nil {
			return nil, err
		}
		for i, png := range pages {
			name := "check_" + k + ".png"
			if i > 0 {
				name = fmt.Sprintf("check_%s_%d.png", k, i+1)
			}
			if err := report.WriteAtomic(filepath.Join(o.RunDir, name), png); err != nil {
				return nil, err
			}
		}
	}
	return res, nil
}

// ppcStat carries a checked statistic into the report, with its kind's
// description and unit.
func ppcStat(st check.Stat) report.PPCStat {
	title, unit := check.KindInfo(st.Kind)
	return report.PPCStat{Name: st.Name, Kind: st.Kind, Title: title, Unit: unit, Observed: st.Observed,
		RepMean: st.RepMean, RepLow: st.RepLow, RepHigh: st.RepHigh, PPP: st.PPP}
}

// finishedRun is a run folder read back: its layout (rebuilt from the
// saved model and data copy), its draws and its record.
type finishedRun struct {
	layout *sampler.Layout
	draws  [][]float64
	rec    report.RunRecord
	// unconverged names the parameters that failed the convergence rule
	// (from summary.json).
	unconverged []string
}

// loadRun reads a finished run folder.
func loadRun(dir string) (*finishedRun, error) {
	rec, l, err := openRun(dir)
	if err != nil {
		return nil, err
	}
	if !rec.Complete {
		return nil, model.Inputf(dir, 0, "the run is incomplete (interrupted); finish it with lagstar fit --resume %s", dir)
	}
	rawDraws, err := model.ReadRunFile(dir, "draws.csv")
	if err != nil {
		return nil, err
	}
	draws, err := parseDraws(rawDraws, l, filepath.Join(dir, "draws.csv"))
	if err != nil {
		return nil, err
	}
	rawSum, err := model.ReadRunFile(dir, "summary.json")
	if err != nil {
		return nil, err
	}
	sum, err := report.ParseSummary(rawSum)
	if err != nil {
		return nil, model.Inputf(filepath.Join(dir, "summary.json"), 0, "%v", err)
	}
	return &finishedRun{layout: l, draws: draws, rec: rec, unconverged: sum.Unconverged}, nil
}

// openRun reads a run folder's run.json, checks its data copy against the
// recorded SHA-256 and rebuilds the layout from the saved model content.
// Outputs made from the layout name the files the run was first given.
func openRun(dir string) (report.RunRecord, *sampler.Layout, error) {
	var rec report.RunRecord
	rawRun, err := model.ReadRunFile(dir, "run.json")
	if err != nil {
		return rec, nil, err
	}
	if err := json.Unmarshal(rawRun, &rec); err != nil || rec.Program != report.Program {
		return rec, nil, model.Inputf(filepath.Join(dir, "run.json"), 0, "not a run record of lagstar fit")
	}
	data, err := model.ReadRunFile(dir, "data.csv")
	if err != nil {
		return rec, nil, err
	}
	if sum := sha256.Sum256(data); hex.EncodeToString(sum[:]) != rec.DataSHA256 {
		return rec, nil, model.Inputf(filepath.Join(dir, "data.csv"), 0, "does not match the data of the run (SHA-256 differs from run.json)")
	}
	sp, err := model.ParseSpec(filepath.Join(dir, "run.json: model_content"), []byte(rec.ModelContent))
	if err != nil {
		return rec, nil, err
	}
	sp.Data.File = filepath.Join(dir, "data.csv")
	pan, err := model.ParsePanel(sp, sp.Data.File, data)
	if err != nil {
		return rec, nil, err
	}
	if err := model.Identify(sp, pan); err != nil {
		return rec, nil, err
	}
	sp.Path, pan.File = rec.ModelFile, rec.DataFile
	return rec, sampler.NewLayout(sp, pan, priors.Default()), nil
}

// parseDraws reads draws.csv into parameter vectors in the order of
// l.Params, matching columns by name.
func parseDraws(raw []byte, l *sampler.Layout, file string) ([][]float64, error) {
	recs, err := csv.NewReader(bytes.NewReader(raw)).ReadAll()
	if err != nil {
		return nil, model.Inputf(file, 0, "not valid CSV: %v", err)
	}
	if len(recs) < 2 {
		return nil, model.Inputf(file, 0, "has no draws")
	}
	col := map[string]int{}
	for i, h := range recs[0] {
		col[h] = i
	}
	params := l.Params()
	idx := make([]int, len(params))
	for p, par := range params {
		i, ok := col[par.Name]
		if !ok {
			return nil, model.Inputf(file, 1, "no column %q: the draws do not belong to this model", par.Name)
		}
		idx[p] = i
	}
	out := make([][]float64, 0, len(recs)-1)
	for r, rec := range recs[1:] {
		v := make([]float64, len(params))
		for p, i := range idx {
			x, err := strconv.ParseFloat(rec[i], 64)
			if err != nil {
				return nil, model.Inputf(file, r+2, "column %q: %q is not a number", params[p].Name, rec[i])
			}
			v[p] = x
		}
		out = append(out, v)
	}
	return out, nil
}
