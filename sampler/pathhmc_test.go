package sampler

import (
	"math"
	"testing"

	"github.com/lagstar/lagstar/diagnostics"
)

// TestLatentPathBlockTargetsTruncatedNormal: on one person's path (one
// ordinal outcome, 6 occasions, carry-over 0.9, one cell missing) with the
// parameters held fixed, the exact-HMC path move and the single-site Gibbs
// latent block (checked elsewhere against exact distributions) must give the
// same mean and variance of every latent response, within Monte Carlo error.
func TestLatentPathBlockTargetsTruncatedNormal(t *testing.T) {
	csv := "p,t,y\n1,1,2\n1,2,3\n1,3,NA\n1,4,1\n1,5,0\n1,6,2\n2,1,0\n2,2,1\n2,3,2\n2,4,3\n2,5,3\n2,6,3\n"
	l := layoutFrom(t, `data: {csv: x.csv, person: p, occasion: t}
outcomes: [{name: y, type: ordinal, categories: 4, lowest: 0}]
person_differences: {random_intercepts: false}
dynamics: {lags: own}
means: {over_time: equal}
`, []byte(csv))
	type moments struct{ mean, sd, mcse []float64 }
	run := func(useHMC bool) moments {
		rng := newRand(3)
		st := NewState(l, rng)
		st.Tau[0] = []float64{-0.8, 0.1, 0.9}
		for u := 1; u < l.T; u++ {
			st.A[u] = 0.9
		}
		if err := st.Refresh(); err != nil {
			t.Fatal(err)
		}
		// Put the latent responses inside the new thresholds first.
		if err := UpdateBlock(st, NewLatentBlock(l), rng); err != nil {
			t.Fatal(err)
		}
		var blk Block = NewLatentBlock(l)
		if useHMC {
			blk = NewLatentPathBlock(l)
		}
		const iters = 60000
		draws := make([][]float64, 6)
		for it := 0; it < iters+200; it++ {
			if err := UpdateBlock(st, blk, rng); err != nil {
				t.Fatal(err)
			}
			if it >= 200 {
				for k := range draws {
					draws[k] = append(draws[k], st.Ystar[k])
				}
			}
		}
		var m moments
		for k := range draws {
			s := diagnostics.Summarize([][]float64{draws[k]}, 0.9)
			m.mean = append(m.mean, s.Mean)
			m.sd = append(m.sd, s.SD)
			m.mcse = append(m.mcse, s.MCSEMean)
		}
		if useHMC {
			hb := blk.(*LatentPathBlock)
			t.Logf("HMC: %d bounces, %d trajectories abandoned", hb.Bounces[0], hb.Stuck[0])
		}
		return m
	}
	gibbs, hmc := run(false), run(true)
	for k := range gibbs.mean {
		se := math.Hypot(gibbs.mcse[k], hmc.mcse[k])
		t.Logf("y*[%d]: Gibbs %.4f (sd %.4f)  HMC %.4f (sd %.4f)  se %.4f", k, gibbs.mean[k], gibbs.sd[k], hmc.mean[k], hmc.sd[k], se)
		if math.Abs(gibbs.mean[k]-hmc.mean[k]) > 4.5*se {
			t.Errorf("y*[%d]: mean %.4f (path move) vs %.4f (single-site), more than 4.5 se = %.4f apart", k, hmc.mean[k], gibbs.mean[k], 4.5*se)
		}
		if math.Abs(gibbs.sd[k]/hmc.sd[k]-1) > 0.05 {
			t.Errorf("y*[%d]: sd %.4f (path move) vs %.4f (single-site)", k, hmc.sd[k], gibbs.sd[k])
		}
	}
}
