package format

import (
	"errors"
	"fmt"
	"runtime"
	"runtime/debug"
	"sync"
	"unsafe"
)

// ErrChanged is wrapped by every error about a file that changed, was
// truncated, removed or replaced while stria was reading it, so callers can
// test for it with errors.Is.
var ErrChanged = errors.New("the file changed while stria was reading it")

// FaultError reports a read of mapped memory that failed because the file
// behind the mapping was truncated (or otherwise became unreadable) while
// stria used it. It wraps ErrChanged.
type FaultError struct {
	File string // the mapped file
}

func (e *FaultError) Error() string {
	return fmt.Sprintf("data: %s: the file changed or was truncated while being read; "+
		"the results would mix two versions of it: run again on a copy that nothing writes to", e.File)
}

func (e *FaultError) Unwrap() error { return ErrChanged }

// mapping is one file mapped into memory: bytes [lo, hi) of the address
// space hold the whole file.
type mapping struct {
	base   unsafe.Pointer // &file[0]
	lo, hi uintptr
	path   string
	off    int // byte offset of the array data in the file
}

// mappings lists every mapping made by this process. Mappings are never
// removed (they live until the process ends), so an address found here
// always belongs to the file named.
var mappings struct {
	sync.RWMutex
	list []mapping
}

func addMapping(b []byte, off int, path string) {
	if len(b) == 0 {
		return
	}
	lo := uintptr(unsafe.Pointer(&b[0]))
	mappings.Lock()
	mappings.list = append(mappings.list, mapping{base: unsafe.Pointer(&b[0]), lo: lo, hi: lo + uintptr(len(b)), path: path, off: off})
	mappings.Unlock()
}

// mappingAt returns the mapping holding address a.
func mappingAt(a uintptr) (mapping, bool) {
	mappings.RLock()
	defer mappings.RUnlock()
	for _, m := range mappings.list {
		if a >= m.lo && a < m.hi {
			return m, true
		}
	}
	return mapping{}, false
}

// MappedBytes returns the whole mapped file behind v (a slice of mapped
// float32 values) and the byte offset of v[0] in it; ok is false when v is
// not mapped.
func MappedBytes(v []float32) (file []byte, off int, path string, ok bool) {
	if len(v) == 0 {
		return nil, 0, "", false
	}
	a := uintptr(unsafe.Pointer(&v[0]))
	m, ok := mappingAt(a)
	if !ok {
		return nil, 0, "", false
	}
	return unsafe.Slice((*byte)(m.base), m.hi-m.lo), int(a - m.lo), m.path, true
}

// MappedFile returns the file m.Data is mapped from, or "" when the values
// are in ordinary memory (read, not mapped). Every pass over the values of
// a mapped matrix must run under Guard or a GuardGroup.
func (m *Matrix) MappedFile() string {
	if m == nil || len(m.Data) == 0 {
		return ""
	}
	mp, ok := mappingAt(uintptr(unsafe.Pointer(&m.Data[0])))
	if !ok {
		return ""
	}
	return mp.path
}

// faultOf turns a recovered panic value into a *FaultError when it is one:
// either a *FaultError raised again by a function that has no error result
// (condstats.New), or the runtime's fault on an address inside a mapped file
// (with debug.SetPanicOnFault on, as Guard sets it). It returns nil for any
// other value, which the caller panics with again.
func faultOf(r any) *FaultError {
	switch v := r.(type) {
	case *FaultError:
		return v
	case runtime.Error:
		a, ok := v.(interface{ Addr() uintptr })
		if !ok {
			return nil
		}
		if m, ok := mappingAt(a.Addr()); ok {
			return &FaultError{File: m.path}
		}
	}
	return nil
}

// Guard runs fn on the calling goroutine and turns a failed read of mapped
// memory into an error: a recording of more than 64 MB is mapped (see
// ReadNPY), and if its file is truncated while stria reads it, touching a
// value past the new end raises a memory fault that would otherwise end the
// process with "fatal error: fault" and a goroutine dump. Under Guard the
// fault becomes a *FaultError naming the file ("data: resp.npy: the file
// changed or was truncated while being read; ...").
//
// Guard also returns a *FaultError that fn (or a function it calls) raised
// with panic, which is how condstats.New and the GuardGroup users without an
// error result pass a fault up; and a runtime fault that a worker goroutine
// recovered and raised again on this goroutine (the pattern for packages
// that cannot import data, such as eval):
//
//	defer func() { if r := recover(); r != nil { saved = r } }() // in the worker
//	debug.SetPanicOnFault(true)                                   // in the worker
//	...
//	wg.Wait(); if saved != nil { panic(saved) }                  // in the caller of wg.Wait
//
// Any other panic is not touched: Guard panics again with the same value.
//
// The guard covers the calling goroutine only (debug.SetPanicOnFault is
// per goroutine): goroutines started by fn that read mapped values must run
// under their own Guard, or be started with a GuardGroup. A matrix that is
// not mapped needs no guard, and Guard costs nothing measurable (it sets a
// flag and defers a recover), so the simplest rule is: every pass over
// recording values runs under Guard or a GuardGroup.
func Guard(fn func()) (err error) {
	old := debug.SetPanicOnFault(true)
	defer func() {
		debug.SetPanicOnFault(old)
		if r := recover(); r != nil {
			if fe := faultOf(r); fe != nil {
				err = fe
				return
			}
			panic(r)
		}
	}()
	fn()
	return nil
}

// GuardGroup runs goroutines that read mapped values, each under Guard, and
// reports the first fault. The zero value is ready to use; a GuardGroup
// must not be copied after first use.
//
//	var g format.GuardGroup
//	for w := range workers {
//		g.Go(func() { ... read rows ... })
//	}
//	if err := g.Wait(); err != nil { return err }
type GuardGroup struct {
	wg  sync.WaitGroup
	mu  sync.Mutex
	err error
}

// Go runs fn in a new goroutine under Guard.
func (g *GuardGroup) Go(fn func()) {
	g.wg.Add(1)
	go func() {
		defer g.wg.Done()
		if err := Guard(fn); err != nil {
			g.mu.Lock()
			if g.err == nil {
				g.err = err
			}
			g.mu.Unlock()
		}
	}()
}

// Wait waits for every goroutine started by Go and returns the first fault
// (a *FaultError), or nil.
func (g *GuardGroup) Wait() error {
	g.wg.Wait()
	g.mu.Lock()
	defer g.mu.Unlock()
	return g.err
}
