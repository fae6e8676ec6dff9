package condstats

import (
	"fmt"
	"math"
	"runtime"

	"github.com/strialab/stria/data/format"
)

// Stats holds per-condition sufficient statistics of a set of trials
// (eval/methods.md §8): for condition b and neuron n,
//
//	Count[b]      = N_b, the number of trials of condition b
//	Sum[b*N+n]    = S_bn = sum over those trials of y_tn
//	SumSq[b*N+n]  = sum over those trials of y_tn^2
//
// B is the number of conditions and N the number of neurons; Sum and SumSq
// are B x N, accumulated in float64 in ascending trial order.
type Stats struct {
	B, N  int
	Count []int
	Sum   []float64
	SumSq []float64
}

// New accumulates the statistics of the listed trials (rows of y)
// with cond[t] in [0, nbins) the condition of trial t. Large inputs are
// split over neuron column ranges and run in parallel; every element is
// still summed in trial order, so the result does not depend on the number
// of goroutines. It panics if a trial index or a condition id of a listed
// trial is out of range, or len(cond) != y.Rows.
//
// When y is mapped (see format.ReadNPY) and its file is truncated during the
// pass, New panics with a *format.FaultError naming the file; run it
// under format.Guard, which returns that error.
func New(y *format.Matrix, cond []int, trials []int, nbins int) *Stats {
	if len(cond) != y.Rows {
		panic(fmt.Sprintf("data: New %d condition ids for %d trials", len(cond), y.Rows))
	}
	if nbins < 0 {
		panic("data: New negative number of conditions")
	}
	N := y.Cols
	s := &Stats{B: nbins, N: N, Count: make([]int, nbins), Sum: make([]float64, nbins*N), SumSq: make([]float64, nbins*N)}
	for _, t := range trials {
		if t < 0 || t >= y.Rows {
			panic(fmt.Sprintf("data: New trial %d out of range [0, %d)", t, y.Rows))
		}
		b := cond[t]
		if b < 0 || b >= nbins {
			panic(fmt.Sprintf("data: New trial %d has condition %d outside [0, %d)", t, b, nbins))
		}
		s.Count[b]++
	}
	// Visit the trials grouped by condition (a stable counting sort), so that
	// one condition's rows of Sum and SumSq stay in cache. Each element still
	// receives its trials in the order they are listed.
	start := make([]int, nbins+1)
	for b, k := range s.Count {
		start[b+1] = start[b] + k
	}
	order := make([]int, len(trials))
	for _, t := range trials {
		order[start[cond[t]]] = t
		start[cond[t]]++
	}
	trials = order
	workers := runtime.GOMAXPROCS(0)
	if work := len(trials) * N; work < 1<<20 || N < 2*workers {
		workers = 1
	}
	chunk := (N + workers - 1) / workers
	var g format.GuardGroup
	for lo := 0; lo < N; lo += chunk {
		hi := min(lo+chunk, N)
		g.Go(func() { s.accumulate(y, cond, trials, lo, hi) })
	}
	if err := g.Wait(); err != nil {
		panic(err) // a *format.FaultError: the mapped file was truncated; format.Guard returns it
	}
	return s
}

// accumulate adds the trials' values of neurons [lo, hi).
func (s *Stats) accumulate(y *format.Matrix, cond, trials []int, lo, hi int) {
	N := s.N
	for _, t := range trials {
		b := cond[t]
		row := y.Data[t*N+lo : t*N+hi]
		sum := s.Sum[b*N+lo : b*N+hi]
		sq := s.SumSq[b*N+lo : b*N+hi]
		for n, v := range row {
			x := float64(v)
			sum[n] += x
			sq[n] += x * x
		}
	}
}

func (s *Stats) dst(dst []float64, fn string) []float64 {
	if dst == nil {
		return make([]float64, s.B*s.N)
	}
	if len(dst) != s.B*s.N {
		panic(fmt.Sprintf("data: Stats.%s dst length %d, want B*N = %d", fn, len(dst), s.B*s.N))
	}
	return dst
}

// Mean writes the condition means ybar_bn = S_bn / N_b into dst (B x N;
// allocated if nil) and returns it. Empty conditions give NaN. It panics if
// dst is not nil and not of length B*N.
func (s *Stats) Mean(dst []float64) []float64 {
	dst = s.dst(dst, "Mean")
	for b := 0; b < s.B; b++ {
		d := dst[b*s.N : (b+1)*s.N]
		if s.Count[b] == 0 {
			for n := range d {
				d[n] = math.NaN()
			}
			continue
		}
		inv := 1 / float64(s.Count[b])
		for n, v := range s.Sum[b*s.N : (b+1)*s.N] {
			d[n] = v * inv
		}
	}
	return dst
}

// Var writes the within-condition variances with ddof 1 (eval/methods.md §0),
//
//	s2_bn = (SumSq_bn - S_bn^2 / N_b) / (N_b - 1),
//
// into dst (B x N; allocated if nil) and returns it. Conditions with fewer
// than two trials give NaN. Tiny negative results from rounding are set to
// 0. The one-pass formula loses precision when a neuron's mean is much
// larger than its spread (relative error about 1e-16 mean^2/s2); for
// responses as float32 this is far below the input's own precision unless
// mean/spread exceeds about 1e4. It panics like Mean.
func (s *Stats) Var(dst []float64) []float64 {
	dst = s.dst(dst, "Var")
	for b := 0; b < s.B; b++ {
		d := dst[b*s.N : (b+1)*s.N]
		nb := s.Count[b]
		if nb < 2 {
			for n := range d {
				d[n] = math.NaN()
			}
			continue
		}
		sum := s.Sum[b*s.N : (b+1)*s.N]
		sq := s.SumSq[b*s.N : (b+1)*s.N]
		inv := 1 / float64(nb)
		for n := range d {
			v := (sq[n] - sum[n]*sum[n]*inv) / float64(nb-1)
			if v < 0 {
				v = 0
			}
			d[n] = v
		}
	}
	return dst
}

// Normalizer z-scores each neuron: y' = (y - Mean[n]) / Scale[n]. It is fitted
// on training trials only, so that nothing about the test trials leaks into
// the model through the normalisation.
type Normalizer struct {
	Mean  []float64 // per neuron, over the fitted trials
	Scale []float64 // per neuron standard deviation (ddof 0); 1 for a constant neuron
}

// FitNormalizer computes each neuron's mean and standard deviation (ddof 0,
// two passes in float64) over the listed trials. A neuron that is constant
// over them gets Scale 1, so Apply only removes its mean; Check reports
// such neurons. It panics if trials is empty or holds an index out of range.
func FitNormalizer(y *format.Matrix, trials []int) *Normalizer {
	if len(trials) == 0 {
		panic("data: FitNormalizer with no trials")
	}
	N := y.Cols
	z := &Normalizer{Mean: make([]float64, N), Scale: make([]float64, N)}
	for _, t := range trials {
		for n, v := range y.Row(t) {
			z.Mean[n] += float64(v)
		}
	}
	inv := 1 / float64(len(trials))
	for n := range z.Mean {
		z.Mean[n] *= inv
	}
	for _, t := range trials {
		for n, v := range y.Row(t) {
			d := float64(v) - z.Mean[n]
			z.Scale[n] += d * d
		}
	}
	for n, ss := range z.Scale {
		sd := math.Sqrt(ss * inv)
		if !(sd > 0) || math.IsInf(sd, 0) {
			sd = 1
		}
		z.Scale[n] = sd
	}
	return z
}

// Apply z-scores y in place. It panics if y.Cols differs from the number of
// neurons the Normalizer was fitted on.
func (z *Normalizer) Apply(y *format.Matrix) {
	if y.Cols != len(z.Mean) {
		panic(fmt.Sprintf("data: Normalizer fitted on %d neurons, matrix has %d", len(z.Mean), y.Cols))
	}
	inv := make([]float64, len(z.Scale))
	for n, s := range z.Scale {
		inv[n] = 1 / s
	}
	for t := 0; t < y.Rows; t++ {
		row := y.Row(t)
		for n, v := range row {
			row[n] = float32((float64(v) - z.Mean[n]) * inv[n])
		}
	}
}

// NormalizerFromStats is the z-scoring of the trials behind parts (ddof 0),
// from their per-condition sums: no pass over the responses. The variance
// is the sum over conditions of the within-condition sums of squares plus
// the spread of the condition means, both in float64. A neuron whose
// standard deviation is below 1e-6 of its mean magnitude (a few float32
// rounding steps) or not positive counts as constant and gets Scale 1, as
// FitNormalizer gives an exactly constant neuron.
func NormalizerFromStats(parts ...*Stats) *Normalizer {
	n := parts[0].N
	z := &Normalizer{Mean: make([]float64, n), Scale: make([]float64, n)}
	var total float64
	for _, st := range parts {
		for c, k := range st.Count {
			total += float64(k)
			if k == 0 {
				continue
			}
			sum := st.Sum[c*n : (c+1)*n]
			for j, v := range sum {
				z.Mean[j] += v
			}
		}
	}
	for j := range z.Mean {
		z.Mean[j] /= total
	}
	for _, st := range parts {
		for c, k := range st.Count {
			if k == 0 {
				continue
			}
			cnt := float64(k)
			sum, sq := st.Sum[c*n:(c+1)*n], st.SumSq[c*n:(c+1)*n]
			for j := range sum {
				m := sum[j] / cnt
				d := m - z.Mean[j]
				// Within the condition around its own mean, then the
				// condition mean around the grand mean.
				z.Scale[j] += (sq[j] - sum[j]*m) + cnt*d*d
			}
		}
	}
	for j, ss := range z.Scale {
		sd := math.Sqrt(max(ss, 0) / total)
		if !(sd > 1e-6*math.Abs(z.Mean[j])) || math.IsInf(sd, 0) {
			sd = 1
		}
		z.Scale[j] = sd
	}
	return z
}

// Affine returns the map z = (y - mu) * inv of neuron j; a nil
// Normalizer is the identity (0, 1).
func (z *Normalizer) Affine(j int) (mu, inv float64) {
	if z == nil {
		return 0, 1
	}
	return z.Mean[j], 1 / z.Scale[j]
}

// ApplyRow writes one trial's responses into dst in z-scored units,
// dst[j] = (src[j] - Mean[j]) / Scale[j]; a nil Normalizer only converts.
func (z *Normalizer) ApplyRow(dst []float64, src []float32) {
	dst = dst[:len(src)]
	if z == nil {
		for j, v := range src {
			dst[j] = float64(v)
		}
		return
	}
	mean, scale := z.Mean[:len(src)], z.Scale[:len(src)]
	for j, v := range src {
		dst[j] = (float64(v) - mean[j]) / scale[j]
	}
}

// InvertRows undoes the z-scoring in place of rows of predictions laid out
// row-major with one value per neuron (len(v) a multiple of the neuron
// count): v = v*Scale + Mean. A nil Normalizer leaves v unchanged.
func (z *Normalizer) InvertRows(v []float64) {
	if z == nil {
		return
	}
	n := len(z.Mean)
	for lo := 0; lo < len(v); lo += n {
		row := v[lo : lo+n]
		scale, mean := z.Scale[:len(row)], z.Mean[:len(row)]
		for j, x := range row {
			row[j] = x*scale[j] + mean[j]
		}
	}
}
