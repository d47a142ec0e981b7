package runfolder

import (
	"bytes"
	"crypto/sha256"
	"encoding/csv"
	"encoding/hex"
	"encoding/json"
	"math/rand/v2"
	"strconv"
	"time"

	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/priors"
	"github.com/lagstar/lagstar/report"
	"github.com/lagstar/lagstar/sampler"
)

// Open reads a run folder's run.json, checks its data copy against the
// recorded SHA-256 and rebuilds the layout from the saved model content.
// Outputs made from the layout name the files the run was first given.
func Open(dir string) (Record, *sampler.Layout, error) {
	rec, err := ReadRecord(dir)
	if err != nil {
		return rec, nil, err
	}
	data, err := Read(dir, DataFile)
	if err != nil {
		return rec, nil, err
	}
	if sum := sha256.Sum256(data); hex.EncodeToString(sum[:]) != rec.DataSHA256 {
		return rec, nil, model.Inputf(Path(dir, DataFile), 0, "does not match the data of the run (SHA-256 differs from run.json)")
	}
	sp, err := model.ParseSpec(Path(dir, RunFile+": model_content"), []byte(rec.ModelContent))
	if err != nil {
		return rec, nil, err
	}
	sp.Data.File = Path(dir, DataFile)
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

// ReadRecord reads and decodes dir's run.json alone.
func ReadRecord(dir string) (Record, error) {
	var rec Record
	raw, err := Read(dir, RunFile)
	if err != nil {
		return rec, err
	}
	if err := json.Unmarshal(raw, &rec); err != nil || rec.Program != report.Program {
		return rec, model.Inputf(Path(dir, RunFile), 0, "not a run record of lagstar fit")
	}
	return rec, nil
}

// Run is a finished run folder read back: its layout (rebuilt from the
// saved model and data copy), its draws and its record.
type Run struct {
	Layout *sampler.Layout
	// Draws are the kept draws as parameter vectors in the order of
	// Layout.Params, chain after chain.
	Draws  [][]float64
	Record Record
	// Unconverged names the parameters that failed the convergence rule
	// (from summary.json).
	Unconverged []string
}

// OpenFinished reads a finished run folder (check and compare use it).
func OpenFinished(dir string) (*Run, error) {
	rec, l, err := Open(dir)
	if err != nil {
		return nil, err
	}
	switch {
	case rec.Status == StatusFailed:
		return nil, model.Inputf(dir, 0, "the run failed (%s) and has no results; fit the model anew (resuming would fail again)", rec.Error)
	case !rec.Complete:
		return nil, model.Inputf(dir, 0, "the run is unfinished (%s); finish it with lagstar fit --resume %s", rec.Status, dir)
	}
	rawDraws, err := Read(dir, DrawsFile)
	if err != nil {
		return nil, err
	}
	draws, err := parseDraws(rawDraws, l, Path(dir, DrawsFile))
	if err != nil {
		return nil, err
	}
	rawSum, err := Read(dir, SummaryFile)
	if err != nil {
		return nil, err
	}
	sum, err := report.ParseSummary(rawSum)
	if err != nil {
		return nil, model.Inputf(Path(dir, SummaryFile), 0, "%v", err)
	}
	return &Run{Layout: l, Draws: draws, Record: rec, Unconverged: sum.Unconverged}, nil
}

// parseDraws reads draws.csv into parameter vectors in the order of
// l.Params, matching columns by name.
func parseDraws(raw []byte, l *sampler.Layout, file string) ([][]float64, error) {
	recs, err := csv.NewReader(bytes.NewReader(raw)).ReadAll()
	if err != nil {
		return nil, model.Inputf(file, 0, "not valid CSV: %v", err)
	}
	return drawVectors(recs, l, file)
}

// drawVectors turns draws.csv's records into parameter vectors in the
// order of l.Params, matching columns by name.
func drawVectors(recs [][]string, l *sampler.Layout, file string) ([][]float64, error) {
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

// ReadDrawColumns reads dir's draws.csv into columns per chain (for the
// HTML report's figures).
func ReadDrawColumns(dir string) (*report.Draws, error) {
	raw, err := Read(dir, DrawsFile)
	if err != nil {
		return nil, err
	}
	file := Path(dir, DrawsFile)
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

// ReadResult rebuilds a complete run's result from its folder: the
// parameter draws of draws.csv, chain by chain, and the derived quantities
// recomputed from them (State.Inject, State.ExtractDerived), so that a
// summary lost after the run completed can be built again.
func ReadResult(dir string) (*sampler.Result, Record, error) {
	rec, l, err := Open(dir)
	if err != nil {
		return nil, rec, err
	}
	opt, err := rec.SamplerOptions(dir)
	if err != nil {
		return nil, rec, err
	}
	raw, err := Read(dir, DrawsFile)
	if err != nil {
		return nil, rec, err
	}
	file := Path(dir, DrawsFile)
	recs, err := csv.NewReader(bytes.NewReader(raw)).ReadAll()
	if err != nil || len(recs) < 2 || len(recs[0]) < 3 || recs[0][0] != "chain" {
		return nil, rec, model.Inputf(file, 0, "not a draws file (columns chain, draw, then parameters)")
	}
	vecs, err := drawVectors(recs, l, file)
	if err != nil {
		return nil, rec, err
	}
	params, derived := l.Params(), l.DerivedParams()
	res := &sampler.Result{Layout: l, Params: params, Derived: derived, Options: opt,
		Draws: make([][]float64, opt.Chains), DerivedDraws: make([][]float64, opt.Chains), Kept: make([]int, opt.Chains),
		Elapsed: time.Duration(float64(rec.WallSeconds) * float64(time.Second))}
	st := sampler.NewState(l, rand.New(rand.NewPCG(1, 2)))
	dw := sampler.NewDerivedWork(l)
	var dbuf []float64
	for r, row := range recs[1:] {
		c, err := strconv.Atoi(row[0])
		if err != nil || c < 1 || c > opt.Chains {
			return nil, rec, model.Inputf(file, r+2, "chain %q: expected a chain from 1 to %d", row[0], opt.Chains)
		}
		if err := st.Inject(vecs[r]); err != nil {
			return nil, rec, model.Inputf(file, r+2, "the draw is not a valid state of the model: %v", err)
		}
		dbuf = st.ExtractDerived(dbuf, dw)
		res.Draws[c-1] = append(res.Draws[c-1], vecs[r]...)
		res.DerivedDraws[c-1] = append(res.DerivedDraws[c-1], dbuf...)
		res.Kept[c-1]++
	}
	for c, k := range res.Kept {
		if k != opt.Draws {
			return nil, rec, model.Inputf(file, 0, "chain %d has %d draws; run.json says %d", c+1, k, opt.Draws)
		}
	}
	return res, rec, nil
}
