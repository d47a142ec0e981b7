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
	"slices"
)

// A checkpoint is one chain's whole state between two sweeps: its random
// streams (the chain's and every shard's PCG state), every parameter and
// latent response, what the blocks have adapted, and the draws kept so
// far. Restoring it and sweeping on gives exactly the draws of a chain that
// was never stopped: the caches a sweep reads (precision blocks, within
// moments, WQuad) are recomputed from the saved values by the same code
// that computed them in the first place.

// checkpointFormat changes whenever the content of a checkpoint does.
const checkpointFormat = 2

// checkpointMagic opens every checkpoint; the SHA-256 of the gob payload
// follows it, then the payload: a checkpoint damaged on disk (one flipped
// bit) is refused before anything in it is used.
const checkpointMagic = "lagstar checkpoint\x00"

// ErrCheckpoint marks a checkpoint that does not belong to the run it is
// given to (other data, model, seed or settings) or cannot be read.
var ErrCheckpoint = errors.New("checkpoint does not match this run")

// SaveError reports that a checkpoint could not be handed over (written):
// the chain stopped there, and its earlier checkpoints still stand.
type SaveError struct {
	Chain, Sweep int
	Err          error
}

func (e *SaveError) Error() string {
	return fmt.Sprintf("checkpoint of chain %d after sweep %d: %v", e.Chain+1, e.Sweep, e.Err)
}

func (e *SaveError) Unwrap() error { return e.Err }

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

	// Long vectors are packed as little-endian IEEE 754 bytes (packFloats):
	// gob encodes floats one by one, which made a checkpoint of a diary
	// panel cost tens of sweeps.
	Ystar, B, Mean, Nu, A, Sig, Psi []byte
	// M holds the moving-average coefficients (State.M); absent (nil) in
	// checkpoints of models without them, which then stay at 0.
	M          []byte
	Tau, SD, R [][]float64
	// Own holds each active term's per-term values (State.Own), in
	// Layout.Terms order; empty in checkpoints of layouts without any.
	Own [][]float64

	Blocks         [][]byte // AdaptState() values of each block, gob-encoded, in sweep order
	Draws, Derived []byte
}

// packFloats returns x as little-endian IEEE 754 bytes.
func packFloats(x []float64) []byte {
	b := make([]byte, 8*len(x))
	for i, v := range x {
		binary.LittleEndian.PutUint64(b[8*i:], math.Float64bits(v))
	}
	return b
}

// unpackFloats decodes b into a new slice; ok is false when its length is
// not a multiple of 8.
func unpackFloats(b []byte) ([]float64, bool) {
	if len(b)%8 != 0 {
		return nil, false
	}
	x := make([]float64, len(b)/8)
	for i := range x {
		x[i] = math.Float64frombits(binary.LittleEndian.Uint64(b[8*i:]))
	}
	return x, true
}

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
	// The person order decides which latent responses and intercepts a
	// checkpoint's vectors belong to.
	for _, id := range l.Panel.Persons {
		fmt.Fprintf(h, "%s\x00", id)
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
		Ystar: packFloats(st.Ystar), B: packFloats(st.B), Mean: packFloats(st.Mean), Nu: packFloats(st.Nu), A: packFloats(st.A),
		Sig: packFloats(st.Sig), Psi: packFloats(st.Psi), Tau: st.Tau, SD: st.SD, R: st.R, Own: st.own,
		Draws: packFloats(r.res.Draws[c]), Derived: packFloats(r.res.DerivedDraws[c])}
	if st.L.MA {
		cp.M = packFloats(st.M)
	}
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
		if p, ok := b.(Adaptive); ok {
			enc := gob.NewEncoder(&buf)
			for _, v := range p.AdaptState() {
				if err := enc.Encode(v); err != nil {
					return nil, fmt.Errorf("checkpoint of block %q: %w", b.Name(), err)
				}
			}
		}
		cp.Blocks = append(cp.Blocks, buf.Bytes())
	}
	var payload bytes.Buffer
	if err := gob.NewEncoder(&payload).Encode(&cp); err != nil {
		return nil, err
	}
	sum := sha256.Sum256(payload.Bytes())
	out := make([]byte, 0, len(checkpointMagic)+len(sum)+payload.Len())
	out = append(append(append(out, checkpointMagic...), sum[:]...), payload.Bytes()...)
	return out, nil
}

// restore sets chain c to the state in data. It checks that data belongs
// to this run and has the right sizes before changing anything.
func (r *Runner) restore(c int, data []byte) (target int, err error) {
	var cp chainCheckpoint
	head := len(checkpointMagic) + sha256.Size
	if len(data) < head || string(data[:len(checkpointMagic)]) != checkpointMagic {
		return 0, fmt.Errorf("%w: chain %d: not a lagstar checkpoint of this version", ErrCheckpoint, c+1)
	}
	if sum := sha256.Sum256(data[head:]); !bytes.Equal(sum[:], data[len(checkpointMagic):head]) {
		return 0, fmt.Errorf("%w: chain %d: the file is damaged (its checksum does not match); delete it to restart that chain from the beginning, or fit anew", ErrCheckpoint, c+1)
	}
	if err := gob.NewDecoder(bytes.NewReader(data[head:])).Decode(&cp); err != nil {
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
	var vec [9][]float64 // Ystar, B, Mean, Nu, A, Sig, Psi, Draws, Derived
	for k, b := range [][]byte{cp.Ystar, cp.B, cp.Mean, cp.Nu, cp.A, cp.Sig, cp.Psi, cp.Draws, cp.Derived} {
		x, ok := unpackFloats(b)
		if !ok {
			return bad("a vector is cut short")
		}
		vec[k] = x
	}
	ystar, bb, mean, nu, a, sig, psi, draws, derived := vec[0], vec[1], vec[2], vec[3], vec[4], vec[5], vec[6], vec[7], vec[8]
	ma, ok := unpackFloats(cp.M)
	if !ok || (st.L.MA && len(ma) != len(st.M)) || (!st.L.MA && len(ma) != 0) {
		return bad("its moving-average coefficients do not fit the model")
	}
	kept := max(cp.Sweeps-r.opt.Warmup, 0)
	if cp.Sweeps < 0 || cp.Kept != kept || cp.Target < kept || len(draws) != kept*np || len(derived) != kept*nd {
		return bad("its sweep and draw counts disagree")
	}
	for _, v := range [][2]int{{len(ystar), len(st.Ystar)}, {len(bb), len(st.B)}, {len(mean), len(st.Mean)},
		{len(nu), len(st.Nu)}, {len(a), len(st.A)}, {len(sig), len(st.Sig)}, {len(psi), len(st.Psi)},
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
	if len(cp.Own) != 0 || slices.ContainsFunc(st.own, func(x []float64) bool { return len(x) > 0 }) {
		if len(cp.Own) != len(st.own) {
			return bad("its model terms do not match the model")
		}
		for k := range cp.Own {
			if len(cp.Own[k]) != len(st.own[k]) {
				return bad("its model terms' sizes do not match the model")
			}
		}
	}
	for g := range cp.SD {
		if len(cp.SD[g]) != len(st.SD[g]) || len(cp.R[g]) != len(st.R[g]) {
			return bad("its covariance sizes do not match the model")
		}
	}
	for _, s := range [][]float64{ystar, bb, mean, a, psi, draws} {
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
		p, ok := b.(Adaptive)
		if !ok {
			continue
		}
		dec := gob.NewDecoder(bytes.NewReader(cp.Blocks[k]))
		for _, v := range p.AdaptState() {
			if err := dec.Decode(v); err != nil {
				return bad(fmt.Sprintf("block %q: not readable (%v)", b.Name(), err))
			}
		}
	}
	copy(st.Ystar, ystar)
	copy(st.B, bb)
	copy(st.Mean, mean)
	copy(st.Nu, nu)
	copy(st.A, a)
	copy(st.Sig, sig)
	copy(st.Psi, psi)
	copy(st.M, ma)
	for j := range cp.Tau {
		copy(st.Tau[j], cp.Tau[j])
	}
	for g := range cp.SD {
		copy(st.SD[g], cp.SD[g])
		copy(st.R[g], cp.R[g])
	}
	for k := range cp.Own {
		copy(st.own[k], cp.Own[k])
	}
	st.Mom.ok = false
	if err := st.Refresh(); err != nil {
		return bad("its parameters are not valid: " + err.Error())
	}
	ch.sweeps = cp.Sweeps
	r.res.Kept[c] = cp.Kept
	r.res.Draws[c] = append(r.res.Draws[c][:0], draws...)
	r.res.DerivedDraws[c] = append(r.res.DerivedDraws[c][:0], derived...)
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
