package sampler

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/binary"
	"encoding/gob"
	"encoding/hex"
	"errors"
	"fmt"
	"math"
)

// A checkpoint is one chain's whole state between two sweeps: its random
// streams (the chain's and every shard's PCG state), every parameter and
// latent response, what the blocks have adapted, and the draws kept so
// far. Restoring it and sweeping on gives exactly the draws of a chain that
// was never stopped: the caches a sweep reads (precision blocks, within
// moments, WQuad) are recomputed from the saved values by the same code
// that computed them in the first place.

// checkpointFormat changes whenever the content of a checkpoint does.
const checkpointFormat = 1

// ErrCheckpoint marks a checkpoint that does not belong to the run it is
// given to (other data, model, seed or settings) or cannot be read.
var ErrCheckpoint = errors.New("checkpoint does not match this run")

// chainCheckpoint is what a checkpoint holds, gob-encoded.
type chainCheckpoint struct {
	Format      int
	Fingerprint string // of the layout and the options that shape the draws
	Chain       int
	Sweeps      int // sweeps done, warm-up included
	Target      int // kept draws per chain the run was heading for
	Kept        int
	Rng         []byte
	ShardRng    [][]byte

	Ystar, B, Mean, Nu, A, Sig, Psi []float64
	Tau, SD, R                      [][]float64

	Blocks         [][]byte // persist() values of each block, gob-encoded, in sweep order
	Draws, Derived []float64
}

// persistent is implemented by blocks that carry values from one sweep to
// the next (step sizes adapted during warm-up, counters); persist returns
// pointers to them, in a fixed order, for checkpoints.
type persistent interface {
	persist() []any
}

func (cb *CovBlock) persist() []any       { return []any{&cb.logStep, &cb.tries} }
func (tb *ThresholdBlock) persist() []any { return []any{&tb.logStep, &tb.tries} }
func (pb *PathBlock) persist() []any {
	return []any{&pb.Accepted, &pb.Proposed, &pb.logStep, &pb.Tries, &pb.Walked}
}
func (pb *LatentPathBlock) persist() []any { return []any{&pb.Bounces, &pb.Stuck} }

// fingerprint identifies the layout (model, data, parameter list) and the
// options that decide the draws (seed, chains, warm-up, block choice), so a
// checkpoint is never restored into another run.
func fingerprint(l *Layout, opt Options) string {
	h := sha256.New()
	h.Write(l.Spec.Raw)
	fmt.Fprintf(h, "\x00%s\x00%d %d %d %d\x00", l.Panel.SHA256, l.N, l.J, l.T, len(l.Panel.Y))
	for _, p := range l.Params() {
		fmt.Fprintf(h, "%s\x00", p.Name)
	}
	var b [8]byte
	binary.LittleEndian.PutUint64(b[:], opt.Seed)
	h.Write(b[:])
	fmt.Fprintf(h, "\x00%d %d %s %t", opt.Chains, opt.Warmup, opt.ThresholdUpdate, opt.PathMoves)
	return hex.EncodeToString(h.Sum(nil))
}

// checkpoint encodes chain c's current state.
func (r *Runner) checkpoint(c int) ([]byte, error) {
	ch := r.chains[c]
	st := ch.st
	cp := chainCheckpoint{Format: checkpointFormat, Fingerprint: r.fp, Chain: c, Sweeps: ch.sweeps,
		Target: r.res.Options.Draws, Kept: r.res.Kept[c],
		Ystar: st.Ystar, B: st.B, Mean: st.Mean, Nu: st.Nu, A: st.A, Sig: st.Sig, Psi: st.Psi,
		Tau: st.Tau, SD: st.SD, R: st.R, Draws: r.res.Draws[c], Derived: r.res.DerivedDraws[c]}
	var err error
	if cp.Rng, err = ch.src.MarshalBinary(); err != nil {
		return nil, err
	}
	for _, s := range st.shardSrc {
		b, err := s.MarshalBinary()
		if err != nil {
			return nil, err
		}
		cp.ShardRng = append(cp.ShardRng, b)
	}
	for _, b := range ch.blocks {
		var buf bytes.Buffer
		if p, ok := b.(persistent); ok {
			enc := gob.NewEncoder(&buf)
			for _, v := range p.persist() {
				if err := enc.Encode(v); err != nil {
					return nil, fmt.Errorf("checkpoint of block %q: %w", b.Name(), err)
				}
			}
		}
		cp.Blocks = append(cp.Blocks, buf.Bytes())
	}
	var out bytes.Buffer
	if err := gob.NewEncoder(&out).Encode(&cp); err != nil {
		return nil, err
	}
	return out.Bytes(), nil
}

// restore sets chain c to the state in data. It checks that data belongs
// to this run and has the right sizes before changing anything.
func (r *Runner) restore(c int, data []byte) (target int, err error) {
	var cp chainCheckpoint
	if err := gob.NewDecoder(bytes.NewReader(data)).Decode(&cp); err != nil {
		return 0, fmt.Errorf("%w: chain %d: not readable (%v)", ErrCheckpoint, c+1, err)
	}
	bad := func(what string) (int, error) {
		return 0, fmt.Errorf("%w: chain %d: %s", ErrCheckpoint, c+1, what)
	}
	switch {
	case cp.Format != checkpointFormat:
		return bad(fmt.Sprintf("written by another version of the format (%d, want %d)", cp.Format, checkpointFormat))
	case cp.Fingerprint != r.fp:
		return bad("written for other data, model, seed or sampler settings")
	case cp.Chain != c:
		return bad(fmt.Sprintf("holds chain %d", cp.Chain+1))
	}
	ch := r.chains[c]
	st := ch.st
	np, nd := len(r.res.Params), len(r.res.Derived)
	kept := max(cp.Sweeps-r.opt.Warmup, 0)
	if cp.Sweeps < 0 || cp.Kept != kept || cp.Target < kept || len(cp.Draws) != kept*np || len(cp.Derived) != kept*nd {
		return bad("its sweep and draw counts disagree")
	}
	for _, v := range [][2]int{{len(cp.Ystar), len(st.Ystar)}, {len(cp.B), len(st.B)}, {len(cp.Mean), len(st.Mean)},
		{len(cp.Nu), len(st.Nu)}, {len(cp.A), len(st.A)}, {len(cp.Sig), len(st.Sig)}, {len(cp.Psi), len(st.Psi)},
		{len(cp.Tau), len(st.Tau)}, {len(cp.SD), len(st.SD)}, {len(cp.R), len(st.R)},
		{len(cp.ShardRng), len(st.shardSrc)}, {len(cp.Blocks), len(ch.blocks)}} {
		if v[0] != v[1] {
			return bad("its sizes do not match the model")
		}
	}
	for j := range cp.Tau {
		if len(cp.Tau[j]) != len(st.Tau[j]) {
			return bad("its threshold counts do not match the model")
		}
	}
	for g := range cp.SD {
		if len(cp.SD[g]) != len(st.SD[g]) || len(cp.R[g]) != len(st.R[g]) {
			return bad("its covariance sizes do not match the model")
		}
	}
	for _, s := range [][]float64{cp.Ystar, cp.B, cp.Mean, cp.A, cp.Psi, cp.Draws} {
		for _, v := range s {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return bad("it holds values that are not finite")
			}
		}
	}
	if err := ch.src.UnmarshalBinary(cp.Rng); err != nil {
		return bad("its random stream is not readable")
	}
	for s, b := range cp.ShardRng {
		if err := st.shardSrc[s].UnmarshalBinary(b); err != nil {
			return bad("a shard's random stream is not readable")
		}
	}
	for k, b := range ch.blocks {
		p, ok := b.(persistent)
		if !ok {
			continue
		}
		dec := gob.NewDecoder(bytes.NewReader(cp.Blocks[k]))
		for _, v := range p.persist() {
			if err := dec.Decode(v); err != nil {
				return bad(fmt.Sprintf("block %q: not readable (%v)", b.Name(), err))
			}
		}
	}
	copy(st.Ystar, cp.Ystar)
	copy(st.B, cp.B)
	copy(st.Mean, cp.Mean)
	copy(st.Nu, cp.Nu)
	copy(st.A, cp.A)
	copy(st.Sig, cp.Sig)
	copy(st.Psi, cp.Psi)
	for j := range cp.Tau {
		copy(st.Tau[j], cp.Tau[j])
	}
	for g := range cp.SD {
		copy(st.SD[g], cp.SD[g])
		copy(st.R[g], cp.R[g])
	}
	st.Mom.ok = false
	if err := st.Refresh(); err != nil {
		return bad("its parameters are not valid: " + err.Error())
	}
	ch.sweeps = cp.Sweeps
	r.res.Kept[c] = cp.Kept
	r.res.Draws[c] = append(r.res.Draws[c][:0], cp.Draws...)
	r.res.DerivedDraws[c] = append(r.res.DerivedDraws[c][:0], cp.Derived...)
	return cp.Target, nil
}

// Resume rebuilds a run from its chains' checkpoints (nil for a chain that
// has none: it starts afresh, as it did in the first place) and samples on
// until every chain has the draws the run was heading for: opt.Draws, or
// more when a checkpoint was written in a later round of an extended run.
// The draws equal those of a run that was never stopped.
func Resume(ctx context.Context, l *Layout, opt Options, checkpoints [][]byte) (*Runner, error) {
	if len(checkpoints) != opt.Chains {
		return nil, fmt.Errorf("%w: %d chains, %d checkpoints", ErrCheckpoint, opt.Chains, len(checkpoints))
	}
	r := newRunner(l, opt, nil)
	target := opt.Draws
	for c, data := range checkpoints {
		if data == nil {
			continue
		}
		t, err := r.restore(c, data)
		if err != nil {
			return nil, err
		}
		target = max(target, t)
	}
	r.res.Options.Draws = target
	return r, r.run(ctx)
}
