package runfolder

import (
	"bufio"
	"bytes"
	"encoding/binary"
	"encoding/gob"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"

	"github.com/strialab/stria/train"
)

// The resume state (resume_state.gob) is written as
//
//	"stria-resume/2\n"
//	uint64 n, then n bytes: a gob of the Checkpoint without its four
//	    parameter-sized slices (Params, M, V, Best)
//	for each of Params, M, V, Best: uint64 count, then count float64
//
// all little-endian. The slices go out in 64 KiB pieces: a gob of the
// whole Checkpoint would hold a copy of all four in memory while it is
// written (1.6 GB of transient memory at 24,000 neurons on the adam path).
const resumeMagic = "stria-resume/2\n"

// maxResumeHeader bounds the gob part (the training log is its largest
// piece: about 50 bytes an epoch).
const maxResumeHeader = 1 << 30

// SaveResumeState writes the training state of an unfinished fit into the
// run folder (resume_state.gob), atomically.
func SaveResumeState(dir string, c *train.Checkpoint) error {
	if err := mkdir(dir); err != nil {
		return err
	}
	hdr := *c
	hdr.Params, hdr.M, hdr.V, hdr.Best = nil, nil, nil, nil
	var head bytes.Buffer
	if err := gob.NewEncoder(&head).Encode(&hdr); err != nil {
		return fmt.Errorf("runfolder: resume state: %w", err)
	}
	return WriteFile(filepath.Join(dir, FileResume), func(w io.Writer) error {
		var n [8]byte
		if _, err := io.WriteString(w, resumeMagic); err != nil {
			return err
		}
		binary.LittleEndian.PutUint64(n[:], uint64(head.Len()))
		if _, err := w.Write(n[:]); err != nil {
			return err
		}
		if _, err := w.Write(head.Bytes()); err != nil {
			return err
		}
		buf := make([]byte, 64<<10)
		for _, v := range [][]float64{c.Params, c.M, c.V, c.Best} {
			binary.LittleEndian.PutUint64(n[:], uint64(len(v)))
			if _, err := w.Write(n[:]); err != nil {
				return err
			}
			for len(v) > 0 {
				k := min(len(v), len(buf)/8)
				for i, x := range v[:k] {
					binary.LittleEndian.PutUint64(buf[8*i:], math.Float64bits(x))
				}
				if _, err := w.Write(buf[:8*k]); err != nil {
					return err
				}
				v = v[k:]
			}
		}
		return nil
	})
}

// LoadResumeState reads resume_state.gob of a run folder.
func LoadResumeState(dir string) (*train.Checkpoint, error) {
	path := filepath.Join(dir, FileResume)
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil {
		return nil, err
	}
	c, err := readResume(bufio.NewReaderSize(f, 1<<20), st.Size())
	if err != nil {
		return nil, fmt.Errorf("%s: %w (delete it to start the fit again)", path, err)
	}
	return c, nil
}

func readResume(r io.Reader, size int64) (*train.Checkpoint, error) {
	magic := make([]byte, len(resumeMagic))
	if _, err := io.ReadFull(r, magic); err != nil || string(magic) != resumeMagic {
		return nil, errors.New("not a stria resume state (written by an older stria?)")
	}
	var n [8]byte
	if _, err := io.ReadFull(r, n[:]); err != nil {
		return nil, fmt.Errorf("truncated: %w", err)
	}
	hl := binary.LittleEndian.Uint64(n[:])
	if hl > maxResumeHeader || int64(hl) > size {
		return nil, fmt.Errorf("a header of %d bytes in a file of %d", hl, size)
	}
	head := make([]byte, hl)
	if _, err := io.ReadFull(r, head); err != nil {
		return nil, fmt.Errorf("truncated: %w", err)
	}
	var c train.Checkpoint
	if err := gob.NewDecoder(bytes.NewReader(head)).Decode(&c); err != nil {
		return nil, err
	}
	buf := make([]byte, 64<<10)
	for _, dst := range []*[]float64{&c.Params, &c.M, &c.V, &c.Best} {
		if _, err := io.ReadFull(r, n[:]); err != nil {
			return nil, fmt.Errorf("truncated: %w", err)
		}
		k := binary.LittleEndian.Uint64(n[:])
		if k > uint64(size)/8 {
			return nil, fmt.Errorf("an array of %d values in a file of %d bytes", k, size)
		}
		v := make([]float64, k)
		for i := 0; i < len(v); {
			m := min(len(v)-i, len(buf)/8)
			if _, err := io.ReadFull(r, buf[:8*m]); err != nil {
				return nil, fmt.Errorf("truncated: %w", err)
			}
			for j := range m {
				v[i+j] = math.Float64frombits(binary.LittleEndian.Uint64(buf[8*j:]))
			}
			i += m
		}
		if k == 0 {
			v = nil
		}
		*dst = v
	}
	if _, err := r.Read(n[:1]); err != io.EOF {
		return nil, errors.New("trailing bytes after the state")
	}
	return &c, nil
}
