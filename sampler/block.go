package sampler

import (
	"errors"
	"math/rand/v2"
)

// A Block draws one group of parameters from its full conditional, or makes
// a Metropolis-Hastings move that leaves it invariant. Writes declares the
// parts of the state it may change: after it runs, the state's caches that
// are computed from those parts are marked stale (cacheInputs), unless the
// block keeps them current itself (CacheKeeper).
type Block interface {
	Name() string
	Update(st *State, rng *rand.Rand) error
	Writes() Part
}

// Part is a set of parts of a chain's state.
type Part uint16

// The parts of the state blocks write.
const (
	PartLatent       Part = 1 << iota // Ystar
	PartIntercepts                    // B
	PartThresholds                    // Tau
	PartMeans                         // Mean and Nu
	PartPaths                         // A
	PartCovariances                   // SD and R, hence Sig
	PartInterceptCov                  // Psi
	PartOwn                           // per-term storage (State.Own)
)

// Cache names a value the state derives from its parts to save passes.
type Cache uint8

// The state's caches.
const (
	// CacheWQuad is State.WQuad, the within-path quadratic forms by outcome
	// (filled by the latent block's pass).
	CacheWQuad Cache = 1 << iota
	// CacheMoments is State.Mom, the within paths' second moments.
	CacheMoments
	// CachePrecision is Sig, SigInv, LBlk, DMid and the conditional sds,
	// rebuilt by State.Refresh. Blocks that change paths or covariances
	// call Refresh themselves (their acceptance steps need it) and keep it.
	CachePrecision
)

// cacheInputs is the one dependency table: each cache and the parts it
// is computed from.
var cacheInputs = []struct {
	cache  Cache
	inputs Part
}{
	{CacheWQuad, PartLatent | PartIntercepts | PartMeans | PartPaths | PartCovariances},
	{CacheMoments, PartLatent | PartIntercepts | PartMeans},
	{CachePrecision, PartPaths | PartCovariances},
}

// CacheKeeper is implemented by blocks that leave some caches current
// (or correctly marked) although they write their inputs.
type CacheKeeper interface {
	Keeps() Cache
}

// Adaptive is implemented by blocks that carry values from one sweep to
// the next (step sizes adapted during warm-up, counters): AdaptState
// returns pointers to them, in a fixed order; checkpoints save and restore
// them (gob-encoded).
type Adaptive interface {
	AdaptState() []any
}

// stale marks the caches block b may have made stale; precision caches
// are rebuilt at once (nothing reads them stale).
func (s *State) stale(b Block) error {
	w := b.Writes()
	var keep Cache
	if k, ok := b.(CacheKeeper); ok {
		keep = k.Keeps()
	}
	for _, c := range cacheInputs {
		if w&c.inputs == 0 || keep&c.cache != 0 {
			continue
		}
		switch c.cache {
		case CacheWQuad:
			s.WQuadOK = false
		case CacheMoments:
			s.Mom.ok = false
		case CachePrecision:
			if err := s.Refresh(); err != nil {
				return err
			}
		}
	}
	return nil
}

// UpdateBlock runs block b once and marks the caches it made stale; use it
// (or Sweep) rather than b.Update.
func UpdateBlock(st *State, b Block, rng *rand.Rand) error {
	if err := b.Update(st, rng); err != nil {
		var be *BlockError
		if errors.As(err, &be) {
			return err
		}
		return &BlockError{Block: b.Name(), Msg: err.Error()}
	}
	if err := st.stale(b); err != nil {
		return &BlockError{Block: b.Name(), Msg: err.Error()}
	}
	return nil
}

// Sweep runs every block once. An error, or a value that is not finite
// left behind by a block, is reported with the block's name.
func Sweep(st *State, blocks []Block, rng *rand.Rand) error {
	for _, b := range blocks {
		if err := UpdateBlock(st, b, rng); err != nil {
			return err
		}
		if what := st.nonFinite(b.Writes()&PartLatent != 0); what != "" {
			return &BlockError{Block: b.Name(), Msg: what + " is not finite after this block"}
		}
	}
	return nil
}

// What each block writes and keeps (their doc comments say why).
func (*LatentPathBlock) Writes() Part { return PartLatent }
func (*LatentBlock) Writes() Part     { return PartLatent }
func (*ScaleBlock) Writes() Part {
	return PartLatent | PartIntercepts | PartThresholds | PartMeans | PartOwn
}
func (*ThresholdBlock) Writes() Part { return PartThresholds | PartLatent }
func (*LevelBlock) Writes() Part     { return PartThresholds | PartLatent | PartMeans }
func (*CollapsedBlock) Writes() Part { return PartPaths | PartInterceptCov }
func (*InterceptBlock) Writes() Part { return PartIntercepts }
func (*LocationBlock) Writes() Part  { return PartIntercepts | PartMeans | PartLatent | PartThresholds }
func (*MeanBlock) Writes() Part      { return PartMeans }
func (*PathBlock) Writes() Part      { return PartPaths }
func (*CovBlock) Writes() Part       { return PartCovariances }
func (*PsiBlock) Writes() Part       { return PartInterceptCov }

// The latent block fills WQuad in its pass; the scale block rescales it
// with the state; the threshold block marks it stale itself when a joint
// move changes latent responses (its next outcome's move reads it).
func (*LatentBlock) Keeps() Cache    { return CacheWQuad }
func (*ScaleBlock) Keeps() Cache     { return CacheWQuad }
func (*ThresholdBlock) Keeps() Cache { return CacheWQuad }

// Blocks that change paths or covariances refresh the precision caches in
// their own acceptance steps.
func (*CollapsedBlock) Keeps() Cache { return CachePrecision }
func (*PathBlock) Keeps() Cache      { return CachePrecision }
func (*CovBlock) Keeps() Cache       { return CachePrecision }
