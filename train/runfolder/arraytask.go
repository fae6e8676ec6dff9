package runfolder

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"

	"github.com/strialab/stria/data/condstats"
	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/train/projection"
)

// A fit spread over array tasks (stria fit --array-task I
// --array-task-count N) leaves, in the run folder, one folder per task
// under DirArrayTasks: the statistics of its range of neurons (the arrays
// of condstats.PartStats as .npy files) and FileArrayStats, written last,
// which describes them. stria gather joins them, fits and writes the run
// folder, then removes DirArrayTasks.
const (
	DirArrayTasks  = "array_tasks"
	FileArrayStats = "stats.json"
	// FormatArrayStats is ArrayStats.Format.
	FormatArrayStats = "stria-fit-array-task/2"
)

// ArrayStats is FileArrayStats of one array task of a fit.
type ArrayStats struct {
	Format string `json:"format"`
	Task   int    `json:"task"`  // 1-based
	Tasks  int    `json:"tasks"` // the number of array tasks
	// Neurons is the task's range of neurons [first, last+1) of
	// TotalNeurons.
	Neurons      [2]int `json:"neurons"`
	TotalNeurons int    `json:"total_neurons"`
	Trials       int    `json:"trials"`
	// Fingerprint is what the statistics depend on: the settings the task
	// ran with (YAML, as given, before the recording was read) and the
	// identity of the recording's files.
	Fingerprint Fingerprint `json:"fingerprint"`
	// Parts describes each PartStats (training, validation, test, the
	// dealing over all trials): counts and which arrays it has.
	Parts []ArrayPart `json:"parts"`
	// Blocks is the task's range of blocks of projection.SumBlock
	// neurons [first, last+1): its block sums (the sums over neurons the
	// filters depend on, one row per block) are in the sums_*.npy files.
	Blocks [2]int `json:"blocks"`
}

// ArrayPart is the part of ArrayStats that describes one PartStats.
type ArrayPart struct {
	Name    string   `json:"name"`
	Trials  int      `json:"trials"`
	Count   []int    `json:"count"`
	CountA  []int    `json:"count_a,omitempty"`
	RefCond int      `json:"ref_condition"`
	Arrays  []string `json:"arrays"` // of ref, sum, totsq, sumsq, suma
}

// arrayPartNames name the PartStats of an array task, in order.
var arrayPartNames = []string{"train", "validation", "test", "all"}

// ArrayTaskDir is the folder of array task i of n in the run folder dir.
func ArrayTaskDir(dir string, i, n int) string {
	return filepath.Join(dir, DirArrayTasks, fmt.Sprintf("task_%d_of_%d", i, n))
}

var arrayTaskName = regexp.MustCompile(`^task_([0-9]+)_of_([0-9]+)$`)

// partArrays lists the arrays of ps by name, with their rows (1 or B).
func partArrays(ps *condstats.PartStats) (names []string, vals [][]float64, rows []int) {
	for _, a := range []struct {
		name string
		v    []float64
		rows int
	}{{"ref", ps.Ref, 1}, {"sum", ps.Sum, ps.B}, {"totsq", ps.TotSq, 1}, {"sumsq", ps.SumSq, ps.B}, {"suma", ps.SumA, ps.B}} {
		if a.v != nil {
			names, vals, rows = append(names, a.name), append(vals, a.v), append(rows, a.rows)
		}
	}
	return names, vals, rows
}

// WriteArrayStats writes the statistics of one array task (a.Task of
// a.Tasks; parts as AccumulateParts returns them for the task's neurons)
// into its folder of dir: the arrays first, each atomically, then
// FileArrayStats, so that the task's folder counts as done only when all
// of it is there. An earlier FileArrayStats of the task is removed first.
//
// The block sums come from sums, called once the statistics are written
// (it may overwrite them in memory); they must be those of a.Blocks.
func WriteArrayStats(dir string, a ArrayStats, parts []*condstats.PartStats, sums func() ([]projection.BlockSums, error)) error {
	if len(parts) != len(arrayPartNames) {
		panic(fmt.Sprintf("runfolder: WriteArrayStats of %d statistics, want %d", len(parts), len(arrayPartNames)))
	}
	td := ArrayTaskDir(dir, a.Task, a.Tasks)
	if err := mkdir(td); err != nil {
		return err
	}
	for _, f := range []string{FileArrayStats, FileArrayReadouts} {
		if err := os.Remove(filepath.Join(td, f)); err != nil && !errNotExist(err) {
			return err
		}
	}
	a.Format = FormatArrayStats
	a.Parts = nil
	for k, ps := range parts {
		names, vals, rows := partArrays(ps)
		a.Parts = append(a.Parts, ArrayPart{Name: arrayPartNames[k], Trials: ps.Trials, Count: ps.Count, CountA: ps.CountA, RefCond: ps.RefCond, Arrays: names})
		for i, name := range names {
			path := filepath.Join(td, arrayPartNames[k]+"_"+name+".npy")
			if err := format.WriteNPY64(path, []int{rows[i], ps.N}, vals[i]); err != nil {
				return err
			}
		}
	}
	blocks, err := sums()
	if err != nil {
		return err
	}
	if len(blocks) != a.Blocks[1]-a.Blocks[0] {
		panic(fmt.Sprintf("runfolder: WriteArrayStats of %d block sums for blocks [%d, %d)", len(blocks), a.Blocks[0], a.Blocks[1]))
	}
	if err := writeBlockSums(td, blocks); err != nil {
		return err
	}
	return WriteJSON(filepath.Join(td, FileArrayStats), a)
}

// ArrayParts is the number of PartStats an array task writes (training,
// validation, test, the dealing over all trials).
const ArrayParts = 4

// ReadArrayStats reads FileArrayStats of array task i of n in dir, and the
// statistics of its PartStats number part (0 to ArrayParts-1; -1: none,
// only the description). Reading one part at a time keeps one part of
// every task in memory while they are joined. The error wraps
// os.ErrNotExist when the task has not finished (no FileArrayStats), and
// names the file of anything malformed.
func ReadArrayStats(dir string, i, n, part int) (*ArrayStats, *condstats.PartStats, error) {
	td := ArrayTaskDir(dir, i, n)
	path := filepath.Join(td, FileArrayStats)
	var a ArrayStats
	if err := ReadJSON(path, &a); err != nil {
		return nil, nil, err
	}
	nn := a.Neurons[1] - a.Neurons[0]
	switch {
	case a.Format != FormatArrayStats:
		return nil, nil, fmt.Errorf("%s: format %q, want %s (written by another stria version: run that array task again)", path, a.Format, FormatArrayStats)
	case a.Task != i || a.Tasks != n:
		return nil, nil, fmt.Errorf("%s: written by array task %d of %d, but it is in the folder of task %d of %d", path, a.Task, a.Tasks, i, n)
	case nn < 0 || len(a.Parts) != ArrayParts:
		return nil, nil, fmt.Errorf("%s: neurons [%d, %d) and %d parts: malformed", path, a.Neurons[0], a.Neurons[1], len(a.Parts))
	}
	for k, ap := range a.Parts {
		if ap.Name != arrayPartNames[k] || len(ap.Count) == 0 {
			return nil, nil, fmt.Errorf("%s: part %d is %q with %d conditions, want %s", path, k, ap.Name, len(ap.Count), arrayPartNames[k])
		}
	}
	if part < 0 {
		return &a, nil, nil
	}
	ap := a.Parts[part]
	B := len(ap.Count)
	ps := &condstats.PartStats{B: B, N: nn, Trials: ap.Trials, Count: ap.Count, CountA: ap.CountA, RefCond: ap.RefCond}
	for _, name := range ap.Arrays {
		file := filepath.Join(td, ap.Name+"_"+name+".npy")
		rows := B
		var dst *[]float64
		switch name {
		case "ref":
			dst, rows = &ps.Ref, 1
		case "totsq":
			dst, rows = &ps.TotSq, 1
		case "sum":
			dst = &ps.Sum
		case "sumsq":
			dst = &ps.SumSq
		case "suma":
			dst = &ps.SumA
		default:
			return nil, nil, fmt.Errorf("%s: unknown array %q", path, name)
		}
		shape, v, err := format.ReadArray(file)
		if err != nil {
			return nil, nil, err
		}
		if len(shape) != 2 || shape[0] != rows || shape[1] != nn {
			return nil, nil, fmt.Errorf("%s: shape %v, want [%d %d]", file, shape, rows, nn)
		}
		*dst = v
	}
	return &a, ps, nil
}

// RemoveArrayTasks deletes the array tasks' statistics from dir once
// stria gather has used them.
func RemoveArrayTasks(dir string) error {
	return os.RemoveAll(filepath.Join(dir, DirArrayTasks))
}

// ArrayTasks lists the array tasks whose folders are in dir: the task
// counts found (ascending) and, for each, the tasks (ascending) that
// finished (wrote FileArrayStats). No folder gives an empty map.
func ArrayTasks(dir string) (map[int][]int, error) {
	ents, err := os.ReadDir(filepath.Join(dir, DirArrayTasks))
	if errors.Is(err, os.ErrNotExist) {
		return map[int][]int{}, nil
	}
	if err != nil {
		return nil, err
	}
	out := map[int][]int{}
	for _, e := range ents {
		m := arrayTaskName.FindStringSubmatch(e.Name())
		if m == nil || !e.IsDir() {
			continue
		}
		i, _ := strconv.Atoi(m[1])
		n, _ := strconv.Atoi(m[2])
		if _, ok := out[n]; !ok {
			out[n] = nil
		}
		if fileExists(filepath.Join(dir, DirArrayTasks, e.Name(), FileArrayStats)) {
			out[n] = append(out[n], i)
		}
	}
	for n := range out {
		slices.Sort(out[n])
	}
	return out, nil
}

func fileExists(path string) bool {
	_, err := os.Stat(path)
	return err == nil
}
