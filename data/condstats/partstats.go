package condstats

import (
	"fmt"
	"math"
	"runtime"

	"github.com/strialab/stria/data/format"
)

// NoPart marks a trial that belongs to no part of a StreamPlan.
const NoPart = -1

// PartSpec says which statistics AccumulateParts keeps for one part beyond
// the counts, the per-condition sums and the per-neuron sums of squares
// that every part gets.
type PartSpec struct {
	// Halves keeps the split-half sums CountA and SumA (the held-out part,
	// for split-half reliability).
	Halves bool
	// CondSquares keeps the sums of squares per condition (SumSq, B x N).
	// Without it only the per-neuron totals (TotSq) are kept. Scoring a
	// held-out part needs it (the noise variance of eval is the mean of
	// the per-condition variances); fitting needs only the totals.
	CondSquares bool
}

// StreamPlan assigns every trial (row) of a recording to a part and a
// condition for AccumulateParts.
type StreamPlan struct {
	NBins int
	// Cond[t] in [0, NBins) is the condition of trial t; it is read only
	// for trials that belong to a part.
	Cond []int
	// Part[t] in [0, len(Specs)) is the part of trial t, or NoPart.
	Part []int
	// Specs holds one entry per part.
	Specs []PartSpec
	// AllHalves also keeps the split-half sums over all the trials of
	// all parts (the split-half reliability over all trials): within each
	// condition the trials of every part, in ascending index order, are
	// dealt alternately to half A and half B. AccumulateParts then returns
	// one more PartStats after the parts, holding Count, CountA, Ref,
	// RefCond and SumA of that dealing (Sum, TotSq and SumSq nil), with
	// Ref the response of the first trial of any part. Half B's sums
	// follow from the parts': per condition b and neuron n, sum over parts
	// p of Sum_pbn + N_pb (r_pn - Ref_n), minus SumA_bn.
	AllHalves bool
}

// PartOf returns the part of each of T trials: trials listed in sets[i]
// belong to part i, the others to NoPart. For stria fit the sets are the
// training, validation and test trials. The error names a trial listed
// twice or out of range.
func PartOf(T int, sets ...[]int) ([]int, error) {
	part := make([]int, T)
	for t := range part {
		part[t] = NoPart
	}
	for i, set := range sets {
		for _, t := range set {
			if t < 0 || t >= T {
				return nil, fmt.Errorf("data: trial %d (0-based) of part %d is outside the recording's %d trials", t, i, T)
			}
			if part[t] != NoPart {
				return nil, fmt.Errorf("data: trial %d (0-based) is in part %d and in part %d", t, part[t], i)
			}
			part[t] = i
		}
	}
	return part, nil
}

// PartStats are the sufficient statistics of one part of a recording's
// trials (eval/methods.md §8), all in float64, for condition b and neuron n:
//
//	Count[b]     N_b, the part's trials of condition b
//	Ref[n]       r_n, the response of the part's first trial (lowest index)
//	RefCond      the condition of that trial (-1 for a part with no trials)
//	Sum[b*N+n]   sum over the part's trials t of condition b of (y_tn - r_n)
//	TotSq[n]     sum over all the part's trials of (y_tn - r_n)^2
//	SumSq[b*N+n] sum over the part's trials of condition b of (y_tn - r_n)^2
//	             (only with PartSpec.CondSquares, else nil)
//	CountA[b], SumA[b*N+n]  the same count and sum over half A only (only
//	             with PartSpec.Halves, else nil)
//
// The sums are taken relative to Ref so that a neuron constant over the
// part has exactly zero sums, and the one-pass sums of squares lose no
// precision to a large offset. Every element is summed in ascending trial
// order. Split halves: within each condition the part's trials in
// ascending index order are dealt alternately to half A (1st, 3rd, ...)
// and half B (2nd, 4th, ...), as eval.ScorePopulation deals its (sorted)
// held-out trials and train.SplitHalf deals trials; half B's count and sum
// are Count - CountA and Sum - SumA.
//
// The field names match eval.HeldOutSums, which scores a one-hot model
// from a PartStats with CondSquares and Halves.
type PartStats struct {
	B, N    int
	Trials  int // sum of Count
	Count   []int
	Ref     []float64
	RefCond int
	Sum     []float64
	TotSq   []float64
	SumSq   []float64
	CountA  []int
	SumA    []float64
}

func (ps *PartStats) dstBN(dst []float64, fn string) []float64 {
	if dst == nil {
		return make([]float64, ps.B*ps.N)
	}
	if len(dst) != ps.B*ps.N {
		panic(fmt.Sprintf("data: PartStats.%s dst length %d, want B*N = %d", fn, len(dst), ps.B*ps.N))
	}
	return dst
}

func (ps *PartStats) dstN(dst []float64, fn string) []float64 {
	if dst == nil {
		return make([]float64, ps.N)
	}
	if len(dst) != ps.N {
		panic(fmt.Sprintf("data: PartStats.%s dst length %d, want N = %d", fn, len(dst), ps.N))
	}
	return dst
}

// Means writes the condition means ybar_bn = r_n + Sum_bn / N_b into dst
// (B x N; allocated if nil) and returns it; empty conditions give NaN.
// dst may be ps.Sum (the sums are then replaced by the means, saving B x N
// values at a million neurons). It panics if dst is not nil and not of
// length B*N.
func (ps *PartStats) Means(dst []float64) []float64 {
	dst = ps.dstBN(dst, "Means")
	N := ps.N
	for b, k := range ps.Count {
		d := dst[b*N : (b+1)*N]
		if k == 0 {
			for n := range d {
				d[n] = math.NaN()
			}
			continue
		}
		inv := 1 / float64(k)
		for n, s := range ps.Sum[b*N : (b+1)*N] {
			d[n] = ps.Ref[n] + s*inv
		}
	}
	return dst
}

// Sums writes the absolute per-condition sums S_bn = Sum_bn + N_b r_n
// (Stats.Sum; what the Poisson fast path needs) into dst (B x N;
// allocated if nil) and returns it; empty conditions give 0. dst may be
// ps.Sum. It panics like Means.
func (ps *PartStats) Sums(dst []float64) []float64 {
	dst = ps.dstBN(dst, "Sums")
	N := ps.N
	for b, k := range ps.Count {
		d := dst[b*N : (b+1)*N]
		c := float64(k)
		for n, s := range ps.Sum[b*N : (b+1)*N] {
			d[n] = s + c*ps.Ref[n]
		}
	}
	return dst
}

// grandRel writes sum_b Sum_bn / Trials (the grand mean minus Ref) into
// dst, summing over conditions in ascending order.
func (ps *PartStats) grandRel(dst []float64) {
	clear(dst)
	N := ps.N
	for b, k := range ps.Count {
		if k == 0 {
			continue
		}
		for n, s := range ps.Sum[b*N : (b+1)*N] {
			dst[n] += s
		}
	}
	inv := 1 / float64(ps.Trials)
	for n := range dst {
		dst[n] *= inv
	}
}

// GrandMean writes each neuron's mean over all the part's trials,
// ybar_n = r_n + sum_b Sum_bn / Trials, into dst (N; allocated if nil) and
// returns it. NaN for a part with no trials. It panics if dst is not nil
// and not of length N.
func (ps *PartStats) GrandMean(dst []float64) []float64 {
	dst = ps.dstN(dst, "GrandMean")
	if ps.Trials == 0 {
		for n := range dst {
			dst[n] = math.NaN()
		}
		return dst
	}
	ps.grandRel(dst)
	for n := range dst {
		dst[n] += ps.Ref[n]
	}
	return dst
}

// CentredMeans writes ybar_bn - ybar_n, each condition mean minus the
// neuron's grand mean over the part (the trial-weighted mean of the
// condition means), into dst (B x N; allocated if nil) and returns it;
// empty conditions give NaN. This is Yc of train's projected solver
// before z-scoring. dst may be ps.Sum, as for Means; call GrandMean and
// the other per-neuron methods first then. It panics like Means.
func (ps *PartStats) CentredMeans(dst []float64) []float64 {
	dst = ps.dstBN(dst, "CentredMeans")
	g := make([]float64, ps.N)
	if ps.Trials > 0 {
		ps.grandRel(g)
	}
	N := ps.N
	for b, k := range ps.Count {
		d := dst[b*N : (b+1)*N]
		if k == 0 {
			for n := range d {
				d[n] = math.NaN()
			}
			continue
		}
		inv := 1 / float64(k)
		for n, s := range ps.Sum[b*N : (b+1)*N] {
			d[n] = s*inv - g[n]
		}
	}
	return dst
}

// WithinSS writes each neuron's within-condition sum of squares,
//
//	sum_b sum_{t in b} (y_tn - ybar_bn)^2 = TotSq_n - sum_b Sum_bn^2 / N_b,
//
// into dst (N; allocated if nil) and returns it; tiny negative results of
// rounding are set to 0. Only per-neuron totals of squares are needed.
// It panics like GrandMean.
func (ps *PartStats) WithinSS(dst []float64) []float64 {
	dst = ps.dstN(dst, "WithinSS")
	copy(dst, ps.TotSq)
	N := ps.N
	for b, k := range ps.Count {
		if k == 0 {
			continue
		}
		inv := 1 / float64(k)
		for n, s := range ps.Sum[b*N : (b+1)*N] {
			dst[n] -= s * s * inv
		}
	}
	for n, v := range dst {
		dst[n] = max(v, 0)
	}
	return dst
}

// TotalSS writes each neuron's sum of squares about its grand mean over
// the part, TotSq_n - (sum_b Sum_bn)^2 / Trials, into dst (N; allocated if
// nil) and returns it; tiny negative results of rounding are set to 0 and
// a part with no trials gives 0. It panics like GrandMean.
func (ps *PartStats) TotalSS(dst []float64) []float64 {
	dst = ps.dstN(dst, "TotalSS")
	if ps.Trials == 0 {
		clear(dst)
		return dst
	}
	ps.grandRel(dst)
	for n, g := range dst {
		dst[n] = max(ps.TotSq[n]-g*g*float64(ps.Trials), 0)
	}
	return dst
}

// Stats converts the statistics of a part kept with CondSquares to a
// Stats (absolute sums, Sum_b + N_b r and SumSq_b + 2 r Sum_b + N_b
// r^2), for code written against Stats. It panics if the part was
// accumulated without CondSquares.
func (ps *PartStats) Stats() *Stats {
	if ps.SumSq == nil {
		panic("data: PartStats.Stats needs a part accumulated with CondSquares")
	}
	N := ps.N
	cs := &Stats{B: ps.B, N: N, Count: append([]int(nil), ps.Count...),
		Sum: make([]float64, ps.B*N), SumSq: make([]float64, ps.B*N)}
	for b, k := range ps.Count {
		if k == 0 {
			continue
		}
		c := float64(k)
		for n := 0; n < N; n++ {
			r, s, q := ps.Ref[n], ps.Sum[b*N+n], ps.SumSq[b*N+n]
			cs.Sum[b*N+n] = s + c*r
			cs.SumSq[b*N+n] = q + 2*r*s + c*r*r
		}
	}
	return cs
}

// NormalizerFromParts is NormalizerFromStats for PartStats: the z-scoring
// (ddof 0) of all the trials of the given parts, from their sums alone.
// The mean is the trial-weighted mean of the parts' grand means; the sum
// of squares adds each part's TotalSS and Trials (part mean - mean)^2. A
// neuron whose standard deviation is not above 1e-6 of its mean magnitude
// counts as constant and gets Scale 1, as in NormalizerFromStats. It
// panics if no part has a trial or the parts differ in N.
func NormalizerFromParts(parts ...*PartStats) *Normalizer {
	N := parts[0].N
	z := &Normalizer{Mean: make([]float64, N), Scale: make([]float64, N)}
	total := 0
	means := make([][]float64, len(parts))
	for i, ps := range parts {
		if ps.N != N {
			panic(fmt.Sprintf("data: NormalizerFromParts parts of %d and %d neurons", N, ps.N))
		}
		total += ps.Trials
		if ps.Trials == 0 {
			continue
		}
		means[i] = ps.GrandMean(nil)
		w := float64(ps.Trials)
		for n, m := range means[i] {
			z.Mean[n] += w * m
		}
	}
	if total == 0 {
		panic("data: NormalizerFromParts with no trials")
	}
	for n := range z.Mean {
		z.Mean[n] /= float64(total)
	}
	ss := make([]float64, N)
	for i, ps := range parts {
		if ps.Trials == 0 {
			continue
		}
		ps.TotalSS(ss)
		w := float64(ps.Trials)
		for n, v := range ss {
			d := means[i][n] - z.Mean[n]
			z.Scale[n] += v + w*d*d
		}
	}
	for n, v := range z.Scale {
		sd := math.Sqrt(max(v, 0) / float64(total))
		if !(sd > 1e-6*math.Abs(z.Mean[n])) || math.IsInf(sd, 0) {
			sd = 1
		}
		z.Scale[n] = sd
	}
	return z
}

// defaultBlockBytes is the default size of a block buffer.
var defaultBlockBytes = 2 << 20

// streamReaders is the number of goroutines reading blocks in
// AccumulateParts, each with two buffers.
const streamReaders = 2

// Past the page cache (format.DirectReader) the disk is kept busy by
// directReaders reads of directBlockBytes in flight (whole rows, at
// least one): the kernel then copies nothing, so the reads cost no CPU
// and the buffers' size, not the L3 cache, matters. Measured on the
// 18.4 GB benchmark recording (1,000,000 neurons; one run each, the disk
// varying by 30 % from minute to minute): 4 reads of 16 MiB 18.7-19.0 s,
// 4 of 32 MiB 16.7 s, 8 of 16 MiB 16.1 s, against 25-30 s and 34-45 s of
// kernel CPU for two readers of 32 MiB through the page cache.
const (
	directReaders    = 4
	directBlockBytes = 32 << 20
)

// ReadPath chooses how AccumulateParts reads the file.
type ReadPath int

const (
	// ReadAuto reads past the page cache where format.NPYStream.Direct
	// allows it on its own (a large file mostly not in the cache), else
	// through it.
	ReadAuto ReadPath = iota
	// ReadDirect reads past the page cache wherever the stream and the
	// file system allow it, whatever the file's size (for tests).
	ReadDirect
	// ReadCached reads through the page cache.
	ReadCached
)

// StreamOptions tune AccumulateParts; the zero value is the default.
type StreamOptions struct {
	// BlockBytes is the size of one block buffer (0: 2 MiB, which the
	// buffers keep in the L3 cache between the read and the sums). Four
	// are used, two for each of the two readers; one is summed while the
	// others are read. A block is
	// whole rows when a row fits, else a span of one row of at least 256
	// neurons.
	BlockBytes int
	// Workers is the number of goroutines summing a block, each owning a
	// range of neurons (0: GOMAXPROCS). The result does not depend on it.
	Workers int
	// Read is the path of the reads; the result does not depend on it.
	// Past the page cache, BlockBytes does not apply.
	Read ReadPath
}

// AccumulateParts passes once over the rows of s and returns the
// statistics of each part of plan (one PartStats per Specs entry, in
// order). Memory is the parts' statistics (B x N float64 for Sum, and as
// much again for SumSq and for SumA where kept) plus four blocks of
// StreamOptions.BlockBytes; nothing is of size trials x neurons. At
// 1,000,000 neurons, 60 conditions and the three parts of a fit (the test
// part with halves and squares) that is 2.4 GB.
//
// Two goroutines read the next blocks (pread, alternate blocks) while the
// others sum the current one, each owning a fixed range of neurons, so
// every element is summed in ascending trial order whatever the number of
// workers: the result is the same on any machine for the same file and
// plan.
//
// Errors: a plan whose lengths do not match the file's rows, a condition
// or part out of range (the trial is named), a read error, and a
// non-finite response in a trial of a part (the neuron and trial are
// named; found after the pass from the sums, then located with one small
// read per trial).
func AccumulateParts(s *format.NPYStream, plan StreamPlan, opt StreamOptions) ([]*PartStats, error) {
	T, N := s.Rows(), s.Cols()
	acc, first, err := newAccumulator(&plan, T, N, s.Name())
	if err != nil {
		return nil, err
	}
	// The reference rows.
	row := make([]float32, N)
	for i, t := range first {
		if t < 0 {
			continue
		}
		if _, err := s.ReadRows32(row, t, t+1); err != nil {
			return nil, err
		}
		acc.setRef(i, row)
	}
	row = nil

	blockBytes := opt.BlockBytes
	if blockBytes <= 0 {
		blockBytes = defaultBlockBytes
	}
	var direct *format.DirectReader
	if opt.Read != ReadCached {
		direct = s.Direct(opt.Read == ReadDirect)
	}
	nReaders := streamReaders
	if direct != nil {
		defer direct.Close()
		blockBytes, nReaders = directBlockBytes, directReaders
	}
	// A block is rows [lo, hi) x neurons [c0, c1): whole rows when a row
	// fits in a block (past the page cache, always), else spans of one
	// row.
	R := max(1, blockBytes/max(4*N, 1))
	R = min(R, max(T, 1))
	W := N
	if R == 1 && direct == nil {
		W = min(N, max(blockBytes/4, 256))
	}
	// The blocks, in the order they are summed.
	type block struct {
		lo, hi, c0, c1, buf int
		data                []float32 // the block's values, once read
		err                 error
	}
	var blocks []block
	for lo := 0; lo < T; lo += R {
		hi := min(lo+R, T)
		if !acc.anyPart(lo, hi) {
			continue
		}
		for c0 := 0; c0 < N; c0 += W {
			blocks = append(blocks, block{lo: lo, hi: hi, c0: c0, c1: min(c0+W, N)})
		}
	}
	// streamReaders goroutines read them, reader r the blocks r, r +
	// streamReaders, ..., each into its own two buffers, so that the
	// kernel's share of a read from the disk (a core's worth at a
	// gigabyte per second) is spread over the cores too; the blocks are
	// summed in order, one at a time.
	type reader struct {
		bufs  [2][]float32
		dbufs [2][]byte // past the page cache
		free  chan int
		full  chan block
	}
	readers := make([]*reader, min(nReaders, max(len(blocks), 1)))
	done := make(chan struct{})
	for r := range readers {
		rd := &reader{free: make(chan int, 2), full: make(chan block, 2)}
		if direct != nil {
			rd.dbufs = [2][]byte{direct.Buffer(R), direct.Buffer(R)}
		} else {
			rd.bufs = [2][]float32{make([]float32, R*W), make([]float32, R*W)}
		}
		rd.free <- 0
		rd.free <- 1
		readers[r] = rd
		go func() {
			defer close(rd.full)
			for k := r; k < len(blocks); k += len(readers) {
				bk := blocks[k]
				select {
				case bk.buf = <-rd.free:
				case <-done:
					return
				}
				if direct != nil { // whole rows (W = N)
					bk.data, bk.err = direct.ReadRows32(rd.dbufs[bk.buf], bk.lo, bk.hi)
				} else {
					bk.data = rd.bufs[bk.buf][:(bk.hi-bk.lo)*(bk.c1-bk.c0)]
					bk.err = s.ReadSpan32(bk.data, bk.lo, bk.c0)
				}
				rd.full <- bk
				if bk.err != nil {
					return
				}
			}
		}()
	}
	for k := range blocks {
		rd := readers[k%len(readers)]
		bk, ok := <-rd.full
		if !ok { // cannot happen: a reader stops early only after an error, summed first
			err = fmt.Errorf("data: %s: the read of block %d stopped early", s.Name(), k)
			break
		}
		if bk.err != nil {
			err = bk.err
			break
		}
		if err = acc.addParallel(bk.data, bk.lo, bk.hi, bk.c0, bk.c1, opt.Workers); err != nil {
			break
		}
		rd.free <- bk.buf
	}
	close(done)
	for _, rd := range readers { // let the readers finish
		for range rd.full {
		}
	}
	if err != nil {
		return nil, err
	}
	if p, n := acc.finish(); p >= 0 {
		return nil, nonFiniteErr(s, plan.Part, p, n)
	}
	return acc.result(), nil
}

// AccumulatePartsMatrix is AccumulateParts for a recording already in
// memory: the same statistics, summed in the same order from the same
// reference trials, so bitwise equal to those of the file y was read from.
// It lets an in-memory fit use the numbers a streamed fit of the same file
// uses. Errors as for AccumulateParts (the file named "responses"), and
// the *format.FaultError of a mapped y whose file is truncated during the pass.
func AccumulatePartsMatrix(y *format.Matrix, plan StreamPlan, opt StreamOptions) ([]*PartStats, error) {
	acc, first, err := newAccumulator(&plan, y.Rows, y.Cols, "responses")
	if err != nil {
		return nil, err
	}
	if err := format.Guard(func() {
		for i, t := range first {
			if t >= 0 {
				acc.setRef(i, y.Row(t))
			}
		}
	}); err != nil {
		return nil, err
	}
	if err := acc.addParallel(y.Data, 0, y.Rows, 0, y.Cols, opt.Workers); err != nil {
		return nil, err
	}
	if p, n := acc.finish(); p >= 0 {
		for t, q := range plan.Part {
			if v := y.Data[t*y.Cols+n]; q == p && !isFinite32(v) {
				return nil, fmt.Errorf("data: responses: neuron %d (0-based) has a non-finite response (%v) in trial %d (0-based); remove or fix it before fitting", n, v, t)
			}
		}
		return nil, fmt.Errorf("data: responses: neuron %d (0-based) has sums of squares too large for float64", n)
	}
	return acc.result(), nil
}

// newAccumulator checks plan against a recording of T trials and N
// neurons (errors name the file called name), counts each part's trials
// per condition, deals the split halves and allocates the statistics. It
// returns the first trial of each part (-1 for none), whose row setRef
// must be given before any add.
func newAccumulator(plan *StreamPlan, T, N int, name string) (*accumulator, []int, error) {
	B := plan.NBins
	if len(plan.Cond) != T || len(plan.Part) != T {
		return nil, nil, fmt.Errorf("data: %s has %d trials (rows), but the plan has %d conditions and %d part labels", name, T, len(plan.Cond), len(plan.Part))
	}
	if B < 1 {
		return nil, nil, fmt.Errorf("data: %s: the plan has %d conditions; need at least 1", name, B)
	}
	P := len(plan.Specs)
	parts := make([]*PartStats, P)
	first := make([]int, P)
	for i := range parts {
		parts[i] = &PartStats{B: B, N: N, Count: make([]int, B), RefCond: -1}
		first[i] = -1
	}
	// half[t]: trial t goes to half A of its part's condition.
	half := make([]bool, T)
	var all *PartStats
	var allHalf []bool
	var allCntA [][]int
	if plan.AllHalves {
		all = &PartStats{B: B, N: N, Count: make([]int, B), CountA: make([]int, B), RefCond: -1}
		allHalf = make([]bool, T)
		allCntA = make([][]int, P)
		for i := range allCntA {
			allCntA[i] = make([]int, B)
		}
	}
	for t, p := range plan.Part {
		if p == NoPart {
			continue
		}
		if p < 0 || p >= P {
			return nil, nil, fmt.Errorf("data: %s: trial %d (0-based) has part %d, outside [0, %d)", name, t, p, P)
		}
		c := plan.Cond[t]
		if c < 0 || c >= B {
			return nil, nil, fmt.Errorf("data: %s: trial %d (0-based) has condition %d, outside [0, %d)", name, t, c, B)
		}
		ps := parts[p]
		half[t] = ps.Count[c]%2 == 0
		ps.Count[c]++
		ps.Trials++
		if first[p] < 0 {
			first[p] = t
			ps.RefCond = c
		}
		if all != nil {
			allHalf[t] = all.Count[c]%2 == 0
			if allHalf[t] {
				all.CountA[c]++
				allCntA[p][c]++
			}
			all.Count[c]++
			all.Trials++
			if all.RefCond < 0 {
				all.RefCond = c
				first = append(first, t) // the reference row of all
			}
		}
	}
	if all != nil && all.RefCond < 0 {
		first = append(first, -1)
	}
	big := func(n int) []float64 {
		v := make([]float64, n)
		adviseHuge(v)
		return v
	}
	for i, ps := range parts {
		ps.Ref = make([]float64, N)
		ps.TotSq = make([]float64, N)
		ps.Sum = big(B * N)
		if plan.Specs[i].CondSquares {
			ps.SumSq = big(B * N)
		}
		if plan.Specs[i].Halves {
			ps.SumA = big(B * N)
			ps.CountA = make([]int, B)
			for c, k := range ps.Count {
				ps.CountA[c] = (k + 1) / 2
			}
		}
	}
	if all != nil {
		all.Ref = make([]float64, N)
		all.SumA = big(B * N)
	}
	return &accumulator{parts: parts, plan: plan, half: half, N: N, all: all, allHalf: allHalf, allCntA: allCntA}, first, nil
}

// setRef sets part i's reference to row (i == len(parts): the reference
// of the dealing over all trials).
func (a *accumulator) setRef(i int, row []float32) {
	ref := a.all.refOf(i, a.parts)
	for n, v := range row {
		ref[n] = float64(v)
	}
}

// refOf returns the reference of part i, or of all (receiver) for i ==
// len(parts).
func (all *PartStats) refOf(i int, parts []*PartStats) []float64 {
	if i < len(parts) {
		return parts[i].Ref
	}
	return all.Ref
}

// result returns the parts, followed by the dealing over all trials when
// kept.
func (a *accumulator) result() []*PartStats {
	if a.all == nil {
		return a.parts
	}
	return append(a.parts[:len(a.parts):len(a.parts)], a.all)
}

// addParallel adds the values held in y, rows [lo, hi) x neurons
// [y0, y1) (element (t, n) at (t-lo)*(y1-y0) + n-y0), over workers
// goroutines (0: GOMAXPROCS, at most one per 256 neurons), each owning a
// range of neurons. The goroutines run under format.Guard: a mapped y whose file
// is truncated during the pass gives a *format.FaultError, not a crash.
func (a *accumulator) addParallel(y []float32, lo, hi, y0, y1, workers int) error {
	w := y1 - y0
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	workers = max(1, min(workers, w/256))
	chunk := (w + workers - 1) / workers
	var g format.GuardGroup
	for c0 := y0; c0 < y1; c0 += chunk {
		c1 := min(c0+chunk, y1)
		g.Go(func() { a.add(y, lo, hi, y0, y1, c0, c1) })
	}
	return g.Wait()
}

// finish forms TotSq of the parts kept with CondSquares and returns the
// first part and neuron whose sums are not finite, or -1, -1.
func (a *accumulator) finish() (part, neuron int) {
	N := a.N
	if all := a.all; all != nil {
		// SumA holds sums of y - r_p over the half-A trials of each part p:
		// add N_pb (r_p - r_all) to refer them to all.Ref.
		for p, ps := range a.parts {
			for b, k := range a.allCntA[p] {
				if k == 0 {
					continue
				}
				c := float64(k)
				sa := all.SumA[b*N : (b+1)*N]
				for n := range sa {
					sa[n] += c * (ps.Ref[n] - all.Ref[n])
				}
			}
		}
	}
	for i, ps := range a.parts {
		if ps.SumSq != nil {
			for b := 0; b < ps.B; b++ {
				for n, q := range ps.SumSq[b*N : (b+1)*N] {
					ps.TotSq[n] += q
				}
			}
		}
		for n, q := range ps.TotSq {
			if math.IsNaN(q) || math.IsInf(q, 0) {
				return i, n
			}
		}
	}
	return -1, -1
}

// nonFiniteErr names the first trial of part p whose response of neuron n
// is not finite.
func nonFiniteErr(s *format.NPYStream, part []int, p, n int) error {
	for t, q := range part {
		if q != p {
			continue
		}
		v, err := s.ReadElem(t, n)
		if err != nil {
			return err
		}
		if !isFinite32(v) {
			return fmt.Errorf("data: %s: neuron %d (0-based) has a non-finite response (%v) in trial %d (0-based); remove or fix it before fitting", s.Name(), n+s.ColumnOffset(), v, t)
		}
	}
	return fmt.Errorf("data: %s: neuron %d (0-based) has sums of squares too large for float64", s.Name(), n+s.ColumnOffset())
}

// accumulator sums row blocks into parts.
type accumulator struct {
	parts []*PartStats
	plan  *StreamPlan
	half  []bool
	N     int
	// With plan.AllHalves: all holds the dealing over all trials; allHalf[t]
	// says trial t goes to its half A. Its SumA is summed relative to each
	// trial's own part reference and corrected to all.Ref by finish.
	all     *PartStats
	allHalf []bool
	allCntA [][]int // [part][condition] trials of half A (all trials) per part
}

// anyPart reports whether a trial of [lo, hi) belongs to a part.
func (a *accumulator) anyPart(lo, hi int) bool {
	for _, p := range a.plan.Part[lo:hi] {
		if p != NoPart {
			return true
		}
	}
	return false
}

// add sums the values held in y, rows [lo, hi) x neurons [y0, y1), into
// neurons [c0, c1) (within [y0, y1)) of every part's statistics, the rows
// in ascending order, so that every element is summed in ascending trial
// order whatever the block and worker boundaries. (Column tiles sized for
// the L2 cache, and rows grouped by condition within larger blocks, were
// measured at 4,600 x 24,000 and gained nothing beyond the noise: the
// cost is the arithmetic, about 1 ns per value and core, and the B x N
// accumulators.)
func (a *accumulator) add(y []float32, lo, hi, y0, y1, c0, c1 int) {
	N := a.N
	w := c1 - c0
	yw := y1 - y0
	for t := lo; t < hi; t++ {
		p := a.plan.Part[t]
		if p == NoPart {
			continue
		}
		ps := a.parts[p]
		b := a.plan.Cond[t]
		o := b*N + c0
		r := (t-lo)*yw + c0 - y0
		row := y[r : r+w : r+w]
		ref := ps.Ref[c0:c1:c1]
		sum := ps.Sum[o : o+w : o+w]
		var sq []float64
		if ps.SumSq != nil {
			sq = ps.SumSq[o : o+w : o+w]
		} else {
			sq = ps.TotSq[c0:c1:c1]
		}
		var allA []float64
		if a.all != nil && a.allHalf[t] {
			allA = a.all.SumA[o : o+w : o+w]
		}
		switch {
		case ps.SumA != nil && a.half[t] && allA != nil:
			addRowHalf2(sum, sq, ps.SumA[o:o+w:o+w], allA, row, ref)
		case ps.SumA != nil && a.half[t]:
			addRowHalf(sum, sq, ps.SumA[o:o+w:o+w], row, ref)
		case allA != nil:
			addRowHalf(sum, sq, allA, row, ref)
		default:
			addRow(sum, sq, row, ref)
		}
	}
}

// addRow adds d = row - ref to sum and d^2 to sq.
func addRow(sum, sq []float64, row []float32, ref []float64) {
	sum = sum[:len(row)]
	sq = sq[:len(row)]
	ref = ref[:len(row)]
	for j, v := range row {
		d := float64(v) - ref[j]
		sum[j] += d
		sq[j] += d * d
	}
}

// addRowHalf is addRow that also adds d to sa.
func addRowHalf(sum, sq, sa []float64, row []float32, ref []float64) {
	sum = sum[:len(row)]
	sq = sq[:len(row)]
	sa = sa[:len(row)]
	ref = ref[:len(row)]
	for j, v := range row {
		d := float64(v) - ref[j]
		sum[j] += d
		sq[j] += d * d
		sa[j] += d
	}
}

// addRowHalf2 is addRowHalf that also adds d to sb.
func addRowHalf2(sum, sq, sa, sb []float64, row []float32, ref []float64) {
	sum = sum[:len(row)]
	sq = sq[:len(row)]
	sa = sa[:len(row)]
	sb = sb[:len(row)]
	ref = ref[:len(row)]
	for j, v := range row {
		d := float64(v) - ref[j]
		sum[j] += d
		sq[j] += d * d
		sa[j] += d
		sb[j] += d
	}
}

// ConstantNeurons returns, in ascending order, the neurons whose response
// is the same on every trial of the given parts, as Check's Report.Constant
// finds them over all trials: every part's sums relative to its reference
// trial are exactly zero (so all its trials equal the reference) and the
// references of the parts with trials agree. It panics if the parts differ
// in N.
func ConstantNeurons(parts ...*PartStats) []int {
	if len(parts) == 0 {
		return nil
	}
	N := parts[0].N
	var out []int
	for n := 0; n < N; n++ {
		constant, ref, seen := true, 0.0, false
		for _, ps := range parts {
			if ps.N != N {
				panic(fmt.Sprintf("data: ConstantNeurons parts of %d and %d neurons", N, ps.N))
			}
			if ps.Trials == 0 {
				continue
			}
			if ps.TotSq[n] != 0 || (seen && ps.Ref[n] != ref) {
				constant = false
				break
			}
			ref, seen = ps.Ref[n], true
		}
		if constant && seen {
			out = append(out, n)
		}
	}
	return out
}

// isFinite32 reports whether v is neither NaN nor infinite.
func isFinite32(v float32) bool { return !math.IsNaN(float64(v)) && !math.IsInf(float64(v), 0) }

// JoinNeurons returns the statistics of one part over the neurons of
// ranges, which hold the same part's statistics for consecutive ranges of
// neurons of the same trials (from AccumulateParts over
// format.NPYStream.Columns): the neurons side by side, in the order
// given. Every neuron's statistics depend only on its own responses, so
// the result is bitwise what one pass over all the neurons gives. It
// returns an error naming the first range whose conditions, trial counts
// or kept statistics differ from the first one's.
func JoinNeurons(ranges ...*PartStats) (*PartStats, error) {
	if len(ranges) == 0 {
		return nil, fmt.Errorf("data: JoinNeurons of no ranges")
	}
	f := ranges[0]
	out := &PartStats{B: f.B, Trials: f.Trials, Count: append([]int(nil), f.Count...), RefCond: f.RefCond}
	if f.CountA != nil {
		out.CountA = append([]int(nil), f.CountA...)
	}
	for i, r := range ranges {
		switch {
		case r.B != f.B || r.Trials != f.Trials || r.RefCond != f.RefCond || !equalInts(r.Count, f.Count) || !equalInts(r.CountA, f.CountA):
			return nil, fmt.Errorf("data: range %d of the statistics has other conditions or trial counts than range 0", i)
		case (r.Sum == nil) != (f.Sum == nil) || (r.SumSq == nil) != (f.SumSq == nil) || (r.SumA == nil) != (f.SumA == nil) || (r.TotSq == nil) != (f.TotSq == nil):
			return nil, fmt.Errorf("data: range %d of the statistics keeps other sums than range 0", i)
		}
		out.N += r.N
	}
	N, B := out.N, out.B
	join := func(get func(*PartStats) []float64, perCond bool) []float64 {
		if get(f) == nil {
			return nil
		}
		rows := 1
		if perCond {
			rows = B
		}
		v := make([]float64, rows*N)
		n0 := 0
		for _, r := range ranges {
			src := get(r)
			for b := 0; b < rows; b++ {
				copy(v[b*N+n0:b*N+n0+r.N], src[b*r.N:(b+1)*r.N])
			}
			n0 += r.N
		}
		return v
	}
	out.Ref = join(func(p *PartStats) []float64 { return p.Ref }, false)
	out.TotSq = join(func(p *PartStats) []float64 { return p.TotSq }, false)
	out.Sum = join(func(p *PartStats) []float64 { return p.Sum }, true)
	out.SumSq = join(func(p *PartStats) []float64 { return p.SumSq }, true)
	out.SumA = join(func(p *PartStats) []float64 { return p.SumA }, true)
	return out, nil
}

func equalInts(a, b []int) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}
