package sampler

import (
	"math"
	"math/rand/v2"

	"github.com/lagstar/lagstar/internal/dense"
	"github.com/lagstar/lagstar/priors"
)

// CovBlock updates every free covariance matrix Sigma = D R D (innovations,
// and the first occasion when it is free) by random-walk Metropolis within
// Gibbs: on log sd for each free standard deviation (inverse-gamma prior on
// the variance, Jacobian included) and on each correlation of R, rejecting
// proposals outside the positive-definite set (uniform prior on correlation
// matrices). Categorical outcomes keep sd = 1 (identification). The target
// is the Gaussian density of the group's innovations through the
// sufficient statistic S = sum zeta zeta'; under a stationary first
// occasion the innovation group's target also holds the first-occasion
// density N(w_1; 0, V(A, Sigma)). Step sizes are tuned during warm-up only.
// Reads Ystar, Nu, B, A; writes SD, R and the caches.
type CovBlock struct {
	stats   [][]float64 // per group: S
	n       []float64
	s00     []float64
	sig     []float64
	work    []float64
	logStep [][]float64 // per group: J sd steps then J*J correlation steps
	tries   [][]int
	rounds  int
	w, z    []float64 // ARMA(1,1) scratch
}

// NewCovBlock allocates the block's workspace.
func NewCovBlock(l *Layout) *CovBlock {
	J := l.J
	cb := &CovBlock{n: make([]float64, len(l.Groups)), s00: make([]float64, J*J),
		sig:  make([]float64, J*J),
		work: make([]float64, 8*J*J+2*J), rounds: 3}
	if l.MA {
		cb.w, cb.z = make([]float64, l.MaxLen*J), make([]float64, l.MaxLen*J)
	}
	for range l.Groups {
		cb.stats = append(cb.stats, make([]float64, J*J))
		ls := make([]float64, J+J*J)
		for k := range ls {
			ls[k] = math.Log(0.1)
		}
		cb.logStep = append(cb.logStep, ls)
		cb.tries = append(cb.tries, make([]int, J+J*J))
	}
	return cb
}

// Name implements Block.
func (*CovBlock) Name() string { return "innovation covariances" }

// Update implements Block.
func (cb *CovBlock) Update(st *State, rng *rand.Rand) error {
	l := st.L
	J := l.J
	JJ := J * J
	for g := range cb.stats {
		for k := range cb.stats[g] {
			cb.stats[g][k] = 0
		}
		cb.n[g] = 0
	}
	if l.MA {
		for t := 0; t < l.T; t++ {
			if g := l.GroupOf[t]; g >= 0 {
				cb.n[g] += float64(l.CountAt[t])
			}
		}
		st.innovationSums(cb.stats, cb.w, cb.z)
		for g, grp := range l.Groups {
			if err := cb.updateGroup(st, rng, g, grp); err != nil {
				return err
			}
		}
		return st.Refresh()
	}
	st.ensureMoments()
	m := st.Mom
	copy(cb.s00, m.Stt[:JJ])
	t1, t2 := cb.work[:JJ], cb.work[JJ:2*JJ]
	for t := 0; t < l.T; t++ {
		g := l.GroupOf[t]
		if g < 0 {
			continue // stationary first occasion: cb.s00
		}
		s := cb.stats[g]
		cb.n[g] += float64(l.CountAt[t])
		stt := m.Stt[t*JJ : (t+1)*JJ]
		if t == 0 {
			for k := range s {
				s[k] += stt[k]
			}
			continue
		}
		// sum zeta zeta' = Stt - A S01' - S01 A' + A S11 A'.
		a := st.A[t*JJ : (t+1)*JJ]
		s01, s11 := m.S01[t*JJ:(t+1)*JJ], m.S11[t*JJ:(t+1)*JJ]
		dense.MulBT(t1, a, s01, J, J, J) // A S01'
		dense.Mul(t2, a, s11, J, J, J)   // A S11
		for r := 0; r < J; r++ {
			for c := 0; c < J; c++ {
				v := stt[r*J+c] - t1[r*J+c] - t1[c*J+r]
				for k := 0; k < J; k++ {
					v += t2[r*J+k] * a[c*J+k]
				}
				s[r*J+c] += v
			}
		}
	}
	for g, grp := range l.Groups {
		if err := cb.updateGroup(st, rng, g, grp); err != nil {
			return err
		}
	}
	return st.Refresh()
}

func (cb *CovBlock) updateGroup(st *State, rng *rand.Rand, g int, grp CovGroup) error {
	l := st.L
	J := l.J
	hasFree := grp.Corr
	for _, f := range grp.FreeSD {
		hasFree = hasFree || f
	}
	if !hasFree {
		return nil
	}
	stationary := l.GroupOf[0] == -1 && !grp.Initial
	cur := cb.logTarget(st, g, stationary)
	if math.IsInf(cur, -1) || math.IsNaN(cur) {
		return errBlock("innovation covariances", "current covariance has zero density")
	}
	sd, r := st.SD[g], st.R[g]
	for range cb.rounds {
		for j := 0; j < J; j++ {
			if !grp.FreeSD[j] {
				continue
			}
			old := sd[j]
			step := math.Exp(cb.logStep[g][j])
			sd[j] = old * math.Exp(step*rng.NormFloat64())
			next := cb.logTarget(st, g, stationary)
			acc := math.Log(rng.Float64()) < next-cur
			if acc {
				cur = next
			} else {
				sd[j] = old
			}
			cb.tune(st, g, j, acc)
		}
		if !grp.Corr {
			continue
		}
		for a := 0; a < J; a++ {
			for b := a + 1; b < J; b++ {
				old := r[a*J+b]
				step := math.Exp(cb.logStep[g][J+a*J+b])
				v := old + step*rng.NormFloat64()
				acc := false
				if v > -1 && v < 1 {
					r[a*J+b], r[b*J+a] = v, v
					next := cb.logTarget(st, g, stationary)
					if math.Log(rng.Float64()) < next-cur {
						cur, acc = next, true
					} else {
						r[a*J+b], r[b*J+a] = old, old
					}
				}
				cb.tune(st, g, J+a*J+b, acc)
			}
		}
	}
	return nil
}

func (cb *CovBlock) tune(st *State, g, k int, acc bool) {
	if st.Warmup {
		cb.tries[g][k]++
		adapt(&cb.logStep[g][k], acc, 0.44, cb.tries[g][k])
	}
}

// logTarget returns the log full conditional (up to a constant) of group g
// at the state's current SD[g], R[g]; -Inf outside the support.
func (cb *CovBlock) logTarget(st *State, g int, stationary bool) float64 {
	l := st.L
	J := l.J
	JJ := J * J
	st.groupCov(cb.sig, g)
	chol := cb.work[:JJ]
	inv := cb.work[JJ : 2*JJ]
	copy(chol, cb.sig)
	if !dense.Cholesky(chol, J) {
		return math.Inf(-1)
	}
	dense.InverseFromChol(inv, chol, J, cb.work[2*JJ:2*JJ+J])
	lp := -0.5*cb.n[g]*dense.LogDetChol(chol, J) - 0.5*dense.TraceProd(inv, cb.stats[g], J)
	for j := 0; j < J; j++ {
		if l.Groups[g].FreeSD[j] {
			lp += priors.LogInvGammaOfLogSD(math.Log(st.SD[g][j]), l.Priors.VarShape, l.Priors.VarScale)
		}
	}
	if stationary {
		v := cb.work[3*JJ : 4*JJ]
		if !stationaryCovW(v, st.A[JJ:2*JJ], cb.sig, J, cb.work[4*JJ:]) {
			return math.Inf(-1)
		}
		copy(chol, v)
		if !dense.Cholesky(chol, J) {
			return math.Inf(-1)
		}
		dense.InverseFromChol(inv, chol, J, cb.work[2*JJ:2*JJ+J])
		lp += -0.5*float64(l.N)*dense.LogDetChol(chol, J) - 0.5*dense.TraceProd(inv, cb.s00, J)
	}
	return lp
}

func stationaryCovW(v, a, s []float64, J int, work []float64) bool {
	if !dense.SpectralRadiusBelowOne(a, J, work) {
		return false
	}
	return dense.StationaryCov(v, a, s, J, work)
}

// AdaptState implements Adaptive: the adapted step sizes and their tries.
func (cb *CovBlock) AdaptState() []any { return []any{&cb.logStep, &cb.tries} }
