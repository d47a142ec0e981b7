package sampler

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/lagstar/lagstar/internal/dense"
	"gonum.org/v1/gonum/stat/distuv"
)

// Param describes one reported quantity (a parameter or a derived one).
// Fields that do not apply are empty (Occasion nil, Index 0).
type Param struct {
	Name    string
	Kind    string
	Outcome string
	From    string
	// Pair names the two outcomes of a correlation (Outcome is then empty).
	Pair     []string
	Occasion *int
	Index    int
	// Table marks quantities shown in the terminal table.
	Table bool
}

// Params lists the model's parameters in the order Extract writes them.
func (l *Layout) Params() []Param {
	var ps []Param
	names := l.outcomeNames()
	occ := func(t int) *int { v := l.Panel.Occasions[t]; return &v }
	for j := 0; j < l.J; j++ {
		for k := 1; k < l.K[j] && l.Cat[j]; k++ {
			ps = append(ps, Param{Name: fmt.Sprintf("threshold[%s,%d]", names[j], k), Kind: "threshold", Outcome: names[j], Index: k, Table: true})
		}
	}
	seen := make([]bool, l.NMean)
	for t := 0; t < l.T; t++ {
		for j := 0; j < l.J; j++ {
			idx := l.MeanIdx[t*l.J+j]
			if idx < 0 || seen[idx] {
				continue
			}
			seen[idx] = true
			p := Param{Kind: "mean", Outcome: names[j], Table: true}
			if l.MeansFree {
				p.Occasion = occ(t)
				p.Name = fmt.Sprintf("mean[%s,t=%d]", names[j], *p.Occasion)
			} else {
				p.Name = fmt.Sprintf("mean[%s]", names[j])
			}
			ps = append(ps, p)
		}
	}
	// Keep mean parameters in MeanIdx order.
	if l.RI {
		for j := 0; j < l.J; j++ {
			ps = append(ps, Param{Name: fmt.Sprintf("ri_variance[%s]", names[j]), Kind: "ri_variance", Outcome: names[j], Table: true})
		}
		for a := 0; a < l.J; a++ {
			for b := a + 1; b < l.J; b++ {
				ps = append(ps, Param{Name: fmt.Sprintf("ri_correlation[%s,%s]", names[a], names[b]), Kind: "ri_correlation", Pair: []string{names[a], names[b]}, Table: true})
			}
		}
	}
	for t := 1; t < l.T && l.HasPaths(); t++ {
		if !l.PathsFree && t > 1 {
			break
		}
		suffix := ""
		var o *int
		if l.PathsFree {
			o = occ(t)
			suffix = fmt.Sprintf(",t=%d", *o)
		}
		for r := 0; r < l.J; r++ {
			for c := 0; c < l.J; c++ {
				if !l.PathFree[r*l.J+c] {
					continue
				}
				if r == c {
					ps = append(ps, Param{Name: fmt.Sprintf("autoregression[%s%s]", names[r], suffix), Kind: "autoregression", Outcome: names[r], Occasion: o, Table: true})
				} else {
					ps = append(ps, Param{Name: fmt.Sprintf("crosslag[%s->%s%s]", names[c], names[r], suffix), Kind: "crosslag", Outcome: names[r], From: names[c], Occasion: o, Table: true})
				}
			}
		}
	}
	for _, g := range l.Groups {
		kindV, kindC := "innovation_variance", "innovation_correlation"
		suffix := ""
		var o *int
		if g.Initial {
			kindV, kindC = "initial_variance", "initial_correlation"
		} else if l.PathsFree {
			o = occ(g.Occ[0])
			suffix = fmt.Sprintf(",t=%d", *o)
		}
		for j := 0; j < l.J; j++ {
			if g.FreeSD[j] {
				ps = append(ps, Param{Name: fmt.Sprintf("%s[%s%s]", kindV, names[j], suffix), Kind: kindV, Outcome: names[j], Occasion: o, Table: true})
			}
		}
		if g.Corr {
			for a := 0; a < l.J; a++ {
				for b := a + 1; b < l.J; b++ {
					ps = append(ps, Param{Name: fmt.Sprintf("%s[%s,%s%s]", kindC, names[a], names[b], suffix), Kind: kindC, Pair: []string{names[a], names[b]}, Occasion: o, Table: true})
				}
			}
		}
	}
	return ps
}

func (l *Layout) outcomeNames() []string {
	n := make([]string, l.J)
	for j, o := range l.Panel.Outcomes {
		n[j] = o.Name
	}
	return n
}

// Extract writes the state's parameters, on the outcomes' own scales, in
// the order of Params.
func (s *State) Extract(dst []float64) []float64 {
	l := s.L
	J := l.J
	JJ := J * J
	dst = dst[:0]
	for j := 0; j < J; j++ {
		if l.Cat[j] {
			dst = append(dst, s.Tau[j]...)
		}
	}
	seen := make([]bool, l.NMean)
	for t := 0; t < l.T; t++ {
		for j := 0; j < J; j++ {
			idx := l.MeanIdx[t*J+j]
			if idx < 0 || seen[idx] {
				continue
			}
			seen[idx] = true
			dst = append(dst, l.Center[j]+l.Scale[j]*s.Mean[idx])
		}
	}
	if l.RI {
		for j := 0; j < J; j++ {
			dst = append(dst, s.Psi[j*J+j]*l.Scale[j]*l.Scale[j])
		}
		for a := 0; a < J; a++ {
			for b := a + 1; b < J; b++ {
				dst = append(dst, s.Psi[a*J+b]/math.Sqrt(s.Psi[a*J+a]*s.Psi[b*J+b]))
			}
		}
	}
	for t := 1; t < l.T && l.HasPaths(); t++ {
		if !l.PathsFree && t > 1 {
			break
		}
		for r := 0; r < J; r++ {
			for c := 0; c < J; c++ {
				if l.PathFree[r*J+c] {
					dst = append(dst, s.A[t*JJ+r*J+c]*l.Scale[r]/l.Scale[c])
				}
			}
		}
	}
	for g, grp := range l.Groups {
		for j := 0; j < J; j++ {
			if grp.FreeSD[j] {
				v := s.SD[g][j] * l.Scale[j]
				dst = append(dst, v*v)
			}
		}
		if grp.Corr {
			for a := 0; a < J; a++ {
				for b := a + 1; b < J; b++ {
					dst = append(dst, s.R[g][a*J+b])
				}
			}
		}
	}
	return dst
}

// DerivedParams lists the derived quantities in the order ExtractDerived
// writes them: within-person standardized paths, latent intraclass
// correlations and category probabilities per occasion.
func (l *Layout) DerivedParams() []Param {
	var ps []Param
	names := l.outcomeNames()
	occ := func(t int) *int { v := l.Panel.Occasions[t]; return &v }
	for _, t := range l.derivedPathOccasions() {
		suffix := ""
		var o *int
		if l.PathsFree {
			o = occ(t)
			suffix = fmt.Sprintf(",t=%d", *o)
		}
		for r := 0; r < l.J; r++ {
			for c := 0; c < l.J; c++ {
				if !l.PathFree[r*l.J+c] {
					continue
				}
				if r == c {
					ps = append(ps, Param{Name: fmt.Sprintf("std_autoregression[%s%s]", names[r], suffix), Kind: "std_autoregression", Outcome: names[r], Occasion: o, Table: true})
				} else {
					ps = append(ps, Param{Name: fmt.Sprintf("std_crosslag[%s->%s%s]", names[c], names[r], suffix), Kind: "std_crosslag", Outcome: names[r], From: names[c], Occasion: o, Table: true})
				}
			}
		}
	}
	if l.RI {
		for _, t := range l.iccOccasions() {
			suffix := ""
			var o *int
			if t >= 0 {
				o = occ(t)
				suffix = fmt.Sprintf(",t=%d", *o)
			}
			for j := 0; j < l.J; j++ {
				ps = append(ps, Param{Name: fmt.Sprintf("icc[%s%s]", names[j], suffix), Kind: "icc", Outcome: names[j], Occasion: o, Table: true})
			}
		}
	}
	for j := 0; j < l.J; j++ {
		if !l.Cat[j] {
			continue
		}
		for t := 0; t < l.T; t++ {
			for k := 0; k < l.K[j]; k++ {
				o := occ(t)
				ps = append(ps, Param{Name: fmt.Sprintf("category_probability[%s,%s,t=%d]", names[j], l.Panel.Outcomes[j].Codes[k], *o),
					Kind: "category_probability", Outcome: names[j], Index: k + 1, Occasion: o})
			}
		}
	}
	return ps
}

func (l *Layout) derivedPathOccasions() []int {
	if !l.HasPaths() || l.T < 2 {
		return nil
	}
	if !l.PathsFree {
		return []int{1}
	}
	out := make([]int, 0, l.T-1)
	for t := 1; t < l.T; t++ {
		out = append(out, t)
	}
	return out
}

// iccOccasions returns -1 for a single ICC per outcome (paths and means
// equal over time), else every occasion.
func (l *Layout) iccOccasions() []int {
	if !l.PathsFree {
		return []int{-1}
	}
	out := make([]int, l.T)
	for t := range out {
		out[t] = t
	}
	return out
}

// DerivedWork is scratch space for ExtractDerived.
type DerivedWork struct{ v, tmp, ref, st []float64 }

// NewDerivedWork allocates scratch for ExtractDerived.
func NewDerivedWork(l *Layout) *DerivedWork {
	return &DerivedWork{v: make([]float64, l.T*l.J*l.J), tmp: make([]float64, l.J*l.J), ref: make([]float64, l.J*l.J), st: make([]float64, 6*l.J*l.J)}
}

// ExtractDerived writes the derived quantities of DerivedParams. The
// within-person variance V_t follows V_1 = Sigma_1, V_t = A_t V_{t-1} A_t' +
// Sigma_t; with paths equal over time the standardized paths and the ICC
// use the stationary variance when the carry-over is stable (else V at the
// last occasion). Standardized path A[r,c] * sqrt(V_prev[c,c] / V[r,r]);
// ICC_j = psi_jj / (psi_jj + V[j,j]); category probabilities are the
// model-implied marginal Phi((tau_k - nu_jt)/sqrt(psi_jj + V_t[j,j])) differences.
func (s *State) ExtractDerived(dst []float64, dw *DerivedWork) []float64 {
	l := s.L
	J, T := l.J, l.T
	JJ := J * J
	dst = dst[:0]
	v := dw.v
	copy(v[:JJ], s.Sig[:JJ])
	for t := 1; t < T; t++ {
		dense.Mul(dw.tmp, s.A[t*JJ:(t+1)*JJ], v[(t-1)*JJ:t*JJ], J, J, J)
		dense.MulBT(v[t*JJ:(t+1)*JJ], dw.tmp, s.A[t*JJ:(t+1)*JJ], J, J, J)
		for k := 0; k < JJ; k++ {
			v[t*JJ+k] += s.Sig[t*JJ+k]
		}
	}
	// Equal paths: one reference variance.
	ref := v[(T-1)*JJ : T*JJ]
	if !l.PathsFree && T > 1 {
		if stationaryCov(dw.ref, s.A[JJ:2*JJ], s.Sig[JJ:2*JJ], J, dw.st) {
			ref = dw.ref
		}
	}
	for _, t := range l.derivedPathOccasions() {
		cur, prev := ref, ref
		if l.PathsFree {
			cur, prev = v[t*JJ:(t+1)*JJ], v[(t-1)*JJ:t*JJ]
		}
		for r := 0; r < J; r++ {
			for c := 0; c < J; c++ {
				if l.PathFree[r*J+c] {
					dst = append(dst, s.A[t*JJ+r*J+c]*math.Sqrt(prev[c*J+c]/cur[r*J+r]))
				}
			}
		}
	}
	if l.RI {
		for _, t := range l.iccOccasions() {
			cur := ref
			if t >= 0 {
				cur = v[t*JJ : (t+1)*JJ]
			}
			for j := 0; j < J; j++ {
				p := s.Psi[j*J+j]
				dst = append(dst, p/(p+cur[j*J+j]))
			}
		}
	}
	norm := distuv.UnitNormal
	for j := 0; j < J; j++ {
		if !l.Cat[j] {
			continue
		}
		for t := 0; t < T; t++ {
			sd := math.Sqrt(s.Psi[j*J+j] + v[t*JJ+j*J+j])
			prev := 0.0
			for k := 0; k < l.K[j]; k++ {
				c := 1.0
				if k < l.K[j]-1 {
					c = norm.CDF((s.Tau[j][k] - s.Nu[t*J+j]) / sd)
				}
				dst = append(dst, c-prev)
				prev = c
			}
		}
	}
	return dst
}

// Inject sets the state's parameters from a vector in the order and on the
// scales of Extract (the inverse of Extract), then refreshes the caches.
// Latent responses and random intercepts are left as they are.
func (s *State) Inject(v []float64) error {
	l := s.L
	J := l.J
	JJ := J * J
	if want := len(l.Params()); len(v) != want {
		return fmt.Errorf("sampler: %d values for %d parameters", len(v), want)
	}
	k := 0
	next := func() float64 { x := v[k]; k++; return x }
	for j := 0; j < J; j++ {
		if l.Cat[j] {
			for q := range s.Tau[j] {
				s.Tau[j][q] = next()
			}
		}
	}
	seen := make([]bool, l.NMean)
	for t := 0; t < l.T; t++ {
		for j := 0; j < J; j++ {
			idx := l.MeanIdx[t*J+j]
			if idx < 0 || seen[idx] {
				continue
			}
			seen[idx] = true
			s.Mean[idx] = (next() - l.Center[j]) / l.Scale[j]
		}
	}
	s.SyncNu()
	if l.RI {
		for j := 0; j < J; j++ {
			s.Psi[j*J+j] = next() / (l.Scale[j] * l.Scale[j])
		}
		for a := 0; a < J; a++ {
			for b := a + 1; b < J; b++ {
				c := next() * math.Sqrt(s.Psi[a*J+a]*s.Psi[b*J+b])
				s.Psi[a*J+b], s.Psi[b*J+a] = c, c
			}
		}
	}
	if l.HasPaths() && l.T > 1 {
		a := make([]float64, JJ)
		for t := 1; t < l.T; t++ {
			if !l.PathsFree && t > 1 {
				break
			}
			for r := 0; r < J; r++ {
				for c := 0; c < J; c++ {
					if l.PathFree[r*J+c] {
						a[r*J+c] = next() * l.Scale[c] / l.Scale[r]
					}
				}
			}
			s.setPaths(t, a)
		}
	}
	for g, grp := range l.Groups {
		for j := 0; j < J; j++ {
			if grp.FreeSD[j] {
				s.SD[g][j] = math.Sqrt(next()) / l.Scale[j]
			}
		}
		if grp.Corr {
			for a := 0; a < J; a++ {
				for b := a + 1; b < J; b++ {
					x := next()
					s.R[g][a*J+b], s.R[g][b*J+a] = x, x
				}
			}
		}
	}
	return s.Refresh()
}

// Replicate draws a new data set on the panel's pattern (the same persons,
// occasions and missing cells) from the state's parameters, with new random
// intercepts and within paths: y* = nu + b + w, cut at the thresholds. It
// writes categories, or continuous values on the analysis scale, into dst
// (NaN where the data are missing). rng is used by one goroutine at a time.
func (s *State) Replicate(dst []float64, rng *rand.Rand) {
	s.ReplicateLatent(dst, nil, nil, rng)
}

// ReplicateLatent is Replicate that also keeps the latent responses of every
// cell (missing ones included) in ystar and the random intercepts in b, when
// those are not nil: a draw from p(y, y*, b | parameters).
func (s *State) ReplicateLatent(dst, ystar, b []float64, rng *rand.Rand) {
	l := s.L
	J := l.J
	JJ := J * J
	work := make([]float64, JJ+4*J)
	chol, z, bi, cur := work[:JJ], work[JJ:JJ+J], work[JJ+J:JJ+2*J], work[JJ+2*J:JJ+3*J]
	prev := work[JJ+3*J : JJ+4*J]
	draw := func(dst, m []float64) {
		copy(chol, m)
		dense.Cholesky(chol, J)
		for q := range z {
			z[q] = rng.NormFloat64()
		}
		dense.MulVec(dst, chol, z, J, J)
	}
	for i := 0; i < l.N; i++ {
		for q := range bi {
			bi[q] = 0
		}
		if l.RI {
			draw(bi, s.Psi)
		}
		if b != nil {
			copy(b[i*J:i*J+J], bi)
		}
		off := l.Panel.Offset[i]
		for t := 0; t < l.Panel.Len[i]; t++ {
			draw(cur, s.Sig[t*JJ:(t+1)*JJ])
			if t > 0 {
				a := s.A[t*JJ : (t+1)*JJ]
				for r := 0; r < J; r++ {
					for c := 0; c < J; c++ {
						cur[r] += a[r*J+c] * prev[c]
					}
				}
			}
			copy(prev, cur)
			for j := 0; j < J; j++ {
				c := off + t*J + j
				y := s.Nu[t*J+j] + bi[j] + cur[j]
				if ystar != nil {
					ystar[c] = y
				}
				switch {
				case s.Y[c] != s.Y[c]:
					dst[c] = math.NaN()
				case !l.Cat[j]:
					dst[c] = y
				default:
					k := 0
					for k < len(s.Tau[j]) && y > s.Tau[j][k] {
						k++
					}
					dst[c] = float64(k)
				}
			}
		}
	}
}
