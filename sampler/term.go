package sampler

import (
	"math/rand/v2"
	"slices"

	"github.com/lagstar/lagstar/priors"
)

// A Term is one part of the model: the parameters it adds, how they sit in
// the state, how they start, how they are drawn from their prior (for
// calibration) and which Gibbs blocks update them. Everything about a term
// lives in its own file (term_*.go); the registry (registry.go) lists the
// terms once, in the order their parameters are reported.
type Term interface {
	// Name names the term in messages and in DEVELOPERS.md.
	Name() string
	// Active reports whether the layout has the term. Inactive terms
	// report nothing, start nothing and add no blocks.
	Active(l *Layout) bool
	// Params lists the term's reported parameters, in the order Extract
	// writes them.
	Params(l *Layout) []Param
	// Extract appends the term's parameters, on the outcomes' own scales,
	// to dst.
	Extract(s *State, dst []float64) []float64
	// Inject sets the term's parameters from the front of v (as Extract
	// wrote them) and returns the rest of v. Caches are refreshed by the
	// caller once every term has been injected.
	Inject(s *State, v []float64) []float64
	// Start sets the term's starting values, drawing from rng.
	Start(s *State, rng *rand.Rand)
	// Prior sets the term's parameters to a draw from the prior pr (the
	// calibration's truth). It may read the terms drawn before it.
	Prior(s *State, pr priors.Set, rng *rand.Rand)
	// Blocks returns the Gibbs blocks that update the term, each with its
	// place in the sweep.
	Blocks(l *Layout, opt Options) []Placed
}

// Placed is a block with its place in the sweep: blocks run in increasing
// Slot (slots of the registered terms are listed in DEVELOPERS.md).
type Placed struct {
	Slot  int
	Block Block
}

// OwnValues is implemented by terms that keep their values in the state's
// per-term storage (State.Own) instead of a field of State: OwnSize is the
// number of values. Own values are saved in checkpoints.
type OwnValues interface {
	OwnSize(l *Layout) int
}

// derivedTerm is implemented by terms that report derived quantities
// (functions of the parameters), in derivedOrder.
type derivedTerm interface {
	DerivedParams(l *Layout) []Param
	// ExtractDerived appends the term's derived quantities; dw holds the
	// within-person variances V_t of the current state (DerivedWork).
	ExtractDerived(s *State, dw *DerivedWork, dst []float64) []float64
}

// activeTerms returns the registered terms the layout has, in registry
// order.
func activeTerms(l *Layout) []Term {
	var out []Term
	for _, e := range registry {
		if e.term.Active(l) {
			out = append(out, e.term)
		}
	}
	return out
}

// drawOrder returns the active terms that draw, in the order they take
// starting values and prior draws from the chain's stream
// (registryEntry.draw).
func drawOrder(l *Layout) []registryEntry {
	var out []registryEntry
	for _, e := range registry {
		if e.draw > 0 && e.term.Active(l) {
			out = append(out, e)
		}
	}
	slices.SortStableFunc(out, func(a, b registryEntry) int { return a.draw - b.draw })
	return out
}

// derivedOrder returns the active terms that report derived quantities,
// in the order of DerivedParams (registryEntry.derived).
func derivedOrder(l *Layout) []derivedTerm {
	var es []registryEntry
	for _, e := range registry {
		if _, ok := e.term.(derivedTerm); ok && e.derived > 0 && e.term.Active(l) {
			es = append(es, e)
		}
	}
	slices.SortStableFunc(es, func(a, b registryEntry) int { return a.derived - b.derived })
	out := make([]derivedTerm, len(es))
	for k, e := range es {
		out[k] = e.term.(derivedTerm)
	}
	return out
}

// Params lists the model's parameters in the order Extract writes them:
// each active term's, in registry order.
func (l *Layout) Params() []Param {
	var ps []Param
	for _, t := range l.Terms {
		ps = append(ps, t.Params(l)...)
	}
	return ps
}

// Extract writes the state's parameters, on the outcomes' own scales, in
// the order of Params.
func (s *State) Extract(dst []float64) []float64 {
	dst = dst[:0]
	for _, t := range s.L.Terms {
		dst = t.Extract(s, dst)
	}
	return dst
}

// Own returns term t's values in the state's per-term storage (nil when
// the term keeps none).
func (s *State) Own(t Term) []float64 { return s.own[s.L.termIndex(t)] }

// termIndex returns t's index among the layout's active terms, or -1.
func (l *Layout) termIndex(t Term) int {
	for k, u := range l.Terms {
		if u.Name() == t.Name() {
			return k
		}
	}
	return -1
}

// DrawPrior sets every parameter of s to a draw from the prior pr, term
// by term in draw order, and refreshes the caches: the truth of a
// calibration replication.
func (s *State) DrawPrior(pr priors.Set, rng *rand.Rand) error {
	for _, e := range drawOrder(s.L) {
		e.term.Prior(s, pr, rng)
	}
	return s.Refresh()
}

// termBlocks collects the active terms' blocks and sorts them by slot.
func termBlocks(l *Layout, opt Options) []Block {
	var ps []Placed
	for _, t := range l.Terms {
		ps = append(ps, t.Blocks(l, opt)...)
	}
	slices.SortStableFunc(ps, func(a, b Placed) int { return a.Slot - b.Slot })
	bs := make([]Block, len(ps))
	for k, p := range ps {
		bs[k] = p.Block
	}
	return bs
}
