package eval

import (
	"runtime"
	"testing"
)

// TestEachBlockForwardsPanics checks that a panic in a scoring worker (a
// memory fault on a truncated mapped file is one, under
// debug.SetPanicOnFault) reaches the caller's goroutine, where format.Guard
// can turn it into an error, instead of ending the process from the
// worker.
func TestEachBlockForwardsPanics(t *testing.T) {
	if runtime.GOMAXPROCS(0) < 2 {
		t.Log("one core: a single worker")
	}
	sh := &shared{n: 4 * scoreBlock, nbins: 3}
	dst := make([]Scores, sh.n)
	type marker struct{ block int }
	var got any
	func() {
		defer func() { got = recover() }()
		eachBlock(dst, sh, func(sc *scorer, d []Scores, n0, w int) {
			if n0 == 2*scoreBlock {
				panic(marker{n0})
			}
		})
	}()
	if m, ok := got.(marker); !ok || m.block != 2*scoreBlock {
		t.Errorf("got panic value %v on the caller, want marker{%d}", got, 2*scoreBlock)
	}
	// Without a panic nothing is raised.
	func() {
		defer func() {
			if r := recover(); r != nil {
				t.Errorf("panic %v without a failing worker", r)
			}
		}()
		eachBlock(dst, sh, func(sc *scorer, d []Scores, n0, w int) {})
	}()
}
