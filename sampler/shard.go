package sampler

import (
	"fmt"
	"math/rand/v2"
	"runtime"
	"sync"
	"sync/atomic"
)

// Persons are split into shards fixed by the data (never by the number of
// cores): personsPerShard persons each, at most maxShards. Blocks that loop
// over persons run the shards on up to GOMAXPROCS goroutines; each shard
// has its own random stream (State.ShardRng) and scratch, and partial sums
// are combined in shard order, so a seed gives the same draws on 1 core or
// 64. Panels with fewer than 2*personsPerShard persons have one shard and
// run inline without goroutines (and without allocation).
const (
	personsPerShard = 2500
	maxShards       = 32
)

// shardBounds returns the first person of each shard and N at the end.
func shardBounds(n int) []int {
	s := min(max(n/personsPerShard, 1), maxShards)
	b := make([]int, s+1)
	for k := 0; k <= s; k++ {
		b[k] = k * n / s
	}
	return b
}

// shardRngs derives one stream per shard from the chain's stream. It
// returns the streams and their sources (whose states checkpoints save).
func shardRngs(rng *rand.Rand, shards int) ([]*rand.Rand, []*rand.PCG) {
	out := make([]*rand.Rand, shards)
	src := make([]*rand.PCG, shards)
	for s := range out {
		src[s] = rand.NewPCG(rng.Uint64(), rng.Uint64())
		out[s] = rand.New(src[s])
	}
	return out, src
}

// forShards runs fn for every shard of l's persons, [lo, hi), on up to
// GOMAXPROCS goroutines. fn must touch only its shard's persons, scratch
// and random stream.
func forShards(l *Layout, fn func(s, lo, hi int)) {
	S := len(l.ShardStart) - 1
	workers := min(S, runtime.GOMAXPROCS(0))
	if workers <= 1 {
		for s := 0; s < S; s++ {
			fn(s, l.ShardStart[s], l.ShardStart[s+1])
		}
		return
	}
	var next atomic.Int64
	var wg sync.WaitGroup
	var failed atomic.Value // the first panic of a worker, raised again below
	for range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			defer func() {
				if p := recover(); p != nil {
					failed.CompareAndSwap(nil, fmt.Sprint(p))
				}
			}()
			for {
				s := int(next.Add(1) - 1)
				if s >= S {
					return
				}
				fn(s, l.ShardStart[s], l.ShardStart[s+1])
			}
		}()
	}
	wg.Wait()
	if p := failed.Load(); p != nil {
		panic(p) // in the chain's goroutine, whose recover reports it
	}
}

// shardBufs allocates one buffer of length n per shard.
func shardBufs(l *Layout, n int) [][]float64 {
	out := make([][]float64, len(l.ShardStart)-1)
	for s := range out {
		out[s] = make([]float64, n)
	}
	return out
}
