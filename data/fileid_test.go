package data

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/strialab/stria/data/format"
)

// writeRecording writes resp.csv (stimulus column "stim", neurons n0, n1)
// with 8 trials, one per 45 degrees, and returns its path.
func writeRecording(t *testing.T, dir string) string {
	t.Helper()
	p := filepath.Join(dir, "resp.csv")
	text := "stim,n0,n1\n"
	for i := 0; i < 8; i++ {
		text += []string{"0", "45", "90", "135", "180", "225", "270", "315"}[i] + "," + []string{"1", "2", "3", "4", "5", "6", "7", "8"}[i] + ",0\n"
	}
	if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

func TestRecordingUnchanged(t *testing.T) {
	later := time.Now().Add(time.Hour)
	cases := []struct {
		name   string
		change func(t *testing.T, p string)
		want   []string
	}{
		{"untouched", func(*testing.T, string) {}, nil},
		{"touched", func(t *testing.T, p string) {
			if err := os.Chtimes(p, later, later); err != nil {
				t.Fatal(err)
			}
		}, []string{"resp.csv", "changed while stria was reading it", "modified ", "mix two versions"}},
		{"appended", func(t *testing.T, p string) {
			f, err := os.OpenFile(p, os.O_APPEND|os.O_WRONLY, 0)
			if err != nil {
				t.Fatal(err)
			}
			f.WriteString("0,9,9\n")
			f.Close()
		}, []string{"resp.csv", "size 71 -> 77 bytes"}},
		{"removed", func(t *testing.T, p string) {
			os.Remove(p)
		}, []string{"resp.csv", "removed or renamed"}},
		{"replaced", func(t *testing.T, p string) {
			b, _ := os.ReadFile(p)
			q := p + ".new"
			os.WriteFile(q, b, 0o644)
			if err := os.Rename(q, p); err != nil {
				t.Fatal(err)
			}
		}, []string{"resp.csv", "replaced by another file"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			p := writeRecording(t, t.TempDir())
			rec, err := Load(Source{Responses: p, StimulusColumn: "stim"})
			if err != nil {
				t.Fatal(err)
			}
			if f := rec.Files(); len(f) != 1 || f[0].Path != p || f[0].Size != 71 || f[0].Hash != "" {
				t.Fatalf("Files() = %+v, want resp.csv of 71 bytes, not hashed yet", f)
			}
			c.change(t, p)
			err = rec.Unchanged()
			if c.want == nil {
				if err != nil {
					t.Fatal(err)
				}
				return
			}
			if err == nil || !errors.Is(err, format.ErrChanged) {
				t.Fatalf("error %v, want one wrapping format.ErrChanged", err)
			}
			for _, w := range c.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q does not contain %q", err, w)
				}
			}
		})
	}
}

// TestCheckHash checks that CheckWith with Hash gives every file the hash
// Identify gives it, for read files and for a mapped responses file (hashed
// in the checking pass), and that a file changed before the hash is
// refused.
func TestCheckHash(t *testing.T) {
	dir := t.TempDir()
	resp := filepath.Join(dir, "resp.npy")
	stim := filepath.Join(dir, "stim.csv")
	rows, cols := 1500, 1000 // 6 MB of values: two hash pieces, a row across the boundary
	v := make([]float32, rows*cols)
	for i := range v {
		v[i] = float32(i%17) + float32(i/cols%3)
	}
	if err := format.WriteNPY(resp, []int{rows, cols}, v); err != nil {
		t.Fatal(err)
	}
	text := "stim\n"
	cond := make([]int, rows)
	for i := range cond {
		cond[i] = i % 4
		text += []string{"0\n", "90\n", "180\n", "270\n"}[i%4]
	}
	if err := os.WriteFile(stim, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	saved := format.MapThreshold
	defer func() { format.MapThreshold = saved }()
	for _, mapped := range []bool{false, true} {
		format.MapThreshold = 1 << 62
		if mapped {
			format.MapThreshold = 0
		}
		rec, err := Load(Source{Responses: resp, Stimulus: stim, StimulusColumn: "stim"})
		if err != nil {
			t.Fatal(err)
		}
		if (rec.Y.MappedFile() != "") != mapped {
			t.Fatalf("mapped %v: MappedFile() = %q", mapped, rec.Y.MappedFile())
		}
		if _, err := CheckWith(rec, cond, CheckOptions{NBins: 4, Hash: true}); err != nil {
			t.Fatal(err)
		}
		files := rec.Files()
		if len(files) != 2 {
			t.Fatalf("Files() = %v", files)
		}
		for _, f := range files {
			want, err := format.Identify(f.Path)
			if err != nil {
				t.Fatal(err)
			}
			if f != want {
				t.Errorf("mapped %v: %v, format.Identify gives %v", mapped, f, want)
			}
		}
	}
	// A file that changed between loading and hashing.
	format.MapThreshold = 1 << 62
	rec, err := Load(Source{Responses: resp, Stimulus: stim, StimulusColumn: "stim"})
	if err != nil {
		t.Fatal(err)
	}
	later := time.Now().Add(time.Hour)
	os.Chtimes(stim, later, later)
	_, err = CheckWith(rec, cond, CheckOptions{NBins: 4, Hash: true})
	if err == nil || !errors.Is(err, format.ErrChanged) || !strings.Contains(err.Error(), "stim.csv") {
		t.Errorf("stimulus changed before hashing: %v", err)
	}
}
