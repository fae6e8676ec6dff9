package format

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

// HashPieceBytes is the piece size of the content hash (see FileID.Hash).
const HashPieceBytes = 4 << 20

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

// StatID is the identity of path from its file info st, without the
// content hash (filled by Identify or the recording's hashing).
func StatID(path string, st os.FileInfo) FileID {
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
	id := StatID(path, st)
	h, err := hashReaderAt(f, id.Size, path)
	if err != nil {
		return FileID{}, err
	}
	st2, err := f.Stat()
	if err != nil {
		return FileID{}, fmt.Errorf("data: %w", err)
	}
	if d := id.Diff(StatID(path, st2)); d != "" {
		return FileID{}, ChangedError(path, d)
	}
	id.Hash = h
	return id, nil
}

// ChangedError is the error for a file whose identity changed (diff says
// how) while stria read it; it names the file and wraps ErrChanged.
func ChangedError(path, diff string) error {
	return fmt.Errorf("data: %s: %w (%s); the results would mix two versions of it: run again on a copy that nothing writes to",
		path, ErrChanged, diff)
}

// PieceHasher hashes the HashPieceBytes pieces of a file of a given size; the pieces are
// claimed by the workers in any order, the digests are combined in order.
type PieceHasher struct {
	size    int64
	digests [][8]byte
	next    atomic.Int64
}

func NewPieceHasher(size int64) *PieceHasher {
	return &PieceHasher{size: size, digests: make([][8]byte, (size+HashPieceBytes-1)/HashPieceBytes)}
}

// Piece returns the byte range of piece k.
func (c *PieceHasher) Piece(k int) (lo, hi int64) {
	lo = int64(k) * HashPieceBytes
	return lo, min(lo+HashPieceBytes, c.size)
}

// Sum combines the piece digests.
func (c *PieceHasher) Sum() string {
	h := sha256.New()
	for i := range c.digests {
		h.Write(c.digests[i][:])
	}
	return hashPrefix + hex.EncodeToString(h.Sum(nil)[:16])
}

// hashReaderAt hashes size bytes of r.
func hashReaderAt(r io.ReaderAt, size int64, path string) (string, error) {
	c := NewPieceHasher(size)
	workers := max(1, min(runtime.GOMAXPROCS(0), len(c.digests)))
	var wg sync.WaitGroup
	errs := make([]error, workers)
	for w := range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			buf := make([]byte, HashPieceBytes)
			for {
				k := int(c.next.Add(1) - 1)
				if k >= len(c.digests) {
					return
				}
				lo, hi := c.Piece(k)
				b := buf[:hi-lo]
				if _, err := r.ReadAt(b, lo); err != nil {
					if err == io.EOF || err == io.ErrUnexpectedEOF {
						errs[w] = ChangedError(path, "it became shorter while being hashed")
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
	return c.Sum(), nil
}

// HashBytes hashes b (a mapped file) like hashReaderAt, under the fault
// guard.
func HashBytes(b []byte) (string, error) {
	c := NewPieceHasher(int64(len(b)))
	var g GuardGroup
	for range max(1, min(runtime.GOMAXPROCS(0), len(c.digests))) {
		g.Go(func() {
			for {
				k := int(c.next.Add(1) - 1)
				if k >= len(c.digests) {
					return
				}
				lo, hi := c.Piece(k)
				c.digests[k] = pieceDigest(b[lo:hi])
			}
		})
	}
	if err := g.Wait(); err != nil {
		return "", err
	}
	return c.Sum(), nil
}

// inputFile is a file a recording was loaded from, as it was when Load

// Pieces returns the number of pieces.
func (c *PieceHasher) Pieces() int { return len(c.digests) }

// HashPiece hashes piece k of file (the whole file, len(file) bytes, as
// given to NewPieceHasher) by blocks of 64 KiB, calling visit(lo, hi) on
// each block's byte range just after it is checksummed, so that a caller
// scanning the same bytes finds them in the cache. Pieces may be hashed by
// several goroutines at once, each piece by one.
func (c *PieceHasher) HashPiece(k int, file []byte, visit func(lo, hi int64)) {
	lo, hi := c.Piece(k)
	var crc pieceCRC
	for b := lo; b < hi; b += hashBlock {
		be := min(b+hashBlock, hi)
		crc.add(file[b:be])
		visit(b, be)
	}
	c.digests[k] = crc.digest()
}
