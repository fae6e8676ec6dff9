package runfolder

import (
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"time"
)

// FileLock is the lock file of a run or comparison folder: it exists while
// one stria process writes the folder.
const FileLock = ".stria-lock"

// LockInfo is what the lock file holds: who writes the folder.
type LockInfo struct {
	PID     int    `json:"pid"`
	Host    string `json:"host"`
	Started string `json:"started"` // RFC 3339, UTC
	Command string `json:"command"`
}

func (l LockInfo) String() string {
	if l.PID <= 0 {
		return "a process unknown: the lock file cannot be read"
	}
	return fmt.Sprintf("pid %d on %s, started %s: %s", l.PID, l.Host, l.Started, l.Command)
}

// Lock is a held folder lock; Release removes it.
type Lock struct {
	path string
}

// ErrLocked is wrapped by the error of AcquireLock when another process
// holds the folder.
var ErrLocked = errors.New("another stria process is writing this folder")

// AcquireLock makes this process the one writer of dir: it creates dir
// (and its parents) and the lock file .stria-lock in it, holding the pid,
// host, start time and command. When dir is already locked by a process
// that is running (or that runs on another host, which cannot be checked)
// it returns an error wrapping ErrLocked that names that process. A lock
// left by a process that has ended on this host is taken over; note then
// says so (it is "" otherwise).
func AcquireLock(dir, command string) (l *Lock, note string, err error) {
	if err := mkdir(dir); err != nil {
		return nil, "", err
	}
	host, _ := os.Hostname()
	me := LockInfo{PID: os.Getpid(), Host: host, Started: time.Now().UTC().Format(time.RFC3339), Command: command}
	b, err := json.MarshalIndent(me, "", "  ")
	if err != nil {
		return nil, "", err
	}
	path := filepath.Join(dir, FileLock)
	for try := 0; try < 2; try++ {
		err := createWith(path, append(b, '\n'))
		if err == nil {
			return &Lock{path: path}, note, nil
		}
		if !errors.Is(err, fs.ErrExist) {
			return nil, "", fmt.Errorf("%s cannot be written: %w", dir, err)
		}
		other, alive, rerr := readLock(path)
		if rerr != nil {
			return nil, "", rerr
		}
		if alive {
			return nil, "", fmt.Errorf("%s: %w (%s); wait for it to finish or use another output folder (if that process is no longer running, delete %s)",
				dir, ErrLocked, other, path)
		}
		if err := os.Remove(path); err != nil && !errNotExist(err) {
			return nil, "", err
		}
		note = fmt.Sprintf("%s: took over the lock of a stria process that has ended (%s); its output may be unfinished", dir, other)
	}
	return nil, "", fmt.Errorf("%s: %w (the lock file %s came back while being taken over)", dir, ErrLocked, path)
}

// createWith creates path holding b, failing with an error wrapping
// fs.ErrExist when path exists. The content is written to a private file
// first and hard-linked to path, so nobody reads path half-written; where
// hard links are not supported the file is created exclusively and
// written.
func createWith(path string, b []byte) error {
	f, err := os.CreateTemp(filepath.Dir(path), FileLock+"-new*")
	if err != nil {
		return err
	}
	tmp := f.Name()
	defer os.Remove(tmp)
	_, err = f.Write(b)
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = os.Chmod(tmp, FileMode)
	}
	if err != nil {
		return err
	}
	err = os.Link(tmp, path)
	if err == nil || errors.Is(err, fs.ErrExist) {
		return err
	}
	// No hard links here: create exclusively.
	g, err := os.OpenFile(path, os.O_WRONLY|os.O_CREATE|os.O_EXCL, FileMode)
	if err != nil {
		return err
	}
	_, err = g.Write(b)
	if cerr := g.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		os.Remove(path)
	}
	return err
}

// readLock reads a lock file and says whether its process may still run:
// false only for a process on this host that has ended.
func readLock(path string) (LockInfo, bool, error) {
	var l LockInfo
	b, err := os.ReadFile(path)
	if err != nil {
		if errNotExist(err) {
			return l, false, nil
		}
		return l, false, err
	}
	if err := json.Unmarshal(b, &l); err != nil || l.PID <= 0 {
		// Damaged (or written by hand): treat as held.
		return LockInfo{}, true, nil
	}
	host, _ := os.Hostname()
	if l.Host != host {
		return l, true, nil
	}
	return l, processAlive(l.PID), nil
}

// CheckUnlocked returns an error wrapping ErrLocked when another running
// process holds dir's lock (array tasks, which write one folder together, take no
// lock but refuse a folder that a single writer holds).
func CheckUnlocked(dir string) error {
	path := filepath.Join(dir, FileLock)
	l, alive, err := readLock(path)
	if err != nil || !alive {
		return err
	}
	if host, _ := os.Hostname(); l.PID == os.Getpid() && l.Host == host {
		return nil // this process's own lock
	}
	return fmt.Errorf("%s: %w (%s); wait for it to finish (if that process is no longer running, delete %s)", dir, ErrLocked, l, path)
}

// Release removes the lock file.
func (l *Lock) Release() error {
	if l == nil {
		return nil
	}
	if err := os.Remove(l.path); err != nil && !errNotExist(err) {
		return err
	}
	return nil
}

// RemoveStaleTemps removes the temporary files (".NAME.tmp*") that
// WriteFile leaves when a process is killed while writing, in dir and its
// subfolders. Call it only with dir's lock held. It returns the number
// removed.
func RemoveStaleTemps(dir string) (int, error) {
	n := 0
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			if errNotExist(err) {
				return nil
			}
			return err
		}
		name := d.Name()
		if !d.IsDir() && strings.HasPrefix(name, ".") && strings.Contains(name, ".tmp") {
			if err := os.Remove(p); err != nil && !errNotExist(err) {
				return err
			}
			n++
		}
		return nil
	})
	return n, err
}

// CheckWritable finds out, without leaving anything behind, whether dir
// can be made into an output folder: it must be a folder (or not exist,
// with its nearest existing parent a folder) in which a file can be
// created. Call it before long work, so that a bad output path is found
// at once rather than at the first write.
func CheckWritable(dir string) error {
	d := dir
	for {
		st, err := os.Stat(d)
		if err == nil {
			if !st.IsDir() {
				if d == dir {
					return fmt.Errorf("output folder %s is a file, not a folder", dir)
				}
				return fmt.Errorf("output folder %s cannot be created: %s is a file, not a folder", dir, d)
			}
			break
		}
		// Missing, or under a file (not a directory): look further up.
		parent := filepath.Dir(d)
		if parent == d {
			return fmt.Errorf("output folder %s: no existing parent folder", dir)
		}
		d = parent
	}
	f, err := os.CreateTemp(d, ".stria-probe*")
	if err != nil {
		if d == dir {
			return fmt.Errorf("output folder %s cannot be written to: %w", dir, err)
		}
		return fmt.Errorf("output folder %s cannot be created in %s: %w", dir, d, err)
	}
	f.Close()
	return os.Remove(f.Name())
}

// Holds reports what dir holds apart from its lock file: "" when it does
// not exist or is empty, else a short description ("a run folder", "a
// comparison folder", "12 other files and folders").
func Holds(dir string) (string, error) {
	ents, err := os.ReadDir(dir)
	if err != nil {
		if errNotExist(err) {
			return "", nil
		}
		return "", err
	}
	n := 0
	for _, e := range ents {
		if !strings.HasPrefix(e.Name(), FileLock) { // the lock, or one being made
			n++
		}
	}
	if n == 0 {
		return "", nil
	}
	if k, err := Kind(dir); err == nil {
		if k == KindAcuity {
			return "an " + k + " folder", nil
		}
		return "a " + k + " folder", nil
	}
	return fmt.Sprintf("%d file(s) or folder(s) that stria did not write", n), nil
}

// striaNames are the names stria writes at the top of run, comparison and
// acuity folders (folders among them are taken whole). Keep it in step with the
// File and Dir constants: Empty refuses to delete anything else.
var striaNames = map[string]bool{
	FileSettings: true, FileManifest: true, FileFilters: true, FileNeuronScores: true, FileSummary: true,
	FileHistory: true, FileSplit: true, FileResume: true, DirParameters: true, DirFigures: true, FileReport: true, FileStateTerms: true,
	FileComplete: true, FileLock: true, oldSettings: true, FileComparison: true, FilePerRecording: true, DirFoldResults: true,
	DirArrayTasks: true,
	// The comparison folder's names (the File and Dir constants of
	// train/runfolder/comparefolder; its tests check they are all here).
	"fold_scores.csv": true, "fold_averages.csv": true, "model_summary.csv": true, "model_pairs.csv": true,
	"tuning_descriptors.csv": true, "tuning_curves": true,
	"pooled_summary.csv": true, "pooled_pairs.csv": true,
	// The acuity folder's names (train/runfolder/acuityfolder; its tests
	// check they are all here).
	fileAcuity: true, fileAcuityPairs: true, "information_vs_size.csv": true, "information_subsets.csv": true,
	"decoding_summary.csv": true, "decoding_vs_size.csv": true, "confusion.csv": true,
}

// IsStriaName reports whether name is one stria writes at the top of a
// run or comparison folder.
func IsStriaName(name string) bool { return striaNames[name] }

// foreign lists the entries of dir that stria did not write: any name
// but striaNames and temporary files, except folders (a recording's
// comparison folder) whose own entries are all stria's.
func foreign(dir string) ([]string, error) {
	ents, err := os.ReadDir(dir)
	if err != nil {
		return nil, err
	}
	var out []string
	for _, e := range ents {
		name := e.Name()
		if striaNames[name] || strings.HasPrefix(name, FileLock) || strings.HasPrefix(name, ".") && strings.Contains(name, ".tmp") {
			continue
		}
		if e.IsDir() {
			if sub, err := foreign(filepath.Join(dir, name)); err == nil && len(sub) == 0 {
				continue
			}
		}
		out = append(out, name)
	}
	return out, nil
}

// Empty removes everything in dir except its lock file (for an explicit
// overwrite). It deletes only what stria writes: a folder holding any
// other file is refused, naming it, so that a mistyped output path cannot
// delete someone's data.
func Empty(dir string) error {
	if err := CheckEmptiable(dir); err != nil {
		return err
	}
	ents, err := os.ReadDir(dir)
	if err != nil {
		if errNotExist(err) {
			return nil
		}
		return err
	}
	for _, e := range ents {
		if e.Name() == FileLock {
			continue
		}
		if err := os.RemoveAll(filepath.Join(dir, e.Name())); err != nil {
			return err
		}
	}
	return nil
}

// CheckEmptiable returns the error Empty would give for dir, without
// deleting anything: call it before long work.
func CheckEmptiable(dir string) error {
	what, err := Holds(dir)
	if err != nil || what == "" {
		return err
	}
	other, err := foreign(dir)
	if err != nil {
		return err
	}
	if len(other) > 0 {
		show := other
		if len(show) > 3 {
			show = append(show[:3:3], fmt.Sprintf("and %d more", len(other)-3))
		}
		return fmt.Errorf("%s holds files stria did not write (%s); refusing to delete them: choose an empty or new output folder, or move them away",
			dir, strings.Join(show, ", "))
	}
	return nil
}
