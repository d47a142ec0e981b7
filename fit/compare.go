package fit

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"path/filepath"
	"slices"

	"github.com/lagstar/lagstar/compare"
	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/runfolder"
	"github.com/lagstar/lagstar/sampler"
)

// CompareOptions says which runs to compare and how precisely.
type CompareOptions struct {
	// Ctx, when not nil, stops the comparison (nothing written) when
	// cancelled.
	Ctx       context.Context
	RunDirs   []string
	Draws     int    // posterior draws per model (0: 200)
	GHKPoints int    // quasi-random points of the GHK simulator (0: 300)
	Out       string // write the comparison as JSON here ("" writes none)
	// Progress, if not nil, hears (model, models, draws done, draws).
	Progress func(model, models, done, total int)
}

// Compare computes person-level PSIS-LOO and WAIC for every run and the
// elpd differences from the best. The runs must share their data.
func Compare(o CompareOptions) ([]compare.ModelResult, error) {
	if len(o.RunDirs) < 2 {
		return nil, model.Inputf("", 0, "compare needs at least two run folders")
	}
	if o.Draws <= 0 {
		o.Draws = 200
	}
	if o.GHKPoints <= 0 {
		o.GHKPoints = 300
	}
	if err := checkRange("--draws", o.Draws, 1, MaxCheckDraws); err != nil {
		return nil, err
	}
	if err := checkRange("--ghk-points", o.GHKPoints, 1, MaxGHKPoints); err != nil {
		return nil, err
	}
	var fits []compare.ModelFit
	sha := ""
	var first *sampler.Layout
	for m, dir := range o.RunDirs {
		run, err := runfolder.OpenFinished(dir)
		if err != nil {
			return nil, err
		}
		if sha == "" {
			sha = run.Record.DataSHA256
			first = run.Layout
		} else if run.Record.DataSHA256 != sha {
			return nil, model.Inputf(dir, 0, "was fitted to other data than %s; models can be compared only on the same data", o.RunDirs[0])
		} else if why := sameResponses(first, run.Layout); why != "" {
			return nil, model.Inputf(dir, 0, "models fitted to other responses than %s cannot be compared: %s", o.RunDirs[0], why)
		}
		draws := sampler.EvenlySpaced(run.Draws, o.Draws)
		// Person log-likelihoods and their GHK errors, for every model.
		if need, have := mul(len(draws), run.Layout.N, 16, len(o.RunDirs)), MemoryCap(0); need > have {
			return nil, model.Inputf(dir, 0, "comparing would need about %s of memory (%d draws x %d persons x %d models), more than the %s this machine allows; lower --draws", Bytes(need), len(draws), run.Layout.N, len(o.RunDirs), Bytes(have))
		}
		var progress func(done, total int)
		if o.Progress != nil {
			progress = func(done, total int) { o.Progress(m, len(o.RunDirs), done, total) }
		}
		ll, rel, err := compare.LogLikContext(ctxOr(o.Ctx), run.Layout, draws, o.GHKPoints, progress)
		if errors.Is(err, context.Canceled) {
			return nil, errors.New("compare interrupted: nothing written")
		}
		if err != nil {
			return nil, model.Inputf(dir, 0, "%v", err)
		}
		fits = append(fits, compare.ModelFit{Name: filepath.Base(filepath.Clean(dir)), LL: ll, GHKSE: rel, Unconverged: run.Unconverged})
	}
	res, err := compare.Compare(fits)
	if err != nil {
		return nil, err
	}
	if o.Out != "" {
		b, err := json.MarshalIndent(res, "", "  ")
		if err != nil {
			return nil, err
		}
		if err := runfolder.WriteAtomic(o.Out, append(b, '\n')); err != nil {
			return nil, err
		}
	}
	return res, nil
}

// sameResponses says how two layouts' responses differ ("" when the same
// outcomes, with the same types and categories, of the same persons at the
// same occasions): person likelihoods of different responses are not
// comparable, whatever the CSV they came from.
func sameResponses(a, b *sampler.Layout) string {
	pa, pb := a.Panel, b.Panel
	if len(pa.Outcomes) != len(pb.Outcomes) {
		return fmt.Sprintf("%d outcomes against %d", len(pb.Outcomes), len(pa.Outcomes))
	}
	for j := range pa.Outcomes {
		x, y := pa.Outcomes[j], pb.Outcomes[j]
		if x.Name != y.Name || x.Type != y.Type || !slices.Equal(x.Codes, y.Codes) {
			return fmt.Sprintf("outcome %d is %s (%s) against %s (%s)", j+1, y.Name, y.Type, x.Name, x.Type)
		}
	}
	if !slices.Equal(pa.Persons, pb.Persons) {
		return fmt.Sprintf("%d persons against %d, or other persons", len(pb.Persons), len(pa.Persons))
	}
	if !slices.Equal(pa.Occasions, pb.Occasions) {
		return "other occasions"
	}
	return ""
}
