package sampler

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"sync"
	"testing"

	"github.com/lagstar/lagstar/catalog"
	"github.com/lagstar/lagstar/priors"
)

// offsetTerm is the worked example of DEVELOPERS.md, "Adding a model
// term": one offset per outcome, delta_j ~ N(0, offsetSD^2), that the data
// do not inform, so its posterior is its prior. It is the smallest term
// that walks the whole path: its own values in the state (OwnValues),
// parameters with a kind in the catalogue, extract/inject, start, prior
// draw, a Gibbs block with a sweep slot, what the block writes, its
// adapted state in checkpoints, and one registry line.
type offsetTerm struct{}

const offsetSD = 2.0

func (offsetTerm) Name() string          { return "outcome offsets" }
func (offsetTerm) Active(l *Layout) bool { return true }
func (offsetTerm) OwnSize(l *Layout) int { return l.J }
func (offsetTerm) Prior(s *State, _ priors.Set, rng *rand.Rand) {
	for j := range s.Own(offsetTerm{}) {
		s.Own(offsetTerm{})[j] = offsetSD * rng.NormFloat64()
	}
}

func (offsetTerm) Params(l *Layout) []Param {
	var ps []Param
	for _, n := range l.outcomeNames() {
		ps = append(ps, Param{Name: fmt.Sprintf("offset[%s]", n), Kind: "offset", Outcome: n})
	}
	return ps
}

func (offsetTerm) Extract(s *State, dst []float64) []float64 {
	return append(dst, s.Own(offsetTerm{})...)
}

func (offsetTerm) Inject(s *State, v []float64) []float64 {
	return v[copy(s.Own(offsetTerm{}), v):]
}

func (offsetTerm) Start(s *State, rng *rand.Rand) {
	for j := range s.Own(offsetTerm{}) {
		s.Own(offsetTerm{})[j] = rng.Float64() - 0.5
	}
}

func (offsetTerm) Blocks(l *Layout, _ Options) []Placed {
	return []Placed{{slotInterweave + 5, &offsetBlock{}}}
}

// offsetBlock draws the offsets from their full conditional, the prior;
// it counts its sweeps, as an adapted state a checkpoint must keep.
type offsetBlock struct{ sweeps int }

func (*offsetBlock) Name() string        { return "outcome offsets" }
func (*offsetBlock) Writes() Part        { return PartOwn }
func (b *offsetBlock) AdaptState() []any { return []any{&b.sweeps} }
func (b *offsetBlock) Update(st *State, rng *rand.Rand) error {
	b.sweeps++
	for j := range st.Own(offsetTerm{}) {
		st.Own(offsetTerm{})[j] = offsetSD * rng.NormFloat64()
	}
	return nil
}

// withOffsetTerm registers the example term (the one registry line) for
// the test and removes it afterwards.
func withOffsetTerm(t *testing.T) {
	saved := registry
	registry = append(slices.Clone(registry), registryEntry{term: offsetTerm{}, draw: 8})
	catalog.Register(catalog.Kind{Name: "offset", Section: catalog.Within, Tabled: true,
		Label: func(n catalog.Names) string { return n.Outcome + ", offset" }})
	t.Cleanup(func() { registry = saved })
}

// TestExampleTermPath proves the path of "Adding a model term" with
// offsetTerm: its parameters come last (registry order), round-trip
// through Extract and Inject, start and prior-draw in its own values,
// its block runs in its slot and writes only what it declares, its
// posterior is its N(0, 2^2) prior, and a run resumed from a checkpoint
// keeps its values and adapted state.
func TestExampleTermPath(t *testing.T) {
	withOffsetTerm(t)
	p := problems()[1]
	p.n = 60
	l := p.layout(t)
	ps := l.Params()
	if got := ps[len(ps)-2:]; got[0].Name != "offset[a]" || got[1].Name != "offset[b]" || got[0].Kind != "offset" {
		t.Fatalf("last parameters %v, want offset[a], offset[b]", got)
	}
	if k, ok := catalog.Lookup("offset"); !ok || k.Label(catalog.Names{Outcome: "a"}) != "a, offset" {
		t.Error("the offset kind is not in the catalogue")
	}
	bs := blocksFor(l, Options{})
	if last := bs[len(bs)-1]; last.Name() != "outcome offsets" {
		t.Errorf("last block %q, want the offsets' (slot after the covariance)", last.Name())
	}

	rng := newRand(3)
	st := NewState(l, rng)
	start := slices.Clone(st.Own(offsetTerm{}))
	if start[0] == 0 || math.Abs(start[0]) > 0.5 {
		t.Errorf("starting offsets %v, want uniform on (-0.5, 0.5)", start)
	}
	v := st.Extract(nil)
	v[len(v)-1] = 1.25
	if err := st.Inject(v); err != nil {
		t.Fatal(err)
	}
	if got := st.Own(offsetTerm{})[1]; got != 1.25 {
		t.Errorf("Inject set offset[b] to %g, want 1.25", got)
	}
	if err := st.DrawPrior(priors.Default(), rng); err != nil {
		t.Fatal(err)
	}
	if got := st.Own(offsetTerm{})[1]; got == 1.25 {
		t.Error("DrawPrior left the offsets alone")
	}
	before := parts(st)
	if err := UpdateBlock(st, &offsetBlock{}, rng); err != nil {
		t.Fatal(err)
	}
	for part, x := range parts(st) {
		if changed := !slices.Equal(x, before[part]); changed != (part == PartOwn) {
			t.Errorf("offset block: part %s changed %v", partName(part), changed)
		}
	}

	// The posterior is the prior.
	opt := Options{Chains: 2, Warmup: 20, Draws: 1500, Seed: 9}
	res, err := Run(context.Background(), l, opt)
	if err != nil {
		t.Fatal(err)
	}
	np := len(res.Params)
	var s, ss, n float64
	for c := range res.Draws {
		for d := 0; d < res.Kept[c]; d++ {
			x := res.Draws[c][d*np+np-1]
			s, ss, n = s+x, ss+x*x, n+1
		}
	}
	mean, vr := s/n, ss/n-(s/n)*(s/n)
	// Independent draws: sd of the mean 2/sqrt(3000) = 0.037, of the
	// variance 4 sqrt(2/3000) = 0.10; four of each.
	if math.Abs(mean) > 0.15 || math.Abs(vr-offsetSD*offsetSD) > 0.42 {
		t.Errorf("offset[b] draws: mean %.3f, variance %.3f; want 0 and %g", mean, vr, offsetSD*offsetSD)
	}

	// Resumed from a checkpoint part-way, the draws (offsets included)
	// are those of the uninterrupted run.
	short := Options{Chains: 1, Warmup: 10, Draws: 30, Seed: 4}
	full, err := Run(context.Background(), l, short)
	if err != nil {
		t.Fatal(err)
	}
	var mu sync.Mutex
	var saved [][]byte
	cut := short
	cut.CheckpointEvery = 17
	cut.Checkpoint = func(_ int, b []byte) error {
		mu.Lock()
		defer mu.Unlock()
		if saved == nil {
			saved = [][]byte{slices.Clone(b)}
		}
		return nil
	}
	if _, err := Run(context.Background(), l, cut); err != nil {
		t.Fatal(err)
	}
	r, err := Resume(context.Background(), l, short, saved)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(full.Draws[0], r.Result().Draws[0]) {
		t.Error("resumed draws differ from the uninterrupted run")
	}
	var ob *offsetBlock
	for _, b := range r.chains[0].blocks {
		if o, ok := b.(*offsetBlock); ok {
			ob = o
		}
	}
	if ob == nil || ob.sweeps != 40 {
		t.Errorf("offset block after resume: %+v, want 40 sweeps counted (its adapted state restored)", ob)
	}
	if !strings.HasPrefix(l.Terms[len(l.Terms)-1].Name(), "outcome offsets") {
		t.Error("the layout does not list the offsets term last")
	}
}
