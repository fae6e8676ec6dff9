package main

import (
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/data/synth"
	"github.com/strialab/stria/train/runfolder"
)

// TestManyRecordingsArray compares 50 small recordings (8 with -short),
// streamed to disk by synth.WriteNPY, in one run and as 7 array tasks
// then gathered (all in this process), and requires the same files: the
// per-recording tables, the pooled tables and every recording's folder.
// Sessions differ in size and tuning; some have many untuned cells and
// few test trials in some conditions.
func TestManyRecordingsArray(t *testing.T) {
	n := 50
	if testing.Short() {
		n = 8
	}
	dir := t.TempDir()
	for k := 0; k < n; k++ {
		sub := filepath.Join(dir, "sessions", fmt.Sprintf("s%02d", k+1))
		if err := os.MkdirAll(sub, 0o755); err != nil {
			t.Fatal(err)
		}
		cfg := synth.StreamConfig{Neurons: 12 + 7*(k%5), Trials: 120 + 10*(k%4), UntunedFrac: 0.1, GainSD: 0.15, NoiseSD: 0.5, Seed: uint64(300 + k)}
		if k%5 == 2 {
			cfg.UntunedFrac = 0.6
		}
		for {
			stim, err := synth.WriteNPY(filepath.Join(sub, "responses.npy"), cfg)
			if err != nil {
				t.Fatal(err)
			}
			var count [6]int
			for _, v := range stim {
				count[min(5, int(v/60))]++
			}
			if min(count[0], count[1], count[2], count[3], count[4], count[5]) >= 6 {
				if err := format.WriteNPY64(filepath.Join(sub, "heading.npy"), []int{len(stim)}, stim); err != nil {
					t.Fatal(err)
				}
				break
			}
			cfg.Seed += 1000
		}
	}
	cfg := filepath.Join(dir, "many.yaml")
	src := `seed: 9
recordings:
  - responses: sessions/*/responses.npy
    stimulus: heading.npy
axis: {name: heading, unit: deg, min: 0, max: 360, periodic: true, bin_width: 60}
split: {folds: 3, keep_blocks: false}
model:
  layers: [{channels: 2, kernel: 3}]
train: {max_epochs: 8, patience: 8}
compare:
  baselines: [condmean, vonmises, smoothlinear]
  starts: 2
  output: full
`
	if err := os.WriteFile(cfg, []byte(src), 0o644); err != nil {
		t.Fatal(err)
	}
	if out, err := runCLI(t, "compare", "--config", cfg, "--quiet"); err != nil {
		t.Fatalf("in one run: %v\n%s", err, out)
	} else if !strings.Contains(out, fmt.Sprintf("all %d recordings, neurons pooled", n)) {
		t.Errorf("no pooled table over %d recordings in:\n%.2000s", n, out)
	}
	full := outputs(t, filepath.Join(dir, "full"))
	per := full[runfolder.FilePerRecording]
	for _, name := range []string{"s01-responses", fmt.Sprintf("s%02d-responses", n)} {
		if !bytes.Contains(per, []byte(name)) {
			t.Errorf("%s lacks recording %s", runfolder.FilePerRecording, name)
		}
	}
	tasks := filepath.Join(dir, "tasks")
	for i := 1; i <= 7; i++ {
		if out, err := runCLI(t, "compare", "--config", cfg, "--out", tasks, "--array-task", strconv.Itoa(i), "--array-task-count", "7", "--quiet"); err != nil {
			t.Fatalf("array task %d: %v\n%s", i, err, out)
		}
	}
	if out, err := runCLI(t, "gather", tasks); err != nil {
		t.Fatalf("gather: %v\n%s", err, out)
	}
	sameOutputs(t, full, outputs(t, tasks), fmt.Sprintf("%d recordings as 7 array tasks", n))
	if testing.Short() {
		return
	}
	// The report over 50 recordings holds the tables only (export.ManyReportRecordings).
	rep := filepath.Join(dir, "many-report.html")
	if out, err := runCLI(t, "report", "--out", rep, tasks); err != nil {
		t.Fatalf("report: %v\n%s", err, out)
	}
	html, err := os.ReadFile(rep)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Contains(html, []byte("this report holds the tables only")) || bytes.Contains(html, []byte("Recording s01-responses")) || len(html) > 2<<20 {
		t.Errorf("report over %d recordings: %d bytes, the note %v, a section per recording %v", n, len(html),
			bytes.Contains(html, []byte("this report holds the tables only")), bytes.Contains(html, []byte("Recording s01-responses")))
	}
}
