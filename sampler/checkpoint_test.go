package sampler

import (
	"context"
	"errors"
	"runtime"
	"slices"
	"strings"
	"sync"
	"testing"

	"github.com/lagstar/lagstar/model"
)

// checkpointCase is a model whose blocks all carry state across sweeps in
// some way: adapted threshold and covariance steps, Metropolis paths under
// a stationary start, exact-HMC path moves, several shards.
type checkpointCase struct {
	name    string
	p       problem
	n       int
	opt     Options
	atSweep int // checkpoint taken after this many sweeps
}

func checkpointCases() []checkpointCase {
	ps := problems()
	mixed := problem{yaml: `data: {csv: x.csv, person: person, occasion: occasion}
outcomes: [{name: a, type: ordinal, categories: 4, lowest: 0}, {name: b, type: continuous}]
dynamics: {lags: cross, over_time: free}
means: {over_time: free}
`, tr: Truth{Names: []string{"a", "b"}, Types: []model.OutcomeType{model.Ordinal, model.Continuous}, Tau: [][]float64{{-0.7, 0, 0.7}, nil},
		Psi: []float64{0.6, 0.2, 0.2, 0.5}, A: []float64{0.3, 0.1, 0.1, 0.3}, Sigma: []float64{1, 0.3, 0.3, 1}, Sigma1: []float64{1, 0.2, 0.2, 1}, Missing: 0.1}}
	return []checkpointCase{
		// Checkpoint in warm-up: adaptation state must carry over.
		{"stationary ordinal, in warm-up", ps[0], 40, Options{Chains: 2, Warmup: 60, Draws: 40, Seed: 3}, 30},
		{"binary cross-lag, after warm-up", ps[1], 300, Options{Chains: 2, Warmup: 30, Draws: 50, Seed: 4}, 55},
		{"ordinal and continuous, free over time", mixed, 120, Options{Chains: 1, Warmup: 40, Draws: 30, Seed: 5}, 41},
		{"path moves", ps[1], 150, Options{Chains: 1, Warmup: 20, Draws: 20, Seed: 6, PathMoves: true}, 25},
		{"several shards", ps[1], 2*personsPerShard + 10, Options{Chains: 1, Warmup: 3, Draws: 4, Seed: 7}, 5},
	}
}

// TestResumeGivesUninterruptedDraws: for every case, a run resumed from a
// checkpoint taken part-way gives exactly the draws (and derived draws) of
// the run that was never stopped, also when resumed at another GOMAXPROCS;
// chains without a checkpoint start afresh and still agree.
func TestResumeGivesUninterruptedDraws(t *testing.T) {
	for _, c := range checkpointCases() {
		t.Run(c.name, func(t *testing.T) {
			if testing.Short() && c.p.n > 1000 {
				t.Skip("large panel skipped in -short mode")
			}
			p := c.p
			p.n = c.n
			if p.t == 0 {
				p.t = 6
			}
			l := p.layout(t)
			full, err := Run(context.Background(), l, c.opt)
			if err != nil {
				t.Fatal(err)
			}
			var mu sync.Mutex
			saved := make([][]byte, c.opt.Chains)
			opt := c.opt
			opt.CheckpointEvery = c.atSweep
			opt.Checkpoint = func(chain int, b []byte) error {
				mu.Lock()
				defer mu.Unlock()
				if saved[chain] == nil { // keep the first: as if killed after it
					saved[chain] = slices.Clone(b)
				}
				return nil
			}
			if _, err := Run(context.Background(), l, opt); err != nil {
				t.Fatal(err)
			}
			// The last chain has no checkpoint: it must start afresh.
			if c.opt.Chains > 1 {
				saved[c.opt.Chains-1] = nil
			}
			// Resume on one core: the draws must not depend on it.
			procs := runtime.GOMAXPROCS(1)
			r, err := Resume(context.Background(), l, c.opt, saved)
			runtime.GOMAXPROCS(procs)
			if err != nil {
				t.Fatal(err)
			}
			got := r.Result()
			if got.Incomplete {
				t.Fatal("resumed run marked incomplete")
			}
			for ch := range full.Draws {
				if !slices.Equal(full.Draws[ch], got.Draws[ch]) {
					t.Errorf("chain %d: resumed draws differ from the uninterrupted run", ch+1)
				}
				if !slices.Equal(full.DerivedDraws[ch], got.DerivedDraws[ch]) {
					t.Errorf("chain %d: resumed derived draws differ", ch+1)
				}
			}
		})
	}
}

// TestResumeAfterCancel: a run cancelled part-way (as by Ctrl-C) is
// incomplete; resumed from the checkpoints written when it stopped, it ends
// with the draws of an uninterrupted run, also across an extension round.
func TestResumeAfterCancel(t *testing.T) {
	p := problems()[1]
	p.n = 200
	l := p.layout(t)
	opt := Options{Chains: 3, Warmup: 40, Draws: 60, Seed: 11}
	full, err := Start(context.Background(), l, opt)
	if err != nil {
		t.Fatal(err)
	}
	if err := full.Extend(context.Background(), 30); err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	saved := make([][]byte, opt.Chains)
	var mu sync.Mutex
	cut := opt
	cut.Checkpoint = func(chain int, b []byte) error {
		mu.Lock()
		defer mu.Unlock()
		saved[chain] = slices.Clone(b)
		return nil
	}
	cut.Progress = func(chain, chains, done, total int) {
		if chain == 1 && done == 70 {
			cancel()
		}
	}
	first, err := Start(ctx, l, cut)
	if err != nil {
		t.Fatal(err)
	}
	if !first.Result().Incomplete {
		t.Fatal("cancelled run not marked incomplete")
	}
	r, err := Resume(context.Background(), l, opt, saved)
	if err != nil {
		t.Fatal(err)
	}
	if err := r.Extend(context.Background(), 30); err != nil {
		t.Fatal(err)
	}
	for ch := range full.Result().Draws {
		if !slices.Equal(full.Result().Draws[ch], r.Result().Draws[ch]) {
			t.Errorf("chain %d: draws after cancel, resume and extension differ from the uninterrupted run", ch+1)
		}
	}
	// A checkpoint is refused by a run with another seed, and by another chain.
	other := opt
	other.Seed++
	if _, err := Resume(context.Background(), l, other, saved); !errors.Is(err, ErrCheckpoint) {
		t.Errorf("checkpoint of another seed: got %v, want ErrCheckpoint", err)
	}
	swapped := []([]byte){saved[1], saved[0], saved[2]}
	if _, err := Resume(context.Background(), l, opt, swapped); !errors.Is(err, ErrCheckpoint) {
		t.Errorf("checkpoints of swapped chains: got %v, want ErrCheckpoint", err)
	}
	if _, err := Resume(context.Background(), l, opt, [][]byte{[]byte("not a checkpoint"), nil, nil}); !errors.Is(err, ErrCheckpoint) {
		t.Errorf("garbage checkpoint: got %v, want ErrCheckpoint", err)
	}
	// One flipped bit anywhere (here in the kept draws, deep in the file,
	// and in the header's checksum) is refused as damaged.
	for _, at := range []int{len(saved[0]) - 20, len(saved[0]) / 2, len(checkpointMagic) + 3} {
		bad := slices.Clone(saved[0])
		bad[at] ^= 0x10
		_, err := Resume(context.Background(), l, opt, [][]byte{bad, saved[1], saved[2]})
		if !errors.Is(err, ErrCheckpoint) || !strings.Contains(err.Error(), "damaged") {
			t.Errorf("bit flipped at byte %d of %d: got %v, want a damaged-checkpoint error", at, len(bad), err)
		}
	}
}
