package format

import (
	"encoding/json"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// TestIdentifyHash checks the content hash against Python (python3 3.11,
// hashlib and zlib, with CRC-32C written out bit by bit from RFC 3720 and
// checked against the catalogue check value crc32c(b"123456789") =
// 0xE3069283; run by hand):
//
//	def crc32c(b):
//	    c = 0xFFFFFFFF
//	    for x in b:
//	        c ^= x
//	        for _ in range(8):
//	            c = (c >> 1) ^ (0x82F63B78 if c & 1 else 0)
//	    return c ^ 0xFFFFFFFF
//	C = 4 << 20
//	pieces = lambda b: b"".join(struct.pack(">II", crc32c(b[i:i+C]), zlib.crc32(b[i:i+C]))
//	                            for i in range(0, len(b), C))
//	hashlib.sha256(pieces(b)).hexdigest()[:32]
func TestIdentifyHash(t *testing.T) {
	long := make([]byte, 9<<20+5) // three pieces, the last 5 bytes long
	for i := range long {
		long[i] = byte((i*7 + 3) % 251)
	}
	cases := []struct {
		name    string
		content []byte
		want    string
	}{
		// The empty file has no pieces: SHA-256 of nothing (FIPS 180-4).
		{"empty", nil, "e3b0c44298fc1c149afbf4c8996fb924"},
		{"abc", []byte("abc"), "d1f9e17cde0ff54d43471b5774b03c02"},
		{"three pieces", long, "7f8abb572a3772e41649bf4526682800"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			p := filepath.Join(t.TempDir(), "f.bin")
			if err := os.WriteFile(p, c.content, 0o644); err != nil {
				t.Fatal(err)
			}
			id, err := Identify(p)
			if err != nil {
				t.Fatal(err)
			}
			if id.Hash != hashPrefix+c.want {
				t.Errorf("hash %s, want %s%s", id.Hash, hashPrefix, c.want)
			}
			if id.Size != int64(len(c.content)) || id.Path != p || id.ModTime.Location() != time.UTC {
				t.Errorf("id %+v", id)
			}
			if h, err := HashBytes(c.content); err != nil || h != id.Hash {
				t.Errorf("hash of the bytes in memory %s, %v; want %s", h, err, id.Hash)
			}
		})
	}
	// The CRCs themselves, against the check values of the CRC catalogue
	// (crc32("123456789")): CRC-32C 0xE3069283, CRC-32 0xCBF43926.
	if d := pieceDigest([]byte("123456789")); d != [8]byte{0xE3, 0x06, 0x92, 0x83, 0xCB, 0xF4, 0x39, 0x26} {
		t.Errorf("piece digest of 123456789 = % x", d)
	}
	if _, err := Identify(filepath.Join(t.TempDir(), "none.npy")); err == nil || !strings.Contains(err.Error(), "none.npy") {
		t.Errorf("missing file: %v", err)
	}
}

func TestFileIDCompareAndDiff(t *testing.T) {
	p := filepath.Join(t.TempDir(), "resp.csv")
	if err := os.WriteFile(p, []byte("a,b\n1,2\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	a, err := Identify(p)
	if err != nil {
		t.Fatal(err)
	}
	b, _ := Identify(p)
	if a != b || a.Diff(b) != "" {
		t.Errorf("two identities of the same file differ: %v / %v: %q", a, b, a.Diff(b))
	}
	js, err := json.Marshal(a)
	if err != nil {
		t.Fatal(err)
	}
	var back FileID
	if err := json.Unmarshal(js, &back); err != nil || back != a {
		t.Errorf("JSON round trip %s gives %+v (%v), want == %+v", js, back, err, a)
	}
	if s := a.String(); !strings.Contains(s, "resp.csv (8 bytes, modified ") || !strings.Contains(s, hashPrefix) {
		t.Errorf("String() = %q", s)
	}
	c := a
	c.Size = 1180
	a.Size = 1200
	c.ModTime = time.Date(2026, 3, 4, 12, 5, 10, 0, time.UTC)
	a.ModTime = time.Date(2026, 3, 4, 12, 1, 3, 0, time.UTC)
	c.Hash = hashPrefix + "00"
	want := "size 1200 -> 1180 bytes; modified 12:01:03 -> 12:05:10 UTC; content differs"
	if got := a.Diff(c); got != want {
		t.Errorf("Diff = %q, want %q", got, want)
	}
	c.ModTime = c.ModTime.AddDate(0, 0, 1)
	if got := a.Diff(c); !strings.Contains(got, "modified 2026-03-04 12:01:03 -> 2026-03-05 12:05:10 UTC") {
		t.Errorf("Diff across days = %q", got)
	}
	c.Hash = ""
	if got := a.Diff(c); strings.Contains(got, "content") {
		t.Errorf("Diff with an unknown hash = %q, should not compare content", got)
	}
}

// TestHashShortFile: a file that ends before the size it had when opened
// (truncated while hashed) gives an error wrapping ErrChanged.
func TestHashShortFile(t *testing.T) {
	r := strings.NewReader(strings.Repeat("x", 5<<20))
	_, err := hashReaderAt(r, 9<<20, "resp.npy")
	if err == nil || !errors.Is(err, ErrChanged) || !strings.Contains(err.Error(), "resp.npy") || !strings.Contains(err.Error(), "shorter") {
		t.Errorf("error %v", err)
	}
}
