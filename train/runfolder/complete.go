package runfolder

import (
	"fmt"
	"os"
	"path/filepath"
	"time"
)

// Version is the stria version recorded in run and comparison folders;
// the command sets it.
var Version = "dev"

// Folder kinds.
const (
	KindRun        = "run"
	KindComparison = "comparison"
	// KindMany is a comparison over several recordings: a comparison
	// folder per recording and the tables across them.
	KindMany = "comparison over recordings"
	// KindAcuity is an acuity folder (stria acuity; its files are those of
	// train/runfolder/acuityfolder).
	KindAcuity = "acuity"
)

// fileAcuity and fileAcuityPairs mark an acuity folder, finished or not
// (acuityfolder.FileAcuity and FileInfoPairs).
const (
	fileAcuity      = "acuity.json"
	fileAcuityPairs = "information_pairs.csv"
)

// Formats recorded in complete.json (and model.json for runs).
const (
	FormatRun        = "stria-run/1"
	FormatComparison = "stria-compare/1"
)

// FileComplete is the completion marker, written last.
const FileComplete = "complete.json"

// oldSettings is the settings file of folders written before
// complete.json existed.
const oldSettings = "config.yaml"

// Complete is complete.json: the marker a finished fit or comparison
// writes after every other file of its folder.
type Complete struct {
	Format string `json:"format"`
	Stria  string `json:"stria_version"`
	// Finished is the time the folder was completed (RFC 3339, UTC).
	Finished string `json:"finished"`
}

// Begin prepares dir for a fit or comparison: it creates the folder and
// removes the completion marker of an earlier one, so that the folder
// reads as incomplete until Finish.
func Begin(dir string) error {
	if err := mkdir(dir); err != nil {
		return err
	}
	if err := os.Remove(filepath.Join(dir, FileComplete)); err != nil && !errNotExist(err) {
		return err
	}
	return nil
}

// Finish writes complete.json into dir; call it after every other file of
// the folder is written. format is FormatRun or FormatComparison.
func Finish(dir, format string) error {
	return WriteJSON(filepath.Join(dir, FileComplete), Complete{Format: format, Stria: Version, Finished: time.Now().UTC().Format(time.RFC3339)})
}

// ReadComplete reads the completion marker of dir.
func ReadComplete(dir string) (*Complete, error) {
	var c Complete
	if err := ReadJSON(filepath.Join(dir, FileComplete), &c); err != nil {
		return nil, err
	}
	return &c, nil
}

// The comparison folder's names that tell its kind (the format itself is
// train/runfolder/comparefolder's, which uses these constants).
const (
	FileComparison   = "comparison.json"   // a comparison folder's ComparisonInfo
	FilePerRecording = "per_recording.csv" // several recordings: every recording's medians
	DirFoldResults   = "fold_results"      // <recording>/<model>/fold<k>.gob: one unit's FoldResult
)

// Kind tells a run folder from a comparison folder (one recording, or
// several) by the files in it, finished or not. Any other folder is an
// error that says what is missing.
func Kind(dir string) (string, error) {
	st, err := os.Stat(dir)
	if err != nil {
		return "", err
	}
	if !st.IsDir() {
		return "", fmt.Errorf("%s: not a folder", dir)
	}
	has := func(name string) bool {
		_, err := os.Stat(filepath.Join(dir, name))
		return err == nil
	}
	switch {
	case has(FilePerRecording):
		return KindMany, nil
	case has(fileAcuity), has(fileAcuityPairs):
		return KindAcuity, nil
	case has(FileComparison):
		return KindComparison, nil
	case has(FileManifest), has(FileResume):
		return KindRun, nil
	case has(DirFoldResults):
		// Fold results but no outputs yet: several recordings when the
		// results are grouped by recording; Open refuses it either way.
		return KindComparison, nil
	}
	return "", fmt.Errorf("%s: neither a run folder (no %s, written by stria fit), a comparison folder (no %s, written by stria compare) nor an acuity folder (no %s, written by stria acuity)", dir, FileManifest, FileComparison, fileAcuity)
}

// CheckComplete returns an error unless dir holds the completion marker of
// a finished fit or comparison.
func CheckComplete(dir, kind string) error {
	if _, err := os.Stat(filepath.Join(dir, FileComplete)); err == nil {
		return nil
	} else if !errNotExist(err) {
		return err
	}
	// A folder of an older stria has no marker either, and other file
	// names: say so rather than call it unfinished.
	if _, err := os.Stat(filepath.Join(dir, oldSettings)); err == nil {
		return fmt.Errorf("%s was written by an older stria (%s, not %s; no %s): its files have other names, so fit or compare again", dir, oldSettings, FileSettings, FileComplete)
	}
	if kind == KindRun {
		return fmt.Errorf("%s is incomplete: the fit that wrote it did not finish (no %s)", dir, FileComplete)
	}
	if kind == KindAcuity {
		return fmt.Errorf("%s is incomplete: the stria acuity run that wrote it did not finish (no %s)", dir, FileComplete)
	}
	return fmt.Errorf("%s is incomplete: the comparison that wrote it did not finish (no %s); when every array task has run: stria gather %s", dir, FileComplete, dir)
}

// Open returns the kind of a finished run or comparison folder, and an
// error for any other folder, including one whose fit or comparison did
// not finish.
func Open(dir string) (string, error) {
	kind, err := Kind(dir)
	if err != nil {
		return "", err
	}
	if err := CheckComplete(dir, kind); err != nil {
		return "", err
	}
	return kind, nil
}
