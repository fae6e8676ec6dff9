package format

import (
	"bufio"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"slices"
	"strconv"
	"strings"
	"unsafe"
)

// ErrFormat is wrapped by every error about a malformed or unsupported
// .npy, .npz, .csv or .tsv file, so callers can test for it with errors.Is.
var ErrFormat = errors.New("invalid or unsupported file")

// The .npy layout follows NEP 1 ("A Simple File Format for NumPy Arrays"):
//
//	6 bytes  magic "\x93NUMPY"
//	1 byte   major version (1, 2 or 3), 1 byte minor version (0)
//	2 bytes  (v1) or 4 bytes (v2, v3) little-endian HEADER_LEN
//	HEADER_LEN bytes: a Python dict literal with the keys 'descr',
//	         'fortran_order' and 'shape', padded with spaces and ended by '\n'
//	         (latin-1 in v1 and v2, UTF-8 in v3)
//	the array data, C order or Fortran order as the header says.
const (
	npyMagic        = "\x93NUMPY"
	npyMaxHeaderLen = 1 << 20 // refuse headers above 1 MiB (numpy's own default cap is 10000 bytes)
)

// HostLittle reports whether this machine stores numbers little-endian, in
// which case little-endian array bytes can be read straight into a slice.
var HostLittle = func() bool {
	x := uint16(1)
	return *(*byte)(unsafe.Pointer(&x)) == 1
}()

type npyKind uint8

const (
	npyFloat npyKind = iota
	npyInt
	npyUint
	npyBool
)

// npyHeader is a parsed .npy header.
type npyHeader struct {
	descr   string
	kind    npyKind
	size    int              // bytes per element
	order   binary.ByteOrder // nil for one-byte elements
	fortran bool
	shape   []int
	count   int64 // number of elements
	major   int
}

// typeName is a readable element type such as "float32" or "uint16".
func (h *npyHeader) typeName() string {
	switch h.kind {
	case npyFloat:
		return fmt.Sprintf("float%d", 8*h.size)
	case npyInt:
		return fmt.Sprintf("int%d", 8*h.size)
	case npyUint:
		return fmt.Sprintf("uint%d", 8*h.size)
	}
	return "bool"
}

func shapeString(shape []int) string {
	if len(shape) == 0 {
		return "scalar"
	}
	s := make([]string, len(shape))
	for i, d := range shape {
		s[i] = strconv.Itoa(d)
	}
	return strings.Join(s, "x")
}

// formatErr builds "data: <name>: invalid or unsupported file: <msg>".
func formatErr(name, format string, args ...any) error {
	return fmt.Errorf("data: %s: %w: %s", name, ErrFormat, fmt.Sprintf(format, args...))
}

// readNPYHeader reads the magic, version and header dict from r, which holds
// total bytes in all. It returns the header and the number of bytes read.
func readNPYHeader(r io.Reader, total int64, name string) (*npyHeader, int64, error) {
	var pre [10]byte
	if total < int64(len(pre)) {
		return nil, 0, formatErr(name, "file is %d bytes long, too short for a .npy header", total)
	}
	if _, err := io.ReadFull(r, pre[:]); err != nil {
		return nil, 0, fmt.Errorf("data: %s: reading .npy header: %w", name, err)
	}
	if string(pre[:6]) != npyMagic {
		return nil, 0, formatErr(name, "not a .npy file (magic bytes are %q, want \"\\x93NUMPY\")", pre[:6])
	}
	major, minor := int(pre[6]), int(pre[7])
	if minor != 0 || major < 1 || major > 3 {
		return nil, 0, formatErr(name, ".npy format version %d.%d is not supported (1.0, 2.0 and 3.0 are)", major, minor)
	}
	var hlen int64
	used := int64(10)
	if major == 1 {
		hlen = int64(binary.LittleEndian.Uint16(pre[8:10]))
	} else {
		var b [2]byte
		if total < 12 {
			return nil, 0, formatErr(name, "file is %d bytes long, too short for a version %d.0 header", total, major)
		}
		if _, err := io.ReadFull(r, b[:]); err != nil {
			return nil, 0, fmt.Errorf("data: %s: reading .npy header: %w", name, err)
		}
		hlen = int64(binary.LittleEndian.Uint32([]byte{pre[8], pre[9], b[0], b[1]}))
		used = 12
	}
	if hlen > npyMaxHeaderLen {
		return nil, 0, formatErr(name, "header length %d bytes is over the %d-byte limit", hlen, npyMaxHeaderLen)
	}
	if hlen > total-used {
		return nil, 0, formatErr(name, "header length %d bytes runs past the end of the file (%d bytes)", hlen, total)
	}
	hb := make([]byte, hlen)
	if _, err := io.ReadFull(r, hb); err != nil {
		return nil, 0, fmt.Errorf("data: %s: reading .npy header: %w", name, err)
	}
	used += hlen
	h, err := parseNPYDict(string(hb))
	if err != nil {
		return nil, 0, formatErr(name, "header %q: %v", truncate(string(hb), 120), err)
	}
	h.major = major
	return h, used, nil
}

func truncate(s string, n int) string {
	if len(s) <= n {
		return s
	}
	return s[:n] + "..."
}

// parseNPYDict parses the header dict, e.g.
// {'descr': '<f4', 'fortran_order': False, 'shape': (3, 4), }
func parseNPYDict(s string) (*npyHeader, error) {
	p := &pyParser{s: s}
	p.space()
	if !p.eat('{') {
		return nil, errors.New("header does not start with '{'")
	}
	var (
		h                         npyHeader
		gotDescr, gotOrd, gotShap bool
	)
	for {
		p.space()
		if p.eat('}') {
			break
		}
		key, err := p.str()
		if err != nil {
			return nil, fmt.Errorf("dict key: %v", err)
		}
		p.space()
		if !p.eat(':') {
			return nil, fmt.Errorf("missing ':' after key %q", key)
		}
		p.space()
		switch key {
		case "descr":
			if p.peek() == '[' {
				return nil, errors.New("structured (record) arrays are not supported; save a plain numeric array")
			}
			d, err := p.str()
			if err != nil {
				return nil, fmt.Errorf("descr: %v", err)
			}
			h.descr = d
			gotDescr = true
		case "fortran_order":
			b, err := p.boolean()
			if err != nil {
				return nil, fmt.Errorf("fortran_order: %v", err)
			}
			h.fortran = b
			gotOrd = true
		case "shape":
			sh, err := p.tuple()
			if err != nil {
				return nil, fmt.Errorf("shape: %v", err)
			}
			h.shape = sh
			gotShap = true
		default:
			return nil, fmt.Errorf("unexpected key %q", key)
		}
		p.space()
		if p.eat(',') {
			continue
		}
		p.space()
		if !p.eat('}') {
			return nil, fmt.Errorf("expected ',' or '}' at byte %d", p.i)
		}
		break
	}
	for p.i < len(p.s) {
		switch p.s[p.i] {
		case ' ', '\n', '\r', '\t', 0:
			p.i++
		default:
			return nil, fmt.Errorf("unexpected text after the dict at byte %d", p.i)
		}
	}
	if !gotDescr || !gotOrd || !gotShap {
		return nil, errors.New("header must have the keys 'descr', 'fortran_order' and 'shape'")
	}
	if err := h.setType(); err != nil {
		return nil, err
	}
	h.count = 1
	for _, d := range h.shape {
		if d != 0 && h.count > math.MaxInt64/int64(d)/int64(h.size) {
			return nil, fmt.Errorf("shape %s is too large", shapeString(h.shape))
		}
		h.count *= int64(d)
	}
	return &h, nil
}

// setType decodes h.descr such as "<f4", ">i2", "|u1" or "|b1".
func (h *npyHeader) setType() error {
	d := h.descr
	if len(d) < 3 {
		return fmt.Errorf("dtype %q is not supported", d)
	}
	size, err := strconv.Atoi(d[2:])
	if err != nil {
		return fmt.Errorf("dtype %q is not supported", d)
	}
	h.size = size
	switch d[1] {
	case 'f':
		h.kind = npyFloat
		if size != 2 && size != 4 && size != 8 {
			return fmt.Errorf("dtype %q (float%d) is not supported; use float32 or float64", d, 8*size)
		}
	case 'i', 'u':
		h.kind = npyInt
		if d[1] == 'u' {
			h.kind = npyUint
		}
		if size != 1 && size != 2 && size != 4 && size != 8 {
			return fmt.Errorf("dtype %q is not supported", d)
		}
	case 'b':
		h.kind = npyBool
		if size != 1 {
			return fmt.Errorf("dtype %q is not supported", d)
		}
	default:
		return fmt.Errorf("dtype %q is not supported (stria reads float, integer and bool arrays)", d)
	}
	switch d[0] {
	case '<':
		h.order = binary.LittleEndian
	case '>':
		h.order = binary.BigEndian
	case '=':
		if HostLittle {
			h.order = binary.LittleEndian
		} else {
			h.order = binary.BigEndian
		}
	case '|':
		if size != 1 {
			return fmt.Errorf("dtype %q has no byte order but %d-byte elements", d, size)
		}
	default:
		return fmt.Errorf("dtype %q: unknown byte order %q", d, d[0])
	}
	if size == 1 {
		h.order = nil
	}
	return nil
}

// pyParser reads the small subset of Python literals found in .npy headers.
type pyParser struct {
	s string
	i int
}

func (p *pyParser) space() {
	for p.i < len(p.s) && (p.s[p.i] == ' ' || p.s[p.i] == '\t' || p.s[p.i] == '\n' || p.s[p.i] == '\r') {
		p.i++
	}
}

func (p *pyParser) peek() byte {
	if p.i < len(p.s) {
		return p.s[p.i]
	}
	return 0
}

func (p *pyParser) eat(c byte) bool {
	if p.peek() == c && p.i < len(p.s) {
		p.i++
		return true
	}
	return false
}

func (p *pyParser) str() (string, error) {
	q := p.peek()
	if q != '\'' && q != '"' {
		return "", fmt.Errorf("expected a quoted string at byte %d", p.i)
	}
	j := strings.IndexByte(p.s[p.i+1:], q)
	if j < 0 {
		return "", errors.New("unterminated string")
	}
	v := p.s[p.i+1 : p.i+1+j]
	if strings.IndexByte(v, '\\') >= 0 {
		return "", errors.New("escapes in strings are not supported")
	}
	p.i += j + 2
	return v, nil
}

func (p *pyParser) boolean() (bool, error) {
	switch {
	case strings.HasPrefix(p.s[p.i:], "True"):
		p.i += 4
		return true, nil
	case strings.HasPrefix(p.s[p.i:], "False"):
		p.i += 5
		return false, nil
	}
	return false, fmt.Errorf("expected True or False at byte %d", p.i)
}

// tuple parses "()", "(3,)", "(3, 4)" and also Python 2's "(3L, 4L)".
func (p *pyParser) tuple() ([]int, error) {
	if !p.eat('(') {
		return nil, fmt.Errorf("expected '(' at byte %d", p.i)
	}
	shape := []int{}
	for {
		p.space()
		if p.eat(')') {
			return shape, nil
		}
		j := p.i
		for p.i < len(p.s) && p.s[p.i] >= '0' && p.s[p.i] <= '9' {
			p.i++
		}
		if j == p.i {
			return nil, fmt.Errorf("expected a non-negative integer at byte %d", p.i)
		}
		d, err := strconv.ParseInt(p.s[j:p.i], 10, 64)
		if err != nil || d > math.MaxInt32*int64(1<<20) {
			return nil, fmt.Errorf("dimension %q is too large", p.s[j:p.i])
		}
		shape = append(shape, int(d))
		if len(shape) > 32 {
			return nil, errors.New("more than 32 dimensions")
		}
		p.eat('L')
		p.space()
		if p.eat(',') {
			continue
		}
		p.space()
		if p.eat(')') {
			return shape, nil
		}
		return nil, fmt.Errorf("expected ',' or ')' at byte %d", p.i)
	}
}

// ReadNPY reads a 1-D or 2-D .npy array into a float32 Matrix in C order.
// A 1-D array of length n becomes Rows = n, Cols = 1.
//
// Supported: element types float16, float32, float64, int8..int64,
// uint8..uint64 and bool (integers and bools are converted; large int64 and
// float64 values lose precision as float32), C or Fortran order, little or
// big endian, format versions 1.0, 2.0 and 3.0 (NEP 1).
//
// Little-endian float32 in C order (what numpy writes by default for
// float32 data) is mapped into memory copy-on-write when the data exceed
// 64 MB (on Linux, macOS and FreeBSD): the values come from the page cache
// without a copy, writes to Data change only this process's copy, and the
// mapping stays until the process ends. A file changed on disk while
// mapped changes under the matrix, and reading a value past the end of a
// truncated file faults: every pass over the values of a mapped matrix
// (Matrix.MappedFile) must run under Guard or a GuardGroup, which turn the
// fault into a *FaultError naming the file, and Recording.Unchanged at the
// end of a fit refuses a file that was modified meanwhile. Smaller files of that layout are read straight into the result
// with a single read and no per-element decoding. The file size is compared with the size the header
// implies before anything large is allocated, so a truncated file or a
// header that lies about its shape gives an error naming the file, never a
// panic or a huge allocation.
func ReadNPY(path string) (*Matrix, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("data: %w", err)
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil {
		return nil, fmt.Errorf("data: %w", err)
	}
	if st.IsDir() {
		return nil, fmt.Errorf("data: %s is a directory, not a .npy file", path)
	}
	if m, err := mapNPY(f, st.Size(), path); m != nil || err != nil {
		return m, err
	}
	if _, err := f.Seek(0, io.SeekStart); err != nil {
		return nil, fmt.Errorf("data: %w", err)
	}
	return readNPYMatrix(f, st.Size(), path)
}

// mapNPY maps a large .npy file of the fast layout (little-endian float32,
// C order) instead of reading it. It returns nil and no error when the file
// is not of that kind or cannot be mapped.
func mapNPY(f *os.File, total int64, name string) (*Matrix, error) {
	h, used, err := readNPYHeader(bufio.NewReaderSize(f, 4096), total, name)
	if err != nil {
		return nil, err
	}
	rows, cols, err := h.matrixShape(name)
	if err != nil {
		return nil, err
	}
	if err := h.checkSize(total-used, name); err != nil {
		return nil, err
	}
	if !h.fastLayout(rows, cols, 4) {
		return nil, nil
	}
	v := mapFloat32(f, used, int(h.count), name)
	if v == nil {
		return nil, nil
	}
	return &Matrix{Rows: rows, Cols: cols, Data: v}, nil
}

// readNPYMatrix reads a .npy stream of total bytes from r.
func readNPYMatrix(r io.Reader, total int64, name string) (*Matrix, error) {
	h, used, err := readNPYHeader(r, total, name)
	if err != nil {
		return nil, err
	}
	rows, cols, err := h.matrixShape(name)
	if err != nil {
		return nil, err
	}
	if err := h.checkSize(total-used, name); err != nil {
		return nil, err
	}
	m := &Matrix{Rows: rows, Cols: cols, Data: make([]float32, h.count)}
	if err := h.decode32(r, m.Data, rows, cols, name); err != nil {
		return nil, err
	}
	return m, nil
}

// ReadNPY64 reads a 1-D or 2-D .npy stream as float64 values in C order.
func ReadNPY64(r io.Reader, total int64, name string) (rows, cols int, v []float64, err error) {
	h, used, err := readNPYHeader(r, total, name)
	if err != nil {
		return 0, 0, nil, err
	}
	rows, cols, err = h.matrixShape(name)
	if err != nil {
		return 0, 0, nil, err
	}
	if err := h.checkSize(total-used, name); err != nil {
		return 0, 0, nil, err
	}
	v = make([]float64, h.count)
	if err := h.decode64(r, v, rows, cols, name); err != nil {
		return 0, 0, nil, err
	}
	return rows, cols, v, nil
}

func (h *npyHeader) matrixShape(name string) (rows, cols int, err error) {
	switch len(h.shape) {
	case 1:
		return h.shape[0], 1, nil
	case 2:
		return h.shape[0], h.shape[1], nil
	}
	return 0, 0, formatErr(name, "array has %d dimensions (shape %s); stria needs a 1-D vector or a 2-D trials x neurons matrix", len(h.shape), shapeString(h.shape))
}

func (h *npyHeader) checkSize(have int64, name string) error {
	need := h.count * int64(h.size)
	if need != have {
		return formatErr(name, "header says %s %s = %d bytes, file has %d bytes of data", shapeString(h.shape), h.typeName(), need, have)
	}
	return nil
}

// fastLayout reports whether the file bytes are already the C-order,
// host-order representation of the requested type.
func (h *npyHeader) fastLayout(rows, cols, size int) bool {
	return h.kind == npyFloat && h.size == size && HostLittle && h.order == binary.LittleEndian &&
		(!h.fortran || rows <= 1 || cols <= 1)
}

// expectEOF makes sure nothing follows the data. Reading to the end also
// lets a zip entry reader verify its checksum.
func expectEOF(r io.Reader, name string) error {
	var one [1]byte
	n, err := r.Read(one[:])
	if n > 0 {
		return formatErr(name, "file has more data than its header says")
	}
	if err != nil && err != io.EOF {
		return fmt.Errorf("data: %s: %w", name, err)
	}
	if err == nil {
		// A reader may return 0, nil; try once more.
		n, err = r.Read(one[:])
		if n > 0 {
			return formatErr(name, "file has more data than its header says")
		}
		if err != nil && err != io.EOF {
			return fmt.Errorf("data: %s: %w", name, err)
		}
	}
	return nil
}

func readErr(name string, err error) error {
	if err == io.ErrUnexpectedEOF || err == io.EOF {
		return formatErr(name, "file ends before the data the header announces")
	}
	return fmt.Errorf("data: %s: reading array data: %w", name, err)
}

func (h *npyHeader) decode32(r io.Reader, dst []float32, rows, cols int, name string) error {
	if h.fastLayout(rows, cols, 4) {
		if len(dst) > 0 {
			b := unsafe.Slice((*byte)(unsafe.Pointer(&dst[0])), 4*len(dst))
			if _, err := io.ReadFull(r, b); err != nil {
				return readErr(name, err)
			}
		}
		return expectEOF(r, name)
	}
	return h.decodeSlow(r, rows, cols, name, func(i int, v float64) { dst[i] = float32(v) })
}

func (h *npyHeader) decode64(r io.Reader, dst []float64, rows, cols int, name string) error {
	if h.fastLayout(rows, cols, 8) {
		if len(dst) > 0 {
			b := unsafe.Slice((*byte)(unsafe.Pointer(&dst[0])), 8*len(dst))
			if _, err := io.ReadFull(r, b); err != nil {
				return readErr(name, err)
			}
		}
		return expectEOF(r, name)
	}
	return h.decodeSlow(r, rows, cols, name, func(i int, v float64) { dst[i] = v })
}

// decodeSlow reads the data in chunks, converts each element to float64 and
// hands it to set with its C-order index.
func (h *npyHeader) decodeSlow(r io.Reader, rows, cols int, name string, set func(i int, v float64)) error {
	get := h.getter()
	const chunk = 1 << 16
	buf := make([]byte, chunk-chunk%h.size)
	// File order is C order unless fortran_order is set on a 2-D array, in
	// which case element k of the file is (k % rows, k / rows).
	fortran := h.fortran && len(h.shape) == 2
	var k int64
	i, j := 0, 0 // row, column of element k in Fortran order
	for k < h.count {
		n := int64(len(buf) / h.size)
		if rem := h.count - k; rem < n {
			n = rem
		}
		b := buf[:n*int64(h.size)]
		if _, err := io.ReadFull(r, b); err != nil {
			return readErr(name, err)
		}
		for e := 0; e < int(n); e++ {
			v := get(b[e*h.size:])
			if fortran {
				set(i*cols+j, v)
				i++
				if i == rows {
					i = 0
					j++
				}
			} else {
				set(int(k)+e, v)
			}
		}
		k += n
	}
	return expectEOF(r, name)
}

// getter returns a function converting one element's bytes to float64.
func (h *npyHeader) getter() func(b []byte) float64 {
	o := h.order
	switch h.kind {
	case npyFloat:
		switch h.size {
		case 2:
			return func(b []byte) float64 { return float64(halfToFloat32(o.Uint16(b))) }
		case 4:
			return func(b []byte) float64 { return float64(math.Float32frombits(o.Uint32(b))) }
		default:
			return func(b []byte) float64 { return math.Float64frombits(o.Uint64(b)) }
		}
	case npyInt:
		switch h.size {
		case 1:
			return func(b []byte) float64 { return float64(int8(b[0])) }
		case 2:
			return func(b []byte) float64 { return float64(int16(o.Uint16(b))) }
		case 4:
			return func(b []byte) float64 { return float64(int32(o.Uint32(b))) }
		default:
			return func(b []byte) float64 { return float64(int64(o.Uint64(b))) }
		}
	case npyUint:
		switch h.size {
		case 1:
			return func(b []byte) float64 { return float64(b[0]) }
		case 2:
			return func(b []byte) float64 { return float64(o.Uint16(b)) }
		case 4:
			return func(b []byte) float64 { return float64(o.Uint32(b)) }
		default:
			return func(b []byte) float64 { return float64(o.Uint64(b)) }
		}
	}
	return func(b []byte) float64 {
		if b[0] != 0 {
			return 1
		}
		return 0
	}
}

// halfToFloat32 converts IEEE 754 binary16 bits to float32.
func halfToFloat32(h uint16) float32 {
	sign := uint32(h>>15) << 31
	exp := uint32(h>>10) & 0x1f
	frac := uint32(h) & 0x3ff
	switch {
	case exp == 0x1f: // Inf or NaN
		return math.Float32frombits(sign | 0x7f800000 | frac<<13)
	case exp == 0:
		if frac == 0 {
			return math.Float32frombits(sign)
		}
		// Subnormal half: value = frac * 2^-24.
		v := float32(frac) * (1.0 / (1 << 24))
		if sign != 0 {
			v = -v
		}
		return v
	}
	return math.Float32frombits(sign | (exp+127-15)<<23 | frac<<13)
}

// ReadArray reads an .npy array of any number of dimensions as float64
// values in C order, with its shape. Arrays of more than two dimensions
// must be in C order (stria writes them so); the element types are those
// of ReadNPY.
func ReadArray(path string) (shape []int, v []float64, err error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, nil, fmt.Errorf("data: %w", err)
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil {
		return nil, nil, fmt.Errorf("data: %w", err)
	}
	r := bufio.NewReaderSize(f, 1<<16)
	h, used, err := readNPYHeader(r, st.Size(), path)
	if err != nil {
		return nil, nil, err
	}
	if err := h.checkSize(st.Size()-used, path); err != nil {
		return nil, nil, err
	}
	var rows, cols int
	switch {
	case len(h.shape) <= 2:
		if rows, cols, err = h.matrixShape(path); err != nil {
			return nil, nil, err
		}
	case h.fortran:
		return nil, nil, formatErr(path, "a %d-D array in Fortran order; stria reads arrays of more than two dimensions in C order only", len(h.shape))
	default:
		rows = h.shape[0]
		cols = int(h.count) / max(rows, 1)
	}
	v = make([]float64, h.count)
	if err := h.decode64(r, v, rows, cols, path); err != nil {
		return nil, nil, err
	}
	return slices.Clone(h.shape), v, nil
}
