package sampler

// Moments holds second moments of the within paths w, summed over persons
// present at each grid occasion t: Stt[t] = sum w_t w_t', S01[t] = sum
// w_t w_{t-1}' and S11[t] = sum w_{t-1} w_{t-1}' (t >= 1). They do not
// depend on the paths or covariances, so the path block and the covariance
// block share one pass: the innovation sums follow as
// sum zeta_t zeta_t' = Stt - A S01' - S01 A' + A S11 A'.
type Moments struct {
	Stt, S01, S11 []float64 // T blocks of J x J
	part          [][]float64
	w             [][]float64
	ok            bool
}

func newMoments(l *Layout) *Moments {
	n := 3 * l.T * l.J * l.J
	return &Moments{Stt: make([]float64, l.T*l.J*l.J), S01: make([]float64, l.T*l.J*l.J), S11: make([]float64, l.T*l.J*l.J),
		part: shardBufs(l, n), w: shardBufs(l, l.MaxLen*l.J)}
}

// ensureMoments computes st.Mom unless it is current.
func (s *State) ensureMoments() {
	m := s.Mom
	if m.ok {
		return
	}
	l := s.L
	if len(l.ShardStart) == 2 {
		s.momentsShard(0, 0, l.N)
	} else {
		forShards(l, func(sh, lo, hi int) { s.momentsShard(sh, lo, hi) })
	}
	n := len(m.Stt)
	for k := 0; k < n; k++ {
		var a, b, c float64
		for _, p := range m.part {
			a += p[k]
			b += p[n+k]
			c += p[2*n+k]
		}
		m.Stt[k], m.S01[k], m.S11[k] = a, b, c
	}
	m.ok = true
}

func (s *State) momentsShard(sh, lo, hi int) {
	l := s.L
	J := l.J
	JJ := J * J
	m := s.Mom
	p, w := m.part[sh], m.w[sh]
	for k := range p {
		p[k] = 0
	}
	n := len(m.Stt)
	for i := lo; i < hi; i++ {
		s.fillW(w, i, s.Ystar)
		for t := 0; t < l.Panel.Len[i]; t++ {
			wt := w[t*J : (t+1)*J]
			stt := p[t*JJ : (t+1)*JJ]
			for a := 0; a < J; a++ {
				for b := 0; b < J; b++ {
					stt[a*J+b] += wt[a] * wt[b]
				}
			}
			if t == 0 {
				continue
			}
			wp := w[(t-1)*J : t*J]
			s01 := p[n+t*JJ : n+(t+1)*JJ]
			s11 := p[2*n+t*JJ : 2*n+(t+1)*JJ]
			for a := 0; a < J; a++ {
				for b := 0; b < J; b++ {
					s01[a*J+b] += wt[a] * wp[b]
					s11[a*J+b] += wp[a] * wp[b]
				}
			}
		}
	}
}
