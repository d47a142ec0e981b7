package validate

import (
	"bytes"
	"context"
	"encoding/csv"
	"fmt"
	"math/rand/v2"
	"strconv"
	"sync"

	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/priors"
	"github.com/lagstar/lagstar/sampler"
	"gonum.org/v1/gonum/stat/distuv"
)

// Scenario is one model option to calibrate: a model file (without data
// file contents), the panel size, the share of missing cells.
type Scenario struct {
	Name    string
	Model   string // YAML; data.csv is ignored
	Persons int
	Times   int
	Missing float64
}

// Config sets the size of a calibration run.
type Config struct {
	Reps, Warmup, Kept, Thin, Bins int
	Seed                           uint64
	Workers                        int
}

// SBCResult holds the ranks of every replication.
type SBCResult struct {
	Scenario Scenario
	Config   Config
	Names    []string
	Ranks    [][]int // [param][rep], 0..Kept
	PValues  []float64
}

// SBCPriors are the priors used both to draw the truth and to fit in
// calibration: tighter than the defaults so that prior draws give
// plausible panels (SBC needs the same prior on both sides, not the default one).
func SBCPriors() priors.Set {
	return priors.Set{ThresholdSD: 1, MeanSD: 0.5, PathSD: 0.3, RIDfExtra: 4, RIScale: 3, VarShape: 3, VarScale: 2}
}

// RunSBC runs simulation-based calibration (Talts et al. 2018): for each
// replication, parameters from the prior, a panel from the model, a chain
// of Warmup + Kept*Thin sweeps, and the rank of each true value among the
// Kept thinned draws. Replications run on cfg.Workers goroutines with
// per-replication streams, so the result does not depend on scheduling.
func RunSBC(sc Scenario, cfg Config) (*SBCResult, error) {
	pr := SBCPriors()
	tmpl, err := templateLayout(sc, pr)
	if err != nil {
		return nil, err
	}
	params := tmpl.Params()
	res := &SBCResult{Scenario: sc, Config: cfg, Ranks: make([][]int, len(params))}
	for _, p := range params {
		res.Names = append(res.Names, p.Name)
	}
	for p := range res.Ranks {
		res.Ranks[p] = make([]int, cfg.Reps)
	}
	errs := make([]error, cfg.Reps)
	var wg sync.WaitGroup
	jobs := make(chan int)
	for w := 0; w < max(cfg.Workers, 1); w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for r := range jobs {
				ranks, err := oneReplication(sc, cfg, pr, tmpl, r)
				if err != nil {
					errs[r] = fmt.Errorf("%s, replication %d: %w", sc.Name, r, err)
					continue
				}
				for p, rk := range ranks {
					res.Ranks[p][r] = rk
				}
			}
		}()
	}
	for r := 0; r < cfg.Reps; r++ {
		jobs <- r
	}
	close(jobs)
	wg.Wait()
	for _, e := range errs {
		if e != nil {
			return nil, e
		}
	}
	for p := range res.Ranks {
		res.PValues = append(res.PValues, UniformityPValue(res.Ranks[p], cfg.Kept, cfg.Bins))
	}
	return res, nil
}

// templateLayout builds the scenario's layout on a panel where every
// category occurs, to fix the parameter structure.
func templateLayout(sc Scenario, pr priors.Set) (*sampler.Layout, error) {
	sp, err := model.ParseSpec(sc.Name+".yaml", []byte(sc.Model))
	if err != nil {
		return nil, err
	}
	var buf bytes.Buffer
	w := csv.NewWriter(&buf)
	head := []string{sp.Data.Person, sp.Data.Occasion}
	for _, o := range sp.Outcomes {
		head = append(head, o.Name)
	}
	w.Write(head)
	for i := 0; i < sc.Persons; i++ {
		for t := 0; t < sc.Times; t++ {
			rec := []string{strconv.Itoa(i + 1), strconv.Itoa(t + 1)}
			for _, o := range sp.Outcomes {
				switch o.Type {
				case model.Continuous:
					rec = append(rec, strconv.Itoa(i%3+t))
				default:
					k := o.Categories
					if o.Type == model.Binary {
						k = 2
					}
					rec = append(rec, codeLabel(o, (i+t)%k))
				}
			}
			w.Write(rec)
		}
	}
	w.Flush()
	pan, err := model.ParsePanel(sp, "template.csv", buf.Bytes())
	if err != nil {
		return nil, err
	}
	if err := model.Identify(sp, pan); err != nil {
		return nil, err
	}
	l := sampler.NewLayout(sp, pan, pr)
	unstandardize(l)
	return l, nil
}

func codeLabel(o model.OutcomeSpec, k int) string {
	if o.Labels != nil {
		return o.Labels[k]
	}
	lo := 0
	if o.Lowest != nil {
		lo = *o.Lowest
	}
	return strconv.Itoa(lo + k)
}

// unstandardize makes continuous outcomes be analysed on their own scale,
// so that the prior does not depend on the data (calibration needs the
// same prior when drawing and fitting).
func unstandardize(l *sampler.Layout) {
	for j := range l.Center {
		l.Center[j], l.Scale[j] = 0, 1
	}
}

func oneReplication(sc Scenario, cfg Config, pr priors.Set, tmpl *sampler.Layout, r int) ([]int, error) {
	rng := rand.New(rand.NewPCG(cfg.Seed, uint64(r)))
	truth := DrawPrior(tmpl, pr, rng)
	data := SimulatePanel(truth, sc.Persons, sc.Times, sc.Missing, rng)
	sp, err := model.ParseSpec(sc.Name+".yaml", []byte(sc.Model))
	if err != nil {
		return nil, err
	}
	sp.AllowDegenerate = true // prior draws may leave a category empty
	pan, err := model.ParsePanel(sp, "sim.csv", data)
	if err != nil {
		return nil, err
	}
	l := sampler.NewLayout(sp, pan, pr)
	unstandardize(l)
	want := truth.Extract(nil)
	res, err := sampler.Run(context.Background(), l, sampler.Options{Chains: 1, Warmup: cfg.Warmup, Draws: cfg.Kept * cfg.Thin,
		Seed: rng.Uint64(), ThresholdUpdate: model.ThresholdJoint})
	if err != nil {
		return nil, err
	}
	if len(res.Params) != len(want) {
		return nil, fmt.Errorf("parameter count %d differs from the template's %d", len(res.Params), len(want))
	}
	np := len(res.Params)
	ranks := make([]int, np)
	for p := range res.Params {
		for d := cfg.Thin - 1; d < cfg.Kept*cfg.Thin; d += cfg.Thin {
			if res.Draws[0][d*np+p] < want[p] {
				ranks[p]++
			}
		}
	}
	return ranks, nil
}

// DrawPrior returns a state of l whose parameters are drawn from the prior
// pr, term by term (sampler.State.DrawPrior): the truth of a replication.
func DrawPrior(l *sampler.Layout, pr priors.Set, rng *rand.Rand) *sampler.State {
	st := sampler.NewState(l, rng)
	if err := st.DrawPrior(pr, rng); err != nil {
		panic("validate: prior draw not valid: " + err.Error())
	}
	return st
}

// SimulatePanel draws a long-format CSV of n persons x T occasions from the
// state's parameters (y* = nu + b + w, w a VAR(1) with Sigma_t), cutting
// categorical outcomes at the thresholds; each cell is missing with
// probability missing.
func SimulatePanel(st *sampler.State, n, T int, missing float64, rng *rand.Rand) []byte {
	l := st.L
	J := l.J
	g, err := st.Generator()
	if err != nil {
		panic("validate: " + err.Error())
	}
	var buf bytes.Buffer
	w := csv.NewWriter(&buf)
	head := []string{l.Spec.Data.Person, l.Spec.Data.Occasion}
	for _, o := range l.Spec.Outcomes {
		head = append(head, o.Name)
	}
	w.Write(head)
	b := make([]float64, J)
	var rec []string
	for i := 0; i < n; i++ {
		g.Person(T, rng, b, func(t, j int, y float64) {
			if j == 0 {
				rec = []string{strconv.Itoa(i + 1), strconv.Itoa(t + 1)}
			}
			switch {
			case rng.Float64() < missing:
				rec = append(rec, "NA")
			case !l.Cat[j]:
				rec = append(rec, strconv.FormatFloat(y, 'g', -1, 64))
			default:
				rec = append(rec, codeLabel(l.Spec.Outcomes[j], g.Category(j, y)))
			}
			if j == J-1 {
				w.Write(rec)
			}
		})
	}
	w.Flush()
	return buf.Bytes()
}

// UniformityPValue is the chi-square test of rank uniformity over bins
// equal-width bins of the ranks 0..kept.
func UniformityPValue(ranks []int, kept, bins int) float64 {
	count := BinRanks(ranks, kept, bins)
	e := float64(len(ranks)) / float64(bins)
	x2 := 0.0
	for _, c := range count {
		x2 += (float64(c) - e) * (float64(c) - e) / e
	}
	return distuv.ChiSquared{K: float64(bins - 1)}.Survival(x2)
}

// BinRanks counts ranks 0..kept in bins equal-width bins.
func BinRanks(ranks []int, kept, bins int) []int {
	count := make([]int, bins)
	for _, r := range ranks {
		count[r*bins/(kept+1)]++
	}
	return count
}
