package train

import (
	"encoding/binary"
	"fmt"
	"math"
	"os"
)

// spillParams is the number of parameters (2 Mi: 16 MiB of float64) from
// which the epoch loop keeps the best epoch's parameters in a temporary file
// rather than in memory, when the caller names a folder for it
// (Hooks.TempDir). A variable so that tests can force the file on small
// fits.
var spillParams = 1 << 21

// bestPrefix starts the name of the temporary file of the best epoch's
// parameters; the whole name matches the temporary files that
// runfolder.RemoveStaleTemps clears (".NAME.tmp*"), so a file left by a
// killed process goes at the next fit into that folder.
const bestPrefix = ".stria-best.tmp"

// bestParams holds a copy of the parameters of the best epoch so far: in
// memory, or, from spillParams parameters on and with a folder given, in a
// hidden temporary file in that folder, written as raw little-endian
// float64 (so reading it back is exact). At 24,000 neurons the copy is a
// fifth parameter-sized array of 92 MB beside the parameters, gradients and
// Adam's two moments; in a file it lives in the page cache, which the
// kernel can drop, instead of the process's memory.
type bestParams struct {
	n    int
	dir  string    // the folder of the file; "" keeps the copy in memory
	have bool      // a copy has been saved
	mem  []float64 // the copy when in memory
	f    *os.File  // the file, once created
	buf  []byte    // encoding scratch
}

// newBestParams returns an empty copy of n parameters, kept in dir (a
// folder that exists) when n >= spillParams and dir is not "".
func newBestParams(n int, dir string) *bestParams {
	b := &bestParams{n: n}
	if dir != "" && n >= spillParams {
		b.dir = dir
	}
	return b
}

// spilled reports whether the copy goes to a file.
func (b *bestParams) spilled() bool { return b.dir != "" }

// save replaces the copy by params (len n).
func (b *bestParams) save(params []float64) error {
	if len(params) != b.n {
		panic(fmt.Sprintf("train: best copy of %d parameters given %d", b.n, len(params)))
	}
	if !b.spilled() {
		b.mem = append(b.mem[:0], params...)
		b.have = true
		return nil
	}
	if b.f == nil {
		f, err := os.CreateTemp(b.dir, bestPrefix+"*")
		if err != nil {
			return fmt.Errorf("keeping the best epoch's parameters in %s: %w", b.dir, err)
		}
		b.f = f
		b.buf = make([]byte, 64<<10)
	}
	b.have = false // until the whole copy is written
	for off := 0; off < len(params); {
		k := min(len(params)-off, len(b.buf)/8)
		for i, x := range params[off : off+k] {
			binary.LittleEndian.PutUint64(b.buf[8*i:], math.Float64bits(x))
		}
		if _, err := b.f.WriteAt(b.buf[:8*k], int64(8*off)); err != nil {
			return fmt.Errorf("keeping the best epoch's parameters in %s: %w", b.f.Name(), err)
		}
		off += k
	}
	b.have = true
	return nil
}

// load copies the saved parameters into dst (len n); it panics if nothing
// was saved.
func (b *bestParams) load(dst []float64) error {
	if len(dst) != b.n || !b.have {
		panic(fmt.Sprintf("train: best copy of %d parameters (saved %t) loaded into %d", b.n, b.have, len(dst)))
	}
	if !b.spilled() {
		copy(dst, b.mem)
		return nil
	}
	for off := 0; off < len(dst); {
		k := min(len(dst)-off, len(b.buf)/8)
		if _, err := b.f.ReadAt(b.buf[:8*k], int64(8*off)); err != nil {
			return fmt.Errorf("reading the best epoch's parameters back from %s: %w", b.f.Name(), err)
		}
		for i := range dst[off : off+k] {
			dst[off+i] = math.Float64frombits(binary.LittleEndian.Uint64(b.buf[8*i:]))
		}
		off += k
	}
	return nil
}

// close removes the file, if any. The copy is gone afterwards.
func (b *bestParams) close() {
	if b.f != nil {
		name := b.f.Name()
		b.f.Close()
		os.Remove(name)
		b.f = nil
	}
	b.have, b.mem = false, nil
}

// adopt makes v the copy: in memory v itself is kept (and overwritten by
// later saves), in a file it is written there.
func (b *bestParams) adopt(v []float64) error {
	if b.spilled() {
		return b.save(v)
	}
	if len(v) != b.n {
		panic(fmt.Sprintf("train: best copy of %d parameters given %d", b.n, len(v)))
	}
	b.mem, b.have = v, true
	return nil
}
