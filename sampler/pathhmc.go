package sampler

import (
	"math"
	"math/rand/v2"
)

// LatentPathBlock draws each person's whole within path w_i jointly (all
// occasions and outcomes at once) from its truncated normal full
// conditional N(0, Q_i^{-1}) restricted to the category intervals, by exact
// Hamiltonian Monte Carlo for truncated Gaussians (Pakman & Paninski 2014,
// J. Comput. Graph. Stat. 23:518). With mass matrix Q_i the motion is
// w(t) = a cos t + b sin t, walls are hit at times found in closed form and
// the velocity is reflected there in the Q_i^{-1} metric:
// v <- v - 2 v_k / S_kk * S e_k, S = Q_i^{-1}. Each trajectory runs for
// time pi/2 from a fresh velocity v ~ N(0, Q_i^{-1}); the move needs no
// accept step. Q_i is the block-tridiagonal precision of the person's
// VAR(1) path, factored once per sweep for each path length in its band
// (Chan & Jeliazkov 2009). Single-site updates slow down sharply as
// carry-over nears 1 or with binary answers (MODEL.md, sampler item 6); this
// block moves the path as a whole. It is used for models whose outcomes are
// all categorical. Reads B, Nu, Tau, the precision caches; writes Ystar.
type LatentPathBlock struct {
	bw      int         // lower bandwidth of Q in flattened (t, j) order: 2J-1
	chol    [][]float64 // per path length T: band Cholesky factor of Q
	cholOK  []bool
	maxBnc  int
	scratch [][]float64 // per shard: 7 vectors of length MaxLen*J
	// Bounces and Stuck count wall hits and trajectories abandoned at the
	// bounce limit (diagnostics for tests and benchmarks).
	Bounces, Stuck []int
}

// NewLatentPathBlock allocates the block's workspace.
func NewLatentPathBlock(l *Layout) *LatentPathBlock {
	n := l.MaxLen * l.J
	bw := 2*l.J - 1
	pb := &LatentPathBlock{bw: bw, chol: make([][]float64, l.MaxLen+1), cholOK: make([]bool, l.MaxLen+1), maxBnc: 50 * n,
		scratch: shardBufs(l, 7*n), Bounces: make([]int, len(l.ShardStart)-1), Stuck: make([]int, len(l.ShardStart)-1)}
	for _, T := range l.Panel.Len {
		if pb.chol[T] == nil {
			pb.chol[T] = make([]float64, T*l.J*(bw+1))
		}
	}
	return pb
}

// Name implements Block.
func (*LatentPathBlock) Name() string { return "latent path moves" }

// Update implements Block.
func (pb *LatentPathBlock) Update(st *State, _ *rand.Rand) error {
	l := st.L
	for T := range pb.cholOK {
		pb.cholOK[T] = false
	}
	for T, c := range pb.chol {
		if c == nil {
			continue
		}
		if !pb.factor(st, T) {
			return errBlock(pb.Name(), "path precision is not positive definite")
		}
		pb.cholOK[T] = true
	}
	if len(l.ShardStart) == 2 {
		pb.moveShard(st, 0, 0, l.N)
	} else {
		forShards(l, func(s, lo, hi int) { pb.moveShard(st, s, lo, hi) })
	}
	return nil
}

// band returns the index of Q[r][c] (c in r-bw..r) in band storage.
func (pb *LatentPathBlock) band(r, c int) int { return r*(pb.bw+1) + c - r + pb.bw }

// factor builds and factors Q for a path of T occasions in band storage.
func (pb *LatentPathBlock) factor(st *State, T int) bool {
	l := st.L
	J := l.J
	JJ := J * J
	n := T * J
	L := pb.chol[T]
	for k := range L {
		L[k] = 0
	}
	for t := 0; t < T; t++ {
		d := st.DMid[t*JJ : (t+1)*JJ]
		if t == T-1 {
			d = st.SigInv[t*JJ : (t+1)*JJ]
		}
		for a := 0; a < J; a++ {
			for b := 0; b <= a; b++ {
				L[pb.band(t*J+a, t*J+b)] = d[a*J+b]
			}
			if t > 0 {
				lt := st.LBlk[t*JJ : (t+1)*JJ]
				for b := 0; b < J; b++ {
					L[pb.band(t*J+a, (t-1)*J+b)] = lt[a*J+b]
				}
			}
		}
	}
	// Band Cholesky in place.
	for r := 0; r < n; r++ {
		lo := max(0, r-pb.bw)
		for c := lo; c <= r; c++ {
			s := L[pb.band(r, c)]
			for k := max(lo, c-pb.bw); k < c; k++ {
				s -= L[pb.band(r, k)] * L[pb.band(c, k)]
			}
			if c < r {
				L[pb.band(r, c)] = s / L[pb.band(c, c)]
				continue
			}
			if !(s > 0) {
				return false
			}
			L[pb.band(r, r)] = math.Sqrt(s)
		}
	}
	return true
}

// solveLower solves L x = b in place; solveUpperT solves L' x = b.
func (pb *LatentPathBlock) solveLower(L []float64, n int, x []float64) {
	for r := 0; r < n; r++ {
		s := x[r]
		for k := max(0, r-pb.bw); k < r; k++ {
			s -= L[pb.band(r, k)] * x[k]
		}
		x[r] = s / L[pb.band(r, r)]
	}
}

func (pb *LatentPathBlock) solveUpperT(L []float64, n int, x []float64) {
	for r := n - 1; r >= 0; r-- {
		x[r] /= L[pb.band(r, r)]
		v := x[r]
		for k := max(0, r-pb.bw); k < r; k++ {
			x[k] -= L[pb.band(r, k)] * v
		}
	}
}

func (pb *LatentPathBlock) moveShard(st *State, s, lo, hi int) {
	l := st.L
	J := l.J
	rng := st.ShardRng[s]
	n := l.MaxLen * J
	buf := pb.scratch[s]
	a, b, low, high, col, x0 := buf[:n], buf[n:2*n], buf[2*n:3*n], buf[3*n:4*n], buf[4*n:5*n], buf[5*n:6*n]
	for i := lo; i < hi; i++ {
		off := l.Panel.Offset[i]
		T := l.Panel.Len[i]
		m := T * J
		L := pb.chol[T]
		bi := st.B[i*J : i*J+J]
		for c := 0; c < m; c++ {
			j := c % J
			shift := st.Nu[c] + bi[j]
			a[c] = st.Ystar[off+c] - shift
			low[c], high[c] = math.Inf(-1), math.Inf(1)
			if y := st.Y[off+c]; y == y {
				lo, hi := st.interval(j, int(y))
				low[c], high[c] = lo-shift, hi-shift
			}
		}
		// Velocity v ~ N(0, Q^{-1}) = L^{-T} z.
		for c := 0; c < m; c++ {
			b[c] = rng.NormFloat64()
		}
		pb.solveUpperT(L, m, b[:m])
		copy(x0[:m], a[:m])
		bounces, ok := pb.trajectory(L, m, a[:m], b[:m], low[:m], high[:m], col[:m])
		// Rounding may leave an end point a hair outside its interval:
		// pull it back; anything more is treated like the bounce limit.
		for c := 0; ok && c < m; c++ {
			if a[c] < low[c] || a[c] > high[c] {
				if a[c] < low[c]-1e-9 || a[c] > high[c]+1e-9 {
					ok = false
				}
				a[c] = math.Min(math.Max(a[c], low[c]), high[c])
			}
		}
		pb.Bounces[s] += bounces
		if !ok {
			pb.Stuck[s]++
			continue // the path stays at x0 (Ystar untouched)
		}
		for c := 0; c < m; c++ {
			st.Ystar[off+c] = a[c] + st.Nu[c] + bi[c%J]
		}
	}
}

// trajectory moves x(t) = a cos t + b sin t for total time pi/2 inside the
// box (low, high), reflecting at walls, and leaves the end point in a. It
// returns the number of bounces and false when the bounce limit was hit (the
// caller then leaves the path where it was: a symmetric rule, since the
// reversed trajectory would hit the limit too).
func (pb *LatentPathBlock) trajectory(L []float64, n int, a, b, low, high, col []float64) (int, bool) {
	const eps = 1e-12
	remaining := math.Pi / 2
	bounces := 0
	last := -1 // coordinate of the last wall hit, which sits on it
	for {
		tHit, kHit := math.Inf(1), -1
		for k := 0; k < n; k++ {
			lo, hi := low[k], high[k]
			if math.IsInf(lo, -1) && math.IsInf(hi, 1) {
				continue
			}
			r := math.Hypot(a[k], b[k])
			phi := math.Atan2(b[k], a[k])
			for _, c := range [2]float64{lo, hi} {
				if math.IsInf(c, 0) || math.Abs(c) >= r {
					continue
				}
				u := math.Acos(c / r)
				for _, t := range [2]float64{phi + u, phi - u} {
					t = math.Mod(t, 2*math.Pi)
					if t < 0 {
						t += 2 * math.Pi
					}
					// Leaving the wall just hit, its coordinate's root at
					// t = 0 may come out a rounding error above zero.
					if t > eps && t < tHit && !(k == last && t < 1e-7) {
						tHit, kHit = t, k
					}
				}
			}
		}
		if kHit < 0 || tHit >= remaining {
			cs, sn := math.Cos(remaining), math.Sin(remaining)
			for k := 0; k < n; k++ {
				a[k] = a[k]*cs + b[k]*sn
			}
			return bounces, true
		}
		bounces++
		if bounces > pb.maxBnc {
			return bounces, false
		}
		cs, sn := math.Cos(tHit), math.Sin(tHit)
		for k := 0; k < n; k++ {
			x := a[k]*cs + b[k]*sn
			v := -a[k]*sn + b[k]*cs
			a[k], b[k] = x, v
		}
		// Sigma e_k, by two band solves.
		for k := range col[:n] {
			col[k] = 0
		}
		col[kHit] = 1
		pb.solveLower(L, n, col)
		pb.solveUpperT(L, n, col)
		f := 2 * b[kHit] / col[kHit]
		for k := 0; k < n; k++ {
			b[k] -= f * col[k]
		}
		// Pin the coordinate to its wall against rounding.
		if math.Abs(a[kHit]-low[kHit]) < math.Abs(a[kHit]-high[kHit]) {
			a[kHit] = low[kHit]
		} else {
			a[kHit] = high[kHit]
		}
		remaining -= tHit
		last = kHit
	}
}

// AdaptState implements Adaptive: the move's counters.
func (pb *LatentPathBlock) AdaptState() []any { return []any{&pb.Bounces, &pb.Stuck} }
