package sampler

import (
	"math/rand/v2"
	"slices"

	"github.com/lagstar/lagstar/priors"
)

// latentTerm is the latent responses behind the categories (and, for
// continuous outcomes, the standardized data): no reported parameters,
// but the blocks that draw them. Their starting values are drawn by
// NewState once every parameter has started.
type latentTerm struct{}

func (latentTerm) Name() string                              { return "latent responses" }
func (latentTerm) Active(*Layout) bool                       { return true }
func (latentTerm) Params(*Layout) []Param                    { return nil }
func (latentTerm) Extract(_ *State, dst []float64) []float64 { return dst }
func (latentTerm) Inject(_ *State, v []float64) []float64    { return v }
func (latentTerm) Start(*State, *rand.Rand)                  {}
func (latentTerm) Prior(*State, priors.Set, *rand.Rand)      {}

func (latentTerm) Blocks(l *Layout, opt Options) []Placed {
	if l.MA {
		return []Placed{{slotLatent, NewLatentMABlock(l)}}
	}
	var ps []Placed
	if opt.PathMoves && !slices.Contains(l.Cat, false) {
		// Before the latent block, whose pass leaves State.WQuad for the
		// scale and threshold blocks.
		ps = append(ps, Placed{slotLatentPaths, NewLatentPathBlock(l)})
	}
	return append(ps, Placed{slotLatent, NewLatentBlock(l)})
}
