//go:build !linux

package format

// DirectMinBytes is the file size from which Direct reads past the page
// cache, on Linux; elsewhere Direct always returns nil.
var DirectMinBytes int64 = 1 << 30

// DirectReader reads whole rows of a stream's file past the page cache
// (Linux only; see direct_linux.go).
type DirectReader struct{}

// Direct returns nil outside Linux: the page cache is used.
func (s *NPYStream) Direct(always bool) *DirectReader { return nil }

// Close does nothing.
func (d *DirectReader) Close() error { return nil }

// Buffer is never called outside Linux.
func (d *DirectReader) Buffer(rows int) []byte { panic("data: DirectReader outside Linux") }

// ReadRows32 is never called outside Linux.
func (d *DirectReader) ReadRows32(buf []byte, lo, hi int) ([]float32, error) {
	panic("data: DirectReader outside Linux")
}
