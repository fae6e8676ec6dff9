package main

import (
	"fmt"
	"io"
	"os"
	"runtime"
	"strings"
)

// benchOut writes the measurements of a striabench run in the Go
// benchmark format (one line per timed command: name, iterations 1,
// ns/op of the wall time, then the other values with their units), so
// that runs before and after a change compare with benchstat:
//
//	go run ./cmd/striabench -benchfmt old.txt ...   (repeat for -count)
//	benchstat old.txt new.txt
//
// Names carry the sizes (BenchmarkFit/neurons=24000/trials=4600), so a
// line of the README's speed table and its rerun share a name.
type benchOut struct {
	w io.Writer
}

// bench is the run's benchmark-format output (nil: none).
var bench *benchOut

// openBench opens path for appending and writes the configuration lines
// benchstat reads.
func openBench(path string) (*benchOut, func() error, error) {
	f, err := os.OpenFile(path, os.O_CREATE|os.O_WRONLY|os.O_APPEND, 0o644)
	if err != nil {
		return nil, nil, err
	}
	fmt.Fprintf(f, "goos: %s\ngoarch: %s\npkg: github.com/strialab/stria/cmd/striabench\ncpu: %s\n", runtime.GOOS, runtime.GOARCH, cpuName())
	return &benchOut{w: f}, f.Close, nil
}

// line writes one measurement: the wall time in seconds, then name-unit
// pairs of other values.
func (b *benchOut) line(name string, wall float64, kv ...any) {
	if b == nil {
		return
	}
	var sb strings.Builder
	fmt.Fprintf(&sb, "Benchmark%s \t1\t%.0f ns/op", name, wall*1e9)
	for i := 0; i+1 < len(kv); i += 2 {
		fmt.Fprintf(&sb, "\t%.6g %s", kv[i+1], kv[i])
	}
	fmt.Fprintln(b.w, sb.String())
}

// cpuName is the processor's model name from /proc/cpuinfo, or "unknown".
func cpuName() string {
	raw, err := os.ReadFile("/proc/cpuinfo")
	if err != nil {
		return "unknown"
	}
	for _, l := range strings.Split(string(raw), "\n") {
		if k, v, ok := strings.Cut(l, ":"); ok && strings.TrimSpace(k) == "model name" {
			return strings.TrimSpace(v)
		}
	}
	return "unknown"
}
