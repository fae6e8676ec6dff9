package compare

import (
	"fmt"
	"io"
	"sync"
	"time"
)

// Timings collects the wall time of each phase of a comparison (stria
// compare --timings). Phases that run at once (the units of several
// workers) add up, so their sum can exceed the wall time of the run; each
// phase also counts how often it ran. A nil *Timings records nothing, so
// callers need no check. It is safe for concurrent use.
type Timings struct {
	mu    sync.Mutex
	order []string
	total map[string]time.Duration
	count map[string]int
}

// NewTimings returns an empty record.
func NewTimings() *Timings {
	return &Timings{total: map[string]time.Duration{}, count: map[string]int{}}
}

// Add records d under the phase name.
func (t *Timings) Add(name string, d time.Duration) {
	if t == nil {
		return
	}
	t.mu.Lock()
	defer t.mu.Unlock()
	if _, ok := t.total[name]; !ok {
		t.order = append(t.order, name)
	}
	t.total[name] += d
	t.count[name]++
}

// Since records the time since start under the phase name and returns now,
// to start the next phase.
func (t *Timings) Since(name string, start time.Time) time.Time {
	now := time.Now()
	t.Add(name, now.Sub(start))
	return now
}

// Write prints one line per phase, in the order phases first ran: the
// summed wall time and, for phases that ran more than once, the count.
func (t *Timings) Write(w io.Writer) {
	if t == nil {
		return
	}
	t.mu.Lock()
	defer t.mu.Unlock()
	for _, name := range t.order {
		if n := t.count[name]; n > 1 {
			fmt.Fprintf(w, "timing: %-44s %8.3f s (%d times, summed)\n", name, t.total[name].Seconds(), n)
		} else {
			fmt.Fprintf(w, "timing: %-44s %8.3f s\n", name, t.total[name].Seconds())
		}
	}
}
