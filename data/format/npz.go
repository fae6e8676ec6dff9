package format

import (
	"archive/zip"
	"fmt"
	"io"
	"os"
	"sort"
	"strings"
)

// ReadNPZ reads the named array from an .npz file (a zip archive of .npy
// files, stored or deflated, as written by numpy.savez and
// numpy.savez_compressed). The array "resp" is the entry "resp.npy"; a name
// that already ends in ".npy" is used as it is. An empty name requires the
// archive to hold exactly one array. The array rules are those of ReadNPY.
func ReadNPZ(path, name string) (*Matrix, error) {
	var m *Matrix
	err := WithNPZEntry(path, name, func(r io.Reader, size int64, label string) error {
		var err error
		m, err = readNPYMatrix(r, size, label)
		return err
	})
	return m, err
}

// NPZNames lists the arrays in an .npz file (entry names without ".npy"),
// sorted.
func NPZNames(path string) ([]string, error) {
	z, err := zip.OpenReader(path)
	if err != nil {
		return nil, npzOpenErr(path, err)
	}
	defer z.Close()
	return npzNames(z.File), nil
}

func npzOpenErr(path string, err error) error {
	if err == zip.ErrFormat {
		return formatErr(path, "not a valid .npz (zip) archive")
	}
	return fmt.Errorf("data: %s: %w", path, err)
}

func npzNames(files []*zip.File) []string {
	var names []string
	for _, f := range files {
		if strings.HasSuffix(f.Name, ".npy") {
			names = append(names, strings.TrimSuffix(f.Name, ".npy"))
		}
	}
	sort.Strings(names)
	return names
}

// WithNPZEntry opens the entry for name and calls fn with its reader, its
// uncompressed size and a label "path[name]" for messages.
func WithNPZEntry(path, name string, fn func(r io.Reader, size int64, label string) error) error {
	st, err := os.Stat(path)
	if err != nil {
		return fmt.Errorf("data: %w", err)
	}
	z, err := zip.OpenReader(path)
	if err != nil {
		return npzOpenErr(path, err)
	}
	defer z.Close()
	names := npzNames(z.File)
	var entry *zip.File
	if name == "" {
		if len(names) != 1 {
			return fmt.Errorf("data: %s holds %d arrays (%s); say which one to use", path, len(names), strings.Join(names, ", "))
		}
		name = names[0]
	}
	want := name
	if !strings.HasSuffix(want, ".npy") {
		want += ".npy"
	}
	for _, f := range z.File {
		if f.Name == want {
			entry = f
			break
		}
	}
	if entry == nil {
		return fmt.Errorf("data: %s has no array %q (it has: %s)", path, strings.TrimSuffix(name, ".npy"), strings.Join(names, ", "))
	}
	label := fmt.Sprintf("%s[%s]", path, strings.TrimSuffix(want, ".npy"))
	size := entry.UncompressedSize64
	csize := entry.CompressedSize64
	// Guard against lying sizes before allocating: the compressed data must
	// fit in the archive, and deflate cannot expand by more than about
	// 1032:1, so a larger declared size is a corrupt or hostile entry.
	if csize > uint64(st.Size()) {
		return formatErr(label, "entry claims %d compressed bytes in a %d-byte archive", csize, st.Size())
	}
	switch entry.Method {
	case zip.Store:
		if size != csize {
			return formatErr(label, "stored entry has %d bytes but claims %d", csize, size)
		}
	case zip.Deflate:
		if size > 1100*csize+1024 {
			return formatErr(label, "entry claims %d bytes from %d compressed bytes, more than deflate allows", size, csize)
		}
	default:
		return formatErr(label, "zip compression method %d is not supported (stored or deflated only)", entry.Method)
	}
	if size > 1<<62 {
		return formatErr(label, "entry size %d is too large", size)
	}
	rc, err := entry.Open()
	if err != nil {
		return formatErr(label, "%v", err)
	}
	defer rc.Close()
	return fn(rc, int64(size), label)
}
