package runfolder

import (
	"encoding/json"
	"errors"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/strialab/stria/data/format"
)

func writeLock(t *testing.T, dir string, l LockInfo) {
	t.Helper()
	os.MkdirAll(dir, 0o755)
	b, _ := json.Marshal(l)
	if err := os.WriteFile(filepath.Join(dir, FileLock), b, 0o644); err != nil {
		t.Fatal(err)
	}
}

// deadPID returns the pid of a process that has ended.
func deadPID(t *testing.T) int {
	t.Helper()
	cmd := exec.Command("true")
	if err := cmd.Run(); err != nil {
		t.Skipf("cannot run true: %v", err)
	}
	return cmd.Process.Pid
}

func TestLock(t *testing.T) {
	host, _ := os.Hostname()
	t.Run("free", func(t *testing.T) {
		dir := filepath.Join(t.TempDir(), "new", "run")
		l, note, err := AcquireLock(dir, "stria fit --config a.yaml")
		if err != nil || note != "" {
			t.Fatalf("got %v, note %q; want the lock", err, note)
		}
		b, _ := os.ReadFile(filepath.Join(dir, FileLock))
		var info LockInfo
		if err := json.Unmarshal(b, &info); err != nil || info.PID != os.Getpid() || info.Host != host || info.Command != "stria fit --config a.yaml" || info.Started == "" {
			t.Errorf("lock file holds %s (%v)", b, err)
		}
		if err := CheckUnlocked(dir); err != nil {
			t.Errorf("CheckUnlocked of the holder's own lock: %v", err)
		}
		// A second writer is refused, naming the first.
		_, _, err = AcquireLock(dir, "stria fit --config b.yaml")
		if !errors.Is(err, ErrLocked) || !strings.Contains(err.Error(), "pid "+strconv.Itoa(os.Getpid())) || !strings.Contains(err.Error(), "a.yaml") {
			t.Errorf("second writer: got %v, want ErrLocked naming pid %d and its command", err, os.Getpid())
		}
		if err := l.Release(); err != nil {
			t.Fatal(err)
		}
		if _, err := os.Stat(filepath.Join(dir, FileLock)); !os.IsNotExist(err) {
			t.Errorf("lock file after Release: %v", err)
		}
	})
	t.Run("stale", func(t *testing.T) {
		dir := t.TempDir()
		pid := deadPID(t)
		writeLock(t, dir, LockInfo{PID: pid, Host: host, Started: "2026-01-01T00:00:00Z", Command: "stria fit"})
		l, note, err := AcquireLock(dir, "stria fit")
		if err != nil || !strings.Contains(note, "pid "+strconv.Itoa(pid)) || !strings.Contains(note, "ended") {
			t.Fatalf("got %v, note %q; want the lock taken over with a note naming pid %d", err, note, pid)
		}
		l.Release()
	})
	t.Run("other host", func(t *testing.T) {
		dir := t.TempDir()
		writeLock(t, dir, LockInfo{PID: deadPID(t), Host: host + "-elsewhere", Started: "x", Command: "stria compare"})
		if _, _, err := AcquireLock(dir, "stria fit"); !errors.Is(err, ErrLocked) || !strings.Contains(err.Error(), host+"-elsewhere") {
			t.Errorf("got %v, want ErrLocked naming the other host", err)
		}
		if err := CheckUnlocked(dir); !errors.Is(err, ErrLocked) {
			t.Errorf("CheckUnlocked: got %v, want ErrLocked", err)
		}
	})
}

func TestRemoveStaleTemps(t *testing.T) {
	dir := t.TempDir()
	os.MkdirAll(filepath.Join(dir, DirParameters), 0o755)
	stale := []string{".resume_state.gob.tmp123", filepath.Join(DirParameters, ".readout_weight.npy.tmp-9")}
	keep := []string{"model.json", ".stria-lock", filepath.Join(DirParameters, "readout_weight.npy")}
	for _, f := range append(stale, keep...) {
		os.WriteFile(filepath.Join(dir, f), []byte("x"), 0o644)
	}
	n, err := RemoveStaleTemps(dir)
	if err != nil || n != len(stale) {
		t.Errorf("removed %d (%v), want %d", n, err, len(stale))
	}
	for _, f := range stale {
		if _, err := os.Stat(filepath.Join(dir, f)); err == nil {
			t.Errorf("%s left behind", f)
		}
	}
	for _, f := range keep {
		if _, err := os.Stat(filepath.Join(dir, f)); err != nil {
			t.Errorf("%s removed: %v", f, err)
		}
	}
}

func TestCheckWritable(t *testing.T) {
	dir := t.TempDir()
	file := filepath.Join(dir, "afile")
	os.WriteFile(file, []byte("x"), 0o644)
	for _, c := range []struct {
		name, path, want string
	}{
		{"new folder", filepath.Join(dir, "a", "b"), ""},
		{"existing folder", dir, ""},
		{"a file", file, "is a file, not a folder"},
		{"under a file", filepath.Join(file, "run"), "afile is a file, not a folder"},
	} {
		t.Run(c.name, func(t *testing.T) {
			err := CheckWritable(c.path)
			if c.want == "" && err != nil || c.want != "" && (err == nil || !strings.Contains(err.Error(), c.want)) {
				t.Errorf("got %v, want %q", err, c.want)
			}
		})
	}
	if _, err := os.Stat(filepath.Join(dir, "a")); err == nil {
		t.Error("CheckWritable created the folder")
	}
	ents, _ := os.ReadDir(dir)
	if len(ents) != 1 {
		t.Errorf("CheckWritable left %d entries, want only afile", len(ents))
	}
	if os.Getuid() != 0 {
		ro := filepath.Join(dir, "ro")
		os.Mkdir(ro, 0o555)
		if err := CheckWritable(ro); err == nil || !strings.Contains(err.Error(), "cannot be written") {
			t.Errorf("read-only folder: got %v", err)
		}
	}
}

func TestEmpty(t *testing.T) {
	dir := t.TempDir()
	// A folder stria did not write is never emptied.
	os.WriteFile(filepath.Join(dir, "my_data.npy"), []byte("x"), 0o644)
	if err := Empty(dir); err == nil || !strings.Contains(err.Error(), "refusing to delete") {
		t.Errorf("foreign folder: got %v", err)
	}
	if _, err := os.Stat(filepath.Join(dir, "my_data.npy")); err != nil {
		t.Error("Empty deleted a file of a foreign folder")
	}
	// Nor a folder that looks like a run but holds other files too (a
	// config called settings.yaml beside the data).
	mixed := t.TempDir()
	for _, f := range []string{FileSettings, "resp.npy", "sub/notes.txt"} {
		os.MkdirAll(filepath.Dir(filepath.Join(mixed, f)), 0o755)
		os.WriteFile(filepath.Join(mixed, f), []byte("x"), 0o644)
	}
	if err := Empty(mixed); err == nil || !strings.Contains(err.Error(), "resp.npy, sub") {
		t.Errorf("mixed folder: got %v, want a refusal naming resp.npy and sub", err)
	}
	if _, err := os.Stat(filepath.Join(mixed, "resp.npy")); err != nil {
		t.Error("Empty deleted a file of a mixed folder")
	}
	run := t.TempDir()
	for _, f := range []string{FileManifest, FileLock, "parameters/conv1_weight.npy", "figures/a.svg", ".summary.json.tmp42", "m1-resp/comparison.json", "m2-resp/tuning_curves/a.npy"} {
		os.MkdirAll(filepath.Dir(filepath.Join(run, f)), 0o755)
		os.WriteFile(filepath.Join(run, f), []byte("x"), 0o644)
	}
	if err := Empty(run); err != nil {
		t.Fatal(err)
	}
	ents, _ := os.ReadDir(run)
	if len(ents) != 1 || ents[0].Name() != FileLock {
		t.Errorf("after Empty: %v, want only the lock", ents)
	}
}

func TestFingerprintMismatch(t *testing.T) {
	a := format.FileID{Path: "/d/resp.npy", Size: 100, Hash: "crc32pair-4MiB:aa"}
	moved := a
	moved.Path = "/e/resp.npy"
	changed := a
	changed.Hash = "crc32pair-4MiB:bb"
	diff := func(o, n []byte) ([]string, error) { return []string{"seed: " + string(o) + " -> " + string(n)}, nil }
	for _, c := range []struct {
		name      string
		have, now Fingerprint
		want      string // "" : match
	}{
		{"same", Fingerprint{[]byte("1"), []format.FileID{a}}, Fingerprint{[]byte("1"), []format.FileID{a}}, ""},
		{"moved copy", Fingerprint{[]byte("1"), []format.FileID{a}}, Fingerprint{[]byte("1"), []format.FileID{moved}}, ""},
		{"settings", Fingerprint{[]byte("1"), []format.FileID{a}}, Fingerprint{[]byte("2"), []format.FileID{a}}, "seed: 1 -> 2"},
		{"content", Fingerprint{[]byte("1"), []format.FileID{a}}, Fingerprint{[]byte("1"), []format.FileID{changed}}, "resp.npy: content differs"},
		{"none", Fingerprint{}, Fingerprint{[]byte("1"), []format.FileID{a}}, "no fingerprint"},
	} {
		t.Run(c.name, func(t *testing.T) {
			got := strings.Join(c.now.Mismatch(c.have, diff), "; ")
			if c.want == "" && got != "" || !strings.Contains(got, c.want) {
				t.Errorf("got %q, want %q", got, c.want)
			}
		})
	}
}
