package sampler

import (
	"fmt"
	"math/rand/v2"

	"github.com/lagstar/lagstar/priors"
)

// BlockError reports numerical trouble in a named block, usually caused by
// the data (e.g. an outcome that never varies).
type BlockError struct {
	Block, Msg string
}

func (e *BlockError) Error() string { return fmt.Sprintf("sampler block %q: %s", e.Block, e.Msg) }

func errBlock(block, msg string) error { return &BlockError{Block: block, Msg: msg} }

func invWishart(dst []float64, rng *rand.Rand, df float64, scale []float64, n int, work []float64) bool {
	return priors.InvWishart(dst, rng, df, scale, n, work)
}
