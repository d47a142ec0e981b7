package fit

import (
	"context"
	"encoding/json"
	"errors"

	"github.com/lagstar/lagstar/check"
	"github.com/lagstar/lagstar/report"
	"github.com/lagstar/lagstar/runfolder"
)

// CheckOptions says which run to check and how many posterior draws to
// replicate from.
type CheckOptions struct {
	// Ctx, when not nil, stops the check (nothing written) when cancelled.
	Ctx      context.Context
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
	if err := checkRange("--draws", o.Draws, 1, MaxCheckDraws); err != nil {
		return nil, err
	}
	// The lock keeps a new fit from replacing the run while it is checked.
	unlock, err := runfolder.Lock(o.RunDir)
	if err != nil {
		return nil, err
	}
	defer unlock()
	run, err := runfolder.OpenFinished(o.RunDir)
	if err != nil {
		return nil, err
	}
	res, err := check.RunContext(ctxOr(o.Ctx), run.Layout, run.Draws, o.Draws, o.Seed, o.Progress)
	if errors.Is(err, context.Canceled) {
		return nil, errors.New("check interrupted: nothing written")
	}
	if err != nil {
		return nil, err
	}
	res.Unconverged = append([]string{}, run.Unconverged...)
	started, sha, seed := run.Record.ID()
	res.Of = &check.Source{Started: started, DataSHA256: sha, Seed: seed}
	out, err := json.MarshalIndent(res, "", "  ")
	if err != nil {
		return nil, err
	}
	if err := runfolder.WriteFile(o.RunDir, runfolder.CheckFile, append(out, '\n')); err != nil {
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
			if err := runfolder.WriteFile(o.RunDir, runfolder.CheckFigure(k, i+1), png); err != nil {
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

// ctxOr returns ctx, or the background context when ctx is nil.
func ctxOr(ctx context.Context) context.Context {
	if ctx == nil {
		return context.Background()
	}
	return ctx
}
