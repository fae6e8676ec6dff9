package data

import (
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"fmt"
	"hash/crc32"
	"io"
	"os"
	"runtime"
	"strings"
	"sync"
	"sync/atomic"
	"time"
)

// hashChunk is the piece size of the content hash (see FileID.Hash).
const hashChunk = 4 << 20

// hashPrefix names the content hash scheme in FileID.Hash.
const hashPrefix = "crc32pair-4MiB:"

var castagnoli = crc32.MakeTable(crc32.Castagnoli)

// pieceCRC accumulates the two checksums of one piece.
type pieceCRC struct{ c, i uint32 }

// add continues the checksums over b.
func (p *pieceCRC) add(b []byte) {
	p.c = crc32.Update(p.c, castagnoli, b)
	p.i = crc32.Update(p.i, crc32.IEEETable, b)
}

// digest is the 8-byte record of the piece: CRC-32C then CRC-32,
// big-endian.
func (p *pieceCRC) digest() [8]byte {
	var d [8]byte
	binary.BigEndian.PutUint32(d[:4], p.c)
	binary.BigEndian.PutUint32(d[4:], p.i)
	return d
}

// hashBlock is the block size in which a piece is checksummed (and, in the
// checking pass, scanned): small enough that the second CRC and the scan
// read it from the cache.
const hashBlock = 64 << 10

// pieceDigest is the 8-byte record of one piece.
func pieceDigest(b []byte) [8]byte {
	var p pieceCRC
	for len(b) > 0 {
		n := min(len(b), hashBlock)
		p.add(b[:n])
		b = b[n:]
	}
	return p.digest()
}

// FileID identifies the content of an input file for fingerprints: its
// path, size, modification time and a content hash. FileIDs are comparable
// with ==; String prints one and Diff says in words how two differ.
//
// Hash is "crc32pair-4MiB:" followed by 32 hex digits. The file is cut into
// consecutive 4 MiB pieces (the last one shorter; an empty file has none);
// each piece gets two CRC-32 checksums, CRC-32C (Castagnoli polynomial,
// RFC 3720) and CRC-32 (IEEE 802.3 polynomial), written big-endian, 8
// bytes per piece; Hash holds the first 16 bytes of the SHA-256 (FIPS
// 180-4) of those 8-byte records in order. The pieces are checksummed in
// parallel, and the hash depends on nothing but the bytes of the file.
//
// The hash is made to notice accidental changes, fast: a change within a
// piece goes unnoticed only if it fools both CRCs, which a random change
// does with probability about 2^-64 and a burst of up to 32 changed bits
// never does. It is not a cryptographic fingerprint (a deliberate
// collision can be built); use sha256sum for that. CRC-32C and CRC-32 run
// on the processor's CRC instructions, many times the speed of SHA-256
// (see BenchmarkCheckHash). It is empty when not computed (Recording.Files
// before HashFiles or a check with CheckOptions.Hash).
//
// ModTime is in UTC without a monotonic reading, so == and a JSON round
// trip keep working.
type FileID struct {
	Path    string    `json:"path"`
	Size    int64     `json:"size"`
	ModTime time.Time `json:"modified"`
	Hash    string    `json:"hash,omitempty"`
}

func fileIDOf(path string, st os.FileInfo) FileID {
	return FileID{Path: path, Size: st.Size(), ModTime: st.ModTime().UTC().Round(0)}
}

// String gives e.g. "resp.npy (442000128 bytes, modified 2026-12-03
// 12:01:03.25 UTC, crc32pair-4MiB:3f9a0c1e5b7d2a40...)".
func (id FileID) String() string {
	s := fmt.Sprintf("%s (%d bytes, modified %s", id.Path, id.Size, id.ModTime.Format("2006-01-02 15:04:05.999999999 UTC"))
	if id.Hash != "" {
		s += ", " + truncate(id.Hash, len(hashPrefix)+16)
	}
	return s + ")"
}

// Diff explains in words how b differs from a, e.g. "size 1200 -> 1180
// bytes; modified 12:01:03 -> 12:05:10; content differs". It returns "" when
// they are the same. The content is compared only when both hashes are
// known.
func (a FileID) Diff(b FileID) string {
	var d []string
	if a.Path != b.Path {
		d = append(d, fmt.Sprintf("path %s -> %s", a.Path, b.Path))
	}
	if a.Size != b.Size {
		d = append(d, fmt.Sprintf("size %d -> %d bytes", a.Size, b.Size))
	}
	if !a.ModTime.Equal(b.ModTime) {
		layout := "15:04:05.999999999"
		if a.ModTime.YearDay() != b.ModTime.YearDay() || a.ModTime.Year() != b.ModTime.Year() {
			layout = "2006-01-02 15:04:05.999999999"
		}
		d = append(d, fmt.Sprintf("modified %s -> %s UTC", a.ModTime.Format(layout), b.ModTime.Format(layout)))
	}
	if a.Hash != "" && b.Hash != "" && a.Hash != b.Hash {
		d = append(d, "content differs")
	}
	return strings.Join(d, "; ")
}

// Identify returns the FileID of the file at path, hashing its content in
// parallel over all cores (see FileID). The file is read in 4 MiB pieces,
// not mapped, and its size and modification time are checked again after
// the read: a file that changes meanwhile gives an error wrapping
// ErrChanged.
func Identify(path string) (FileID, error) {
	f, err := os.Open(path)
	if err != nil {
		return FileID{}, fmt.Errorf("data: %w", err)
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil {
		return FileID{}, fmt.Errorf("data: %w", err)
	}
	if st.IsDir() {
		return FileID{}, fmt.Errorf("data: %s is a directory, not a file", path)
	}
	id := fileIDOf(path, st)
	h, err := hashReaderAt(f, id.Size, path)
	if err != nil {
		return FileID{}, err
	}
	st2, err := f.Stat()
	if err != nil {
		return FileID{}, fmt.Errorf("data: %w", err)
	}
	if d := id.Diff(fileIDOf(path, st2)); d != "" {
		return FileID{}, changedErr(path, d)
	}
	id.Hash = h
	return id, nil
}

func changedErr(path, diff string) error {
	return fmt.Errorf("data: %s: %w (%s); the results would mix two versions of it: run again on a copy that nothing writes to",
		path, ErrChanged, diff)
}

// chunkHasher hashes the pieces of a file of a given size; the pieces are
// claimed by the workers in any order, the digests are combined in order.
type chunkHasher struct {
	size    int64
	digests [][8]byte
	next    atomic.Int64
}

func newChunkHasher(size int64) *chunkHasher {
	return &chunkHasher{size: size, digests: make([][8]byte, (size+hashChunk-1)/hashChunk)}
}

// piece returns the byte range of piece k.
func (c *chunkHasher) piece(k int) (lo, hi int64) {
	lo = int64(k) * hashChunk
	return lo, min(lo+hashChunk, c.size)
}

// sum combines the piece digests.
func (c *chunkHasher) sum() string {
	h := sha256.New()
	for i := range c.digests {
		h.Write(c.digests[i][:])
	}
	return hashPrefix + hex.EncodeToString(h.Sum(nil)[:16])
}

// hashReaderAt hashes size bytes of r.
func hashReaderAt(r io.ReaderAt, size int64, path string) (string, error) {
	c := newChunkHasher(size)
	workers := max(1, min(runtime.GOMAXPROCS(0), len(c.digests)))
	var wg sync.WaitGroup
	errs := make([]error, workers)
	for w := range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			buf := make([]byte, hashChunk)
			for {
				k := int(c.next.Add(1) - 1)
				if k >= len(c.digests) {
					return
				}
				lo, hi := c.piece(k)
				b := buf[:hi-lo]
				if _, err := r.ReadAt(b, lo); err != nil {
					if err == io.EOF || err == io.ErrUnexpectedEOF {
						errs[w] = changedErr(path, "it became shorter while being hashed")
					} else {
						errs[w] = fmt.Errorf("data: %s: %w", path, err)
					}
					return
				}
				c.digests[k] = pieceDigest(b)
			}
		}()
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return "", err
		}
	}
	return c.sum(), nil
}

// hashBytes hashes b (a mapped file) like hashReaderAt, under the fault
// guard.
func hashBytes(b []byte) (string, error) {
	c := newChunkHasher(int64(len(b)))
	var g GuardGroup
	for range max(1, min(runtime.GOMAXPROCS(0), len(c.digests))) {
		g.Go(func() {
			for {
				k := int(c.next.Add(1) - 1)
				if k >= len(c.digests) {
					return
				}
				lo, hi := c.piece(k)
				c.digests[k] = pieceDigest(b[lo:hi])
			}
		})
	}
	if err := g.Wait(); err != nil {
		return "", err
	}
	return c.sum(), nil
}

// inputFile is a file a recording was loaded from, as it was when Load
// opened it.
type inputFile struct {
	id FileID
	st os.FileInfo
}

// statInputs records the distinct files of src (responses first) before
// they are read.
func statInputs(src Source) ([]inputFile, error) {
	stim := src.Stimulus
	if stim == "" {
		stim = src.Responses
	}
	paths := []string{src.Responses, stim}
	for _, p := range [][2]string{{src.Condition, src.ConditionColumn}, {src.Block, src.BlockColumn}} {
		if p[0] != "" {
			paths = append(paths, p[0])
		}
	}
	var out []inputFile
	seen := map[string]bool{}
	for _, p := range paths {
		if seen[p] {
			continue
		}
		seen[p] = true
		st, err := os.Stat(p)
		if err != nil {
			return nil, fmt.Errorf("data: %w", err)
		}
		out = append(out, inputFile{id: fileIDOf(p, st), st: st})
	}
	return out, nil
}

// Files returns the identities of the files the recording was loaded from,
// responses first, then the stimulus, condition and block files that are
// not the same path, as they were when Load opened them. The hashes are
// filled by HashFiles or by CheckWith with CheckOptions.Hash; before that
// they are empty. A recording not made by Load has no files.
func (r *Recording) Files() []FileID {
	out := make([]FileID, len(r.inputs))
	for i, f := range r.inputs {
		out[i] = f.id
	}
	return out
}

// HashFiles computes the content hash of every file the recording was
// loaded from (see FileID). A mapped responses file is hashed from its
// mapping, the others are read; both run over all cores. Files already
// hashed are skipped.
func (r *Recording) HashFiles() error {
	for i := range r.inputs {
		if err := r.hashInput(i, nil); err != nil {
			return err
		}
	}
	return nil
}

// hashInput hashes input i; mapped, when not nil, is the file's mapping.
func (r *Recording) hashInput(i int, mapped []byte) error {
	in := &r.inputs[i]
	if in.id.Hash != "" {
		return nil
	}
	if mapped == nil && i == 0 && r.Y != nil {
		if b, _, path, ok := mappedBytes(r.Y.Data); ok && path == in.id.Path {
			mapped = b
		}
	}
	if mapped != nil {
		if int64(len(mapped)) != in.id.Size {
			return changedErr(in.id.Path, fmt.Sprintf("size %d -> %d bytes", in.id.Size, len(mapped)))
		}
		h, err := hashBytes(mapped)
		if err != nil {
			return err
		}
		in.id.Hash = h
		return nil
	}
	id, err := Identify(in.id.Path)
	if err != nil {
		return err
	}
	if d := in.id.Diff(FileID{Path: id.Path, Size: id.Size, ModTime: id.ModTime}); d != "" {
		return changedErr(in.id.Path, d)
	}
	in.id.Hash = id.Hash
	return nil
}

// Unchanged checks that every file the recording was loaded from still has
// the size and modification time it had when Load opened it, and is still
// the same file (not replaced by another one under the same name). Call it
// at the end of a fit, before anything is written as final: a file
// modified while stria read it (a mapped .npy changes under the matrix)
// would make the results mix two versions of the data. The error names the
// file and says what changed, and wraps ErrChanged. A recording not made
// by Load (Synth, one built in memory) has no files and always passes.
func (r *Recording) Unchanged() error {
	for _, in := range r.inputs {
		st, err := os.Stat(in.id.Path)
		if err != nil {
			return fmt.Errorf("data: %s: %w (it was removed or renamed: %v); the results would not match any file on disk",
				in.id.Path, ErrChanged, err)
		}
		if !os.SameFile(in.st, st) {
			return fmt.Errorf("data: %s: %w (it was replaced by another file); the results would not match the file on disk: run again",
				in.id.Path, ErrChanged)
		}
		if d := in.id.Diff(fileIDOf(in.id.Path, st)); d != "" {
			return changedErr(in.id.Path, d)
		}
	}
	return nil
}
