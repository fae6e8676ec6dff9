package synth

import (
	"bufio"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"sync"
	"unsafe"

	"github.com/strialab/stria/data/format"
)

// StreamConfig describes a large synthetic recording written straight
// to disk by WriteNPY: a population of cells tuned to a periodic
// stimulus (0..360 deg), for tests and benchmarks of the streaming path at
// sizes that do not fit in memory. Model, for neuron n and trial t with
// stimulus th_t:
//
//	f_n(th) = A_n q_{k(n)}(th - p_n)        (0 for an untuned cell)
//	y_tn    = b_n + g_t f_n(th_t) + NoiseSD e_tn,  g_t = max(0, 1 + GainSD z_t)
//
// The shapes q_k are a bank of 64 profiles, each one to three von Mises
// bumps exp(kappa (cos(th - c) - 1)) with kappa log-uniform on [2, 16],
// tabulated on a 1-degree grid and interpolated linearly; each cell takes
// a shape k(n) from the bank, a shift p_n uniform on the grid, A_n
// log-normal around 1 and b_n uniform on [0.2, 0.5]. e and z are standard
// normal. Stimulus values are uniform on [0, 360). Cells share shapes so
// that drawing a million of them costs O(N) memory and O(1) per value.
type StreamConfig struct {
	Neurons, Trials int
	UntunedFrac     float64 // share of untuned cells
	GainSD          float64 // shared gain fluctuation across trials, e.g. 0.15
	NoiseSD         float64 // Gaussian noise s.d., e.g. 0.5
	Seed            uint64
	// BlockRows is the number of rows generated and written at a time
	// (0: as many as fit in 32 MiB, at least 1).
	BlockRows int
}

// Validate checks the configuration; errors name the field.
func (c StreamConfig) Validate() error {
	bad := func(f string, v any, want string) error {
		return fmt.Errorf("data: synthetic stream %s = %v: %s", f, v, want)
	}
	switch {
	case c.Neurons < 1 || c.Neurons > 1<<24:
		return bad("neurons", c.Neurons, "must be between 1 and 16777216")
	case c.Trials < 1 || c.Trials > 1<<24:
		return bad("trials", c.Trials, "must be between 1 and 16777216")
	case !(c.UntunedFrac >= 0 && c.UntunedFrac <= 1):
		return bad("untuned_frac", c.UntunedFrac, "must be in [0, 1]")
	case !(c.GainSD >= 0) || math.IsInf(c.GainSD, 0):
		return bad("gain_sd", c.GainSD, "must be finite and >= 0")
	case !(c.NoiseSD >= 0) || math.IsInf(c.NoiseSD, 0):
		return bad("noise_sd", c.NoiseSD, "must be finite and >= 0")
	case c.BlockRows < 0:
		return bad("block_rows", c.BlockRows, "must be >= 0")
	}
	return nil
}

const (
	synthShapes = 64
	synthGrid   = 360
)

// cells holds the per-cell parameters of a StreamConfig draw.
type cells struct {
	bank  []float64 // synthShapes x (synthGrid+1), the last column repeating the first
	shape []int32   // per cell; -1 untuned
	shift []int32   // per cell, grid steps
	amp   []float32
	base  []float32
}

func newCells(cfg StreamConfig) *cells {
	rng := rand.New(rand.NewPCG(cfg.Seed, 0x73747269615f7374)) // second word: "stria_st"
	const G = synthGrid
	sc := &cells{bank: make([]float64, synthShapes*(G+1))}
	for k := 0; k < synthShapes; k++ {
		row := sc.bank[k*(G+1) : (k+1)*(G+1)]
		nb := 1 + rng.IntN(3)
		for range nb {
			a := math.Exp(0.3 * rng.NormFloat64())
			kappa := 2 * math.Exp(math.Log(8)*rng.Float64())
			c := 2 * math.Pi * rng.Float64()
			for g := 0; g <= G; g++ {
				th := 2 * math.Pi * float64(g) / G
				row[g] += a * math.Exp(kappa*(math.Cos(th-c)-1))
			}
		}
	}
	N := cfg.Neurons
	sc.shape, sc.shift = make([]int32, N), make([]int32, N)
	sc.amp, sc.base = make([]float32, N), make([]float32, N)
	for n := 0; n < N; n++ {
		sc.base[n] = float32(0.2 + 0.3*rng.Float64())
		sc.amp[n] = float32(math.Exp(0.3 * rng.NormFloat64()))
		sc.shift[n] = int32(rng.IntN(G))
		sc.shape[n] = int32(rng.IntN(synthShapes))
		if rng.Float64() < cfg.UntunedFrac {
			sc.shape[n] = -1
		}
	}
	return sc
}

// row writes trial t's responses into dst, with stimulus th (deg) and
// gain g, noise from its own generator seeded by (seed, t) so that rows
// can be drawn in any order.
func (sc *cells) row(dst []float32, th, g, noise float64, seed uint64, t int) {
	const G = synthGrid
	rng := rand.New(rand.NewPCG(seed^0x6e6f697365, uint64(t))) // "noise"
	x := th * G / 360
	i0 := int(x)
	fr := x - float64(i0)
	for n := range dst {
		mu := float64(sc.base[n])
		if k := sc.shape[n]; k >= 0 {
			i := i0 - int(sc.shift[n])
			if i < 0 {
				i += G
			}
			q := sc.bank[int(k)*(G+1)+i:]
			mu += g * float64(sc.amp[n]) * (q[0] + fr*(q[1]-q[0]))
		}
		if noise > 0 {
			mu += noise * rng.NormFloat64()
		}
		dst[n] = float32(mu)
	}
}

// WriteNPY writes the recording of cfg to path as a little-endian
// float32 .npy (Trials x Neurons, C order), BlockRows rows at a time, and
// returns the stimulus value of each trial (deg). Memory is one block of
// rows and O(Neurons) parameters, whatever the size of the file. The same
// config gives the same file on every machine and for any BlockRows or
// number of cores: each trial's noise has its own generator. Writing is
// atomic as for format.WriteNPY (a temporary file renamed over path).
func WriteNPY(path string, cfg StreamConfig) (stim []float64, err error) {
	if err := cfg.Validate(); err != nil {
		return nil, err
	}
	if !format.HostLittle {
		return nil, fmt.Errorf("data: WriteNPY needs a little-endian machine")
	}
	N, T := cfg.Neurons, cfg.Trials
	sc := newCells(cfg)
	rng := rand.New(rand.NewPCG(cfg.Seed, 0x73747269615f7374^1))
	stim = make([]float64, T)
	gain := make([]float64, T)
	for t := range stim {
		th := 360 * rng.Float64()
		if th >= 360 {
			th = 0
		}
		stim[t] = th
		gain[t] = math.Max(0, 1+cfg.GainSD*rng.NormFloat64())
	}

	R := cfg.BlockRows
	if R == 0 {
		R = max(1, (32<<20)/(4*N))
	}
	R = min(R, T)
	dir, base := filepath.Split(path)
	if dir == "" {
		dir = "."
	}
	f, err := os.CreateTemp(dir, "."+base+".tmp-*")
	if err != nil {
		return nil, fmt.Errorf("data: writing %s: %w", path, err)
	}
	tmp := f.Name()
	defer func() {
		if err != nil {
			f.Close()
			os.Remove(tmp)
		}
	}()
	w := bufio.NewWriterSize(f, 1<<20)
	if _, err = w.Write(format.NPYHeaderBytes("<f4", []int{T, N})); err != nil {
		return nil, fmt.Errorf("data: writing %s: %w", path, err)
	}
	buf := make([]float32, R*N)
	workers := runtime.GOMAXPROCS(0)
	for lo := 0; lo < T; lo += R {
		hi := min(lo+R, T)
		var wg sync.WaitGroup
		var next sync.Mutex
		t := lo
		for range min(workers, hi-lo) {
			wg.Add(1)
			go func() {
				defer wg.Done()
				for {
					next.Lock()
					r := t
					t++
					next.Unlock()
					if r >= hi {
						return
					}
					sc.row(buf[(r-lo)*N:(r-lo+1)*N], stim[r], gain[r], cfg.NoiseSD, cfg.Seed, r)
				}
			}()
		}
		wg.Wait()
		b := unsafe.Slice((*byte)(unsafe.Pointer(&buf[0])), 4*(hi-lo)*N)
		if _, err = w.Write(b); err != nil {
			return nil, fmt.Errorf("data: writing %s: %w", path, err)
		}
	}
	if err = w.Flush(); err == nil {
		err = f.Sync()
	}
	if err == nil {
		err = f.Chmod(0o644)
	}
	if err == nil {
		err = f.Close()
	}
	if err == nil {
		err = os.Rename(tmp, path)
	}
	if err != nil {
		return nil, fmt.Errorf("data: writing %s: %w", path, err)
	}
	return stim, nil
}
