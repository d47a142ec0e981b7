package sampler

import (
	"math"
	"math/rand/v2"

	"github.com/lagstar/lagstar/latentresp"
	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/priors"
)

// ThresholdBlock updates the thresholds of every categorical outcome. It
// first makes the plain Gibbs step of Albert & Chib (1993): each threshold
// from its prior truncated to the gap between the latent responses of the
// categories on either side. With the joint move selected it then makes
// Metropolis-Hastings moves that change thresholds and latent responses
// together (a generalized Gibbs / group move, Liu & Sabatti 2000, JASA
// 95:509): a random-walk proposal tau' maps every latent response in an
// interior category linearly from (tau_{k-1}, tau_k) to (tau'_{k-1}, tau'_k)
// and shifts the two open end categories with their bounding threshold; the
// move is accepted on the joint density of thresholds and within paths
// times the Jacobian prod_k (gap'_k/gap_k)^{n_k}. Missing cells are left in
// place. The step size is tuned during warm-up only.
// Reads Ystar, B, Nu, A and the caches; writes Tau and Ystar.
type ThresholdBlock struct {
	joint    bool
	moves    int
	logStep  []float64
	tries    []int
	prop     []float64
	ys       []float64
	lo, hi   []float64
	count    []int
	cellsOfJ [][]int // observed cells of each categorical outcome
}

// NewThresholdBlock allocates the block's workspace.
func NewThresholdBlock(l *Layout, update model.ThresholdUpdate) *ThresholdBlock {
	tb := &ThresholdBlock{joint: update != model.ThresholdAlbertChib, moves: 1,
		logStep: make([]float64, l.J), tries: make([]int, l.J),
		ys:   make([]float64, len(l.Panel.Y)),
		prop: make([]float64, 12), lo: make([]float64, 12), hi: make([]float64, 12), count: make([]int, 12),
		cellsOfJ: make([][]int, l.J)}
	for j := range tb.logStep {
		tb.logStep[j] = math.Log(0.05)
	}
	J := l.J
	for i := 0; i < l.N; i++ {
		off := l.Panel.Offset[i]
		for c := off; c < off+l.Panel.Len[i]*J; c++ {
			j := (c - off) % J
			if l.Cat[j] && !math.IsNaN(l.Panel.Y[c]) {
				tb.cellsOfJ[j] = append(tb.cellsOfJ[j], c)
			}
		}
	}
	return tb
}

// Name implements Block.
func (*ThresholdBlock) Name() string { return "thresholds" }

// Update implements Block.
func (tb *ThresholdBlock) Update(st *State, rng *rand.Rand) error {
	l := st.L
	for j := 0; j < l.J; j++ {
		if !l.Cat[j] {
			continue
		}
		tb.albertChib(st, rng, j)
		// For a binary outcome the joint move shifts all its latent
		// responses with the threshold (the within part moves against the
		// random intercepts, a direction the location move does not take).
		if tb.joint {
			// tb.ys mirrors Ystar outside the cells being proposed; cur is
			// the within-path log density at the current state.
			copy(tb.ys, st.Ystar)
			var cur float64
			if st.WQuadOK {
				for _, x := range st.WQuad {
					cur += x
				}
				cur *= -0.5
			} else {
				cur = st.withinQuad(st.Ystar)
			}
			for range tb.moves {
				var moved bool
				cur, moved = tb.groupMove(st, rng, j, cur)
				if moved { // latent responses of j changed
					st.WQuadOK = false
					st.Mom.ok = false
				}
			}
		}
	}
	return nil
}

func (tb *ThresholdBlock) albertChib(st *State, rng *rand.Rand, j int) {
	tau := st.Tau[j]
	K := len(tau) + 1
	lo, hi := tb.lo[:K], tb.hi[:K]
	for k := range K {
		lo[k], hi[k] = math.Inf(1), math.Inf(-1) // min and max y* per category
	}
	for _, c := range tb.cellsOfJ[j] {
		k := int(st.Y[c])
		v := st.Ystar[c]
		lo[k] = min(lo[k], v)
		hi[k] = max(hi[k], v)
	}
	sd := st.L.Priors.ThresholdSD
	for k := 0; k < K-1; k++ {
		// tau_k separates category k (below) from k+1 (above).
		a := hi[k]
		if k > 0 {
			a = max(a, tau[k-1])
		}
		b := lo[k+1]
		if k+2 < K {
			b = min(b, tau[k+1])
		}
		if !(a < b) {
			continue // no room (ties at machine precision); keep the value
		}
		tau[k] = latentresp.TruncNormal(rng, 0, sd, a, b)
	}
}

// groupMove makes one joint move of outcome j's thresholds and latent
// responses and returns the within-path log density after it and whether
// the move was accepted.
func (tb *ThresholdBlock) groupMove(st *State, rng *rand.Rand, j int, cur float64) (float64, bool) {
	l := st.L
	tau := st.Tau[j]
	nt := len(tau)
	K := nt + 1
	step := math.Exp(tb.logStep[j])
	prop := tb.prop[:nt]
	for k := range prop {
		prop[k] = tau[k] + step*rng.NormFloat64()
	}
	ok := true
	for k := 1; k < nt; k++ {
		if prop[k] <= prop[k-1] {
			ok = false
		}
	}
	accepted := false
	if ok {
		count := tb.count[:K]
		for k := range count {
			count[k] = 0
		}
		for _, c := range tb.cellsOfJ[j] {
			k := int(st.Y[c])
			count[k]++
			v := st.Ystar[c]
			switch {
			case k == 0:
				v += prop[0] - tau[0]
			case k == K-1:
				v += prop[nt-1] - tau[nt-1]
			default:
				v = prop[k-1] + (v-tau[k-1])*(prop[k]-prop[k-1])/(tau[k]-tau[k-1])
			}
			tb.ys[c] = v
		}
		next := st.withinQuad(tb.ys)
		logr := next - cur
		sd := l.Priors.ThresholdSD
		for k := 0; k < nt; k++ {
			logr += priors.LogNormal(prop[k], sd) - priors.LogNormal(tau[k], sd)
		}
		for k := 1; k < K-1; k++ {
			logr += float64(count[k]) * math.Log((prop[k]-prop[k-1])/(tau[k]-tau[k-1]))
		}
		if math.Log(rng.Float64()) < logr {
			accepted = true
			cur = next
			copy(tau, prop)
			for _, c := range tb.cellsOfJ[j] {
				st.Ystar[c] = tb.ys[c]
			}
		} else {
			for _, c := range tb.cellsOfJ[j] {
				tb.ys[c] = st.Ystar[c]
			}
		}
	}
	if st.Warmup {
		tb.tries[j]++
		adapt(&tb.logStep[j], accepted, 0.3, tb.tries[j])
	}
	return cur, accepted
}

// adapt moves a log step size toward a target acceptance rate with a
// vanishing gain (Robbins-Monro); used during warm-up only, so the kept
// draws come from a fixed kernel.
func adapt(logStep *float64, accepted bool, target float64, n int) {
	a := 0.0
	if accepted {
		a = 1
	}
	*logStep += (a - target) * 2 / math.Sqrt(float64(n)+10)
	*logStep = min(max(*logStep, math.Log(1e-4)), math.Log(10))
}

// AdaptState implements Adaptive: the adapted step sizes and their tries.
func (tb *ThresholdBlock) AdaptState() []any { return []any{&tb.logStep, &tb.tries} }
