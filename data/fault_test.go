//go:build linux || darwin || freebsd

package data

import (
	"errors"
	"os"
	"path/filepath"
	"runtime/debug"
	"strings"
	"sync"
	"testing"

	"github.com/strialab/stria/data/condstats"
	"github.com/strialab/stria/data/format"
)

// mappedRecording writes a rows x cols float32 .npy (value t*cols+n) and a
// stimulus file to a temporary folder, lowers the mapping threshold so the
// responses are mapped, and loads them. It returns the recording and the
// responses path.
func mappedRecording(t *testing.T, rows, cols int) (*Recording, string) {
	t.Helper()
	dir := t.TempDir()
	resp := filepath.Join(dir, "resp.npy")
	stim := filepath.Join(dir, "stim.npy")
	v := make([]float32, rows*cols)
	for i := range v {
		v[i] = float32(i % 1000)
	}
	s := make([]float64, rows)
	for i := range s {
		s[i] = float64(i%4) * 90
	}
	if err := format.WriteNPY(resp, []int{rows, cols}, v); err != nil {
		t.Fatal(err)
	}
	if err := format.WriteNPY64(stim, []int{rows}, s); err != nil {
		t.Fatal(err)
	}
	saved := format.MapThreshold
	format.MapThreshold = 0
	t.Cleanup(func() { format.MapThreshold = saved })
	rec, err := Load(Source{Responses: resp, Stimulus: stim})
	if err != nil {
		t.Fatal(err)
	}
	if got := rec.Y.MappedFile(); got != resp {
		t.Fatalf("MappedFile() = %q, want %q (the responses should be mapped)", got, resp)
	}
	return rec, resp
}

// sink keeps the compiler from dropping reads whose result is unused.
var sink struct {
	sync.Mutex
	v float64
}

func sumAll(v []float32) {
	s := 0.0
	for _, x := range v {
		s += float64(x)
	}
	sink.Lock()
	sink.v += s
	sink.Unlock()
}

func wantFault(t *testing.T, what string, err error, file string) {
	t.Helper()
	var fe *format.FaultError
	if !errors.As(err, &fe) || fe.File != file || !errors.Is(err, format.ErrChanged) {
		t.Fatalf("%s: error %v, want a *format.FaultError for %s wrapping format.ErrChanged", what, err, file)
	}
	if msg := err.Error(); !strings.Contains(msg, file) || !strings.Contains(msg, "changed or was truncated while being read") {
		t.Errorf("%s: message %q", what, msg)
	}
}

// TestGuardTruncatedMapping truncates a mapped recording and reads it
// through every guarded path: the reads must return a *FaultError naming
// the file instead of ending the process with "fatal error: fault".
func TestGuardTruncatedMapping(t *testing.T) {
	rec, resp := mappedRecording(t, 2048, 256) // 2 MiB of values
	cond := make([]int, rec.Y.Rows)
	for i := range cond {
		cond[i] = i % 4
	}
	if err := format.Guard(func() { sumAll(rec.Y.Data) }); err != nil {
		t.Fatalf("intact file: %v", err)
	}
	if _, err := CheckWith(rec, cond, CheckOptions{NBins: 4}); err != nil {
		t.Fatalf("intact file: %v", err)
	}
	if err := os.Truncate(resp, 4096); err != nil {
		t.Fatal(err)
	}

	wantFault(t, "Guard", format.Guard(func() { sumAll(rec.Y.Data) }), resp)

	_, err := CheckWith(rec, cond, CheckOptions{NBins: 4})
	wantFault(t, "CheckWith", err, resp)

	all := make([]int, rec.Y.Rows)
	for i := range all {
		all[i] = i
	}
	wantFault(t, "condstats.New", format.Guard(func() { condstats.New(rec.Y, cond, all, 4) }), resp)

	var g format.GuardGroup
	for w := 0; w < 3; w++ {
		g.Go(func() { sumAll(rec.Y.Data[w*len(rec.Y.Data)/3:]) })
	}
	wantFault(t, "GuardGroup", g.Wait(), resp)

	// A package that cannot import data (eval) recovers the fault in its
	// worker and panics again with it on the caller's goroutine.
	wantFault(t, "forwarded fault", format.Guard(func() {
		var saved any
		var wg sync.WaitGroup
		wg.Add(1)
		go func() {
			defer wg.Done()
			defer func() {
				if r := recover(); r != nil {
					saved = r
				}
			}()
			debug.SetPanicOnFault(true)
			sumAll(rec.Y.Data)
		}()
		wg.Wait()
		if saved != nil {
			panic(saved)
		}
	}), resp)

	// A copy (runtime memmove) faults the same way.
	dst := make([]float32, len(rec.Y.Data))
	wantFault(t, "copy", format.Guard(func() { copy(dst, rec.Y.Data) }), resp)

	// Writing the values back out fails (a fault, or the kernel's EFAULT
	// when it reads them itself) and leaves no file behind.
	outDir := t.TempDir()
	out := filepath.Join(outDir, "copy.npy")
	if err := format.WriteNPY(out, []int{rec.Y.Rows, rec.Y.Cols}, rec.Y.Data); err == nil || !strings.Contains(err.Error(), "copy.npy") {
		t.Errorf("WriteNPY of a truncated mapping: %v", err)
	}
	if left, _ := os.ReadDir(outDir); len(left) != 0 {
		t.Errorf("WriteNPY left %v behind", left)
	}

	// Pages of the file still present read fine.
	if err := format.Guard(func() { sumAll(rec.Y.Data[:512]) }); err != nil {
		t.Errorf("reading the part still in the file: %v", err)
	}
}

// TestGuardLargeMapping does the same with the real threshold: a recording
// above 64 MB is mapped by ReadNPY without any test hook.
func TestGuardLargeMapping(t *testing.T) {
	if testing.Short() {
		t.Skip("writes a 68 MB file")
	}
	p := filepath.Join(t.TempDir(), "big.npy")
	rows, cols := 4352, 4096 // 68 MiB of float32
	if err := format.WriteNPY(p, []int{rows, cols}, make([]float32, rows*cols)); err != nil {
		t.Fatal(err)
	}
	m, err := format.ReadNPY(p)
	if err != nil {
		t.Fatal(err)
	}
	if m.MappedFile() != p {
		t.Fatal("a 68 MB float32 .npy was not mapped")
	}
	if err := os.Truncate(p, 1<<20); err != nil {
		t.Fatal(err)
	}
	wantFault(t, "Guard", format.Guard(func() { sumAll(m.Data) }), p)
}
