package runfolder

import (
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"

	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/train"
	"github.com/strialab/stria/train/projection"
)

// A fit in stages over array tasks (stria help large) adds to the array
// tasks' folders:
//
//   - in each task folder, beside the statistics, the task's block sums
//     (sums_s.npy, sums_cvt.npy, sums_yyv.npy, sums_within.npy: one row
//     per block of projection.SumBlock neurons), written by the first
//     pass with the statistics;
//   - DirArrayFilters, written by the reduce (stria gather FOLDER
//     --filters): the trained filters (conv.npy), the sums over all
//     neurons (sums_*.npy, one row), the training log (history.npy) and
//     FileArrayFilters last;
//   - in each task folder, after the readout pass (stria fit
//     --array-task I --readouts), its neurons' readouts, scores and
//     z-scoring (readout_*.npy, scores.npy, ...) and FileArrayReadouts
//     last.
//
// stria gather FOLDER then joins the readouts into the run folder.
const (
	DirArrayFilters   = "filters"
	FileArrayFilters  = "filters.json"
	FileArrayReadouts = "readouts.json"
	// FormatArrayFilters and FormatArrayReadouts are the Format of
	// ArrayFilters and ArrayReadouts.
	FormatArrayFilters  = "stria-fit-array-filters/1"
	FormatArrayReadouts = "stria-fit-array-readouts/2"
)

// ArrayFiltersDir is the reduce's folder in the run folder dir.
func ArrayFiltersDir(dir string) string { return filepath.Join(dir, DirArrayTasks, DirArrayFilters) }

// writeBlockSums writes the block sums of one task into its folder td.
func writeBlockSums(td string, blocks []projection.BlockSums) error {
	k := len(blocks)
	var s, cvt, yyv, within []float64
	ns, ncvt, nyyv := 0, 0, 0
	if k > 0 {
		ns, ncvt, nyyv = len(blocks[0].S), len(blocks[0].Cvt), len(blocks[0].Yyv)
	}
	for _, b := range blocks {
		s, cvt, yyv = append(s, b.S...), append(cvt, b.Cvt...), append(yyv, b.Yyv...)
		within = append(within, b.Within, b.WithinV)
	}
	for _, a := range []struct {
		name string
		cols int
		v    []float64
	}{{"s", ns, s}, {"cvt", ncvt, cvt}, {"yyv", nyyv, yyv}, {"within", 2, within}} {
		if err := format.WriteNPY64(filepath.Join(td, "sums_"+a.name+".npy"), []int{k, a.cols}, a.v); err != nil {
			return err
		}
	}
	return nil
}

// readSums reads k rows of sums from the folder td (bt and bv the
// training and validation conditions with trials).
func readSums(td string, k, bt, bv int) ([]projection.BlockSums, error) {
	out := make([]projection.BlockSums, k)
	for _, a := range []struct {
		name string
		cols int
	}{{"s", bt * bt}, {"cvt", bv * bt}, {"yyv", bv}, {"within", 2}} {
		file := filepath.Join(td, "sums_"+a.name+".npy")
		shape, v, err := format.ReadArray(file)
		if err != nil {
			return nil, err
		}
		if len(shape) != 2 || shape[0] != k || (k > 0 && shape[1] != a.cols) {
			return nil, fmt.Errorf("%s: shape %v, want [%d %d]", file, shape, k, a.cols)
		}
		for i := range out {
			row := v[i*a.cols : (i+1)*a.cols : (i+1)*a.cols]
			switch a.name {
			case "s":
				out[i].S = row
			case "cvt":
				out[i].Cvt = row
			case "yyv":
				out[i].Yyv = row
			default:
				out[i].Within, out[i].WithinV = row[0], row[1]
			}
		}
	}
	return out, nil
}

// ReadArrayBlockSums reads the block sums of array task i of n (as
// ReadArrayStats returned a, its description) of a fit whose training and
// validation trials per condition are trainCount and valCount.
func ReadArrayBlockSums(dir string, a *ArrayStats, trainCount, valCount []int) ([]projection.BlockSums, error) {
	k := a.Blocks[1] - a.Blocks[0]
	if k < 0 {
		return nil, fmt.Errorf("%s: blocks [%d, %d): malformed", filepath.Join(ArrayTaskDir(dir, a.Task, a.Tasks), FileArrayStats), a.Blocks[0], a.Blocks[1])
	}
	return readSums(ArrayTaskDir(dir, a.Task, a.Tasks), k, rowsOf(trainCount), rowsOf(valCount))
}

func rowsOf(count []int) int {
	r := 0
	for _, c := range count {
		if c > 0 {
			r++
		}
	}
	return r
}

// ArrayFilters is FileArrayFilters: what the reduce of a fit in stages
// trained, on which tasks' statistics.
type ArrayFilters struct {
	Format string `json:"format"`
	// Tasks, TotalNeurons and Trials are those of the array tasks.
	Tasks        int `json:"tasks"`
	TotalNeurons int `json:"total_neurons"`
	Trials       int `json:"trials"`
	// Fingerprint is that of the tasks' statistics (settings and data).
	Fingerprint Fingerprint `json:"fingerprint"`
	TrainCount  []int       `json:"train_count"`
	ValCount    []int       `json:"validation_count"`
	BestEpoch   int         `json:"best_epoch"`
	Stop        string      `json:"stop"`
	// ID identifies the filters and sums (a SHA-256 of their values): the
	// readouts of the tasks record the ID they were solved at.
	ID string `json:"id"`
}

// Filters is what the reduce wrote, as read back.
type Filters struct {
	ArrayFilters
	Conv []float64 // the conv parameters (nn.Net's Params prefix)
	Log  []train.EpochLog
	Sums *projection.Sums
}

// filtersID returns the ID of conv parameters and sums.
func filtersID(conv []float64, s *projection.Sums) string {
	h := sha256.New()
	var b [8]byte
	for _, v := range [][]float64{conv, s.S, s.Cvt, s.Yyv, {s.Within, s.WithinV, float64(s.Neurons)}} {
		for _, x := range v {
			binary.LittleEndian.PutUint64(b[:], math.Float64bits(x))
			h.Write(b[:])
		}
	}
	return hex.EncodeToString(h.Sum(nil)[:12])
}

// WriteArrayFilters writes the reduce's results into ArrayFiltersDir(dir)
// (an earlier FileArrayFilters removed first, then the arrays, each
// atomically, then FileArrayFilters): f's filters (a net of FitFilters)
// and log, and the sums over all neurons. It returns the ID.
func WriteArrayFilters(dir string, a ArrayFilters, f *train.Fitted, sums *projection.Sums) (string, error) {
	fd := ArrayFiltersDir(dir)
	if err := mkdir(fd); err != nil {
		return "", err
	}
	if err := os.Remove(filepath.Join(fd, FileArrayFilters)); err != nil && !errNotExist(err) {
		return "", err
	}
	net := f.Net
	conv := net.Params[:len(net.Params)-net.Neurons*net.Features()-net.Neurons]
	if err := format.WriteNPY64(filepath.Join(fd, "conv.npy"), []int{len(conv)}, conv); err != nil {
		return "", err
	}
	hist := make([]float64, 0, 5*len(f.Log))
	for _, e := range f.Log {
		hist = append(hist, float64(e.Epoch), e.TrainLoss, e.ValLoss, e.ValR2, e.Seconds)
	}
	if err := format.WriteNPY64(filepath.Join(fd, "history.npy"), []int{len(f.Log), 5}, hist); err != nil {
		return "", err
	}
	if err := writeBlockSums(fd, []projection.BlockSums{sums.BlockSums}); err != nil {
		return "", err
	}
	a.Format = FormatArrayFilters
	a.TrainCount, a.ValCount = sums.TrainCount, sums.ValCount
	a.BestEpoch, a.Stop = f.BestEpoch, f.Stop
	a.ID = filtersID(conv, sums)
	return a.ID, WriteJSON(filepath.Join(fd, FileArrayFilters), a)
}

// ReadArrayFilters reads what the reduce wrote into dir. The error wraps
// os.ErrNotExist when the reduce has not finished (no FileArrayFilters).
func ReadArrayFilters(dir string) (*Filters, error) {
	fd := ArrayFiltersDir(dir)
	path := filepath.Join(fd, FileArrayFilters)
	var f Filters
	if err := ReadJSON(path, &f.ArrayFilters); err != nil {
		return nil, err
	}
	if f.Format != FormatArrayFilters {
		return nil, fmt.Errorf("%s: format %q, want %s (written by another stria version: run the reduce again)", path, f.Format, FormatArrayFilters)
	}
	if len(f.TrainCount) == 0 || len(f.ValCount) != len(f.TrainCount) {
		return nil, fmt.Errorf("%s: %d and %d conditions: malformed", path, len(f.TrainCount), len(f.ValCount))
	}
	shape, conv, err := format.ReadArray(filepath.Join(fd, "conv.npy"))
	if err != nil {
		return nil, err
	}
	if len(shape) != 1 {
		return nil, fmt.Errorf("%s: shape %v, want one axis", filepath.Join(fd, "conv.npy"), shape)
	}
	f.Conv = conv
	file := filepath.Join(fd, "history.npy")
	shape, hist, err := format.ReadArray(file)
	if err != nil {
		return nil, err
	}
	if len(shape) != 2 || shape[1] != 5 {
		return nil, fmt.Errorf("%s: shape %v, want [epochs 5]", file, shape)
	}
	for i := range shape[0] {
		h := hist[i*5 : (i+1)*5]
		f.Log = append(f.Log, train.EpochLog{Epoch: int(h[0]), TrainLoss: h[1], ValLoss: h[2], ValR2: h[3], Seconds: h[4]})
	}
	b, err := readSums(fd, 1, rowsOf(f.TrainCount), rowsOf(f.ValCount))
	if err != nil {
		return nil, err
	}
	f.Sums = &projection.Sums{TrainCount: f.TrainCount, ValCount: f.ValCount, Neurons: f.TotalNeurons, BlockSums: b[0]}
	if id := filtersID(conv, f.Sums); id != f.ID {
		return nil, fmt.Errorf("%s: its arrays do not match it (id %s, the arrays give %s): run the reduce again", path, f.ID, id)
	}
	return &f, nil
}

// ArrayReadouts is FileArrayReadouts of one array task: the readout pass
// of its neurons.
type ArrayReadouts struct {
	Format  string `json:"format"`
	Task    int    `json:"task"`
	Tasks   int    `json:"tasks"`
	Neurons [2]int `json:"neurons"`
	// Fingerprint is that of the settings and data the pass ran with.
	Fingerprint Fingerprint `json:"fingerprint"`
	// Filters is the ID of the reduce's filters the readouts are of.
	Filters  string `json:"filters"`
	Features int    `json:"features"`
	// Rank is the readout's rank (projection.Readout; 0 for a task
	// without neurons, which writes no coefficients or basis).
	Rank int `json:"rank"`
	// Constant lists the task's constant neurons (0-based, among all).
	Constant []int `json:"constant"`
	// Arrays lists the per-neuron arrays written (readout_l2, norm_mean,
	// norm_scale and val_r2 are optional).
	Arrays []string `json:"arrays"`
}

// RangeResult is what the readout pass of a task computes for its neurons
// beside the readout weights (one value or row per neuron).
type RangeResult struct {
	Bias, L2, NormMean, NormScale, Reliability, ValR2 []float64
	Scores                                            []eval.Scores
}

// scoreFields is the number of fields of eval.Scores, in the order of
// scoreRow.
const scoreFields = 14

func scoreRow(dst []float64, s eval.Scores) {
	copy(dst, []float64{s.TestR2, s.TestR, s.EVScore, s.ExplainableFraction, s.FEV, s.SP, s.CCAbs, s.CCMax, s.CCNorm, s.SPE,
		s.SplitHalf, s.SignalF, s.SignalDF1, s.SignalDF2})
}

func rowScore(v []float64) eval.Scores {
	return eval.Scores{TestR2: v[0], TestR: v[1], EVScore: v[2], ExplainableFraction: v[3], FEV: v[4], SP: v[5], CCAbs: v[6], CCMax: v[7], CCNorm: v[8], SPE: v[9],
		SplitHalf: v[10], SignalF: v[11], SignalDF1: v[12], SignalDF2: v[13]}
}

// ArrayReadoutCoef and ArrayReadoutBasis are the files of task i of n's
// readout in factored form (projection.Readout): its neurons'
// coefficients and the basis.
func ArrayReadoutCoef(dir string, i, n int) string {
	return filepath.Join(ArrayTaskDir(dir, i, n), "readout_coef.npy")
}

func ArrayReadoutBasis(dir string, i, n int) string {
	return filepath.Join(ArrayTaskDir(dir, i, n), "readout_basis.npy")
}

// WriteArrayReadouts writes the readout pass of task a.Task of a.Tasks
// into its folder (an earlier FileArrayReadouts removed first, then the
// arrays, each atomically, then FileArrayReadouts): f's readout in
// factored form (f.Readout: the coefficients of the task's neurons, and
// the basis; nothing for a task without neurons) and r.
func WriteArrayReadouts(dir string, a ArrayReadouts, f *train.Fitted, r *RangeResult) error {
	td := ArrayTaskDir(dir, a.Task, a.Tasks)
	if err := os.Remove(filepath.Join(td, FileArrayReadouts)); err != nil && !errNotExist(err) {
		return err
	}
	n := a.Neurons[1] - a.Neurons[0]
	F := f.Net.Features()
	a.Rank = 0
	if n > 0 {
		r := f.Readout
		if r == nil || r.Features != F {
			panic("runfolder: WriteArrayReadouts needs the readout in factored form")
		}
		if err := format.WriteNPY64(ArrayReadoutBasis(dir, a.Task, a.Tasks), []int{r.Rank, F}, r.Basis); err != nil {
			return err
		}
		if err := format.WriteNPY64Rows(ArrayReadoutCoef(dir, a.Task, a.Tasks), n, r.Rank, r.Coef); err != nil {
			return err
		}
		a.Rank = r.Rank
	}
	sc := make([]float64, n*scoreFields, max(n*scoreFields, 1))
	for j, s := range r.Scores {
		scoreRow(sc[j*scoreFields:], s)
	}
	a.Arrays = nil
	for _, v := range []struct {
		name string
		v    []float64
		cols int
	}{{"readout_bias", r.Bias, 1}, {"readout_l2", r.L2, 1}, {"norm_mean", r.NormMean, 1}, {"norm_scale", r.NormScale, 1},
		{"split_half_all", r.Reliability, 1}, {"val_r2", r.ValR2, 1}, {"scores", sc, scoreFields}} {
		if v.v == nil {
			continue
		}
		if len(v.v) != n*v.cols {
			panic(fmt.Sprintf("runfolder: WriteArrayReadouts: %s has %d values, want %d", v.name, len(v.v), n*v.cols))
		}
		if err := format.WriteNPY64(filepath.Join(td, v.name+".npy"), []int{n, v.cols}, v.v); err != nil {
			return err
		}
		a.Arrays = append(a.Arrays, v.name)
	}
	a.Format, a.Features = FormatArrayReadouts, F
	return WriteJSON(filepath.Join(td, FileArrayReadouts), a)
}

// ReadArrayReadouts reads FileArrayReadouts of task i of n and its
// per-neuron arrays (not the readout: ArrayReadoutCoef and
// ArrayReadoutBasis). The error
// wraps os.ErrNotExist when the task's readout pass has not finished.
func ReadArrayReadouts(dir string, i, n int) (*ArrayReadouts, *RangeResult, error) {
	td := ArrayTaskDir(dir, i, n)
	path := filepath.Join(td, FileArrayReadouts)
	var a ArrayReadouts
	if err := ReadJSON(path, &a); err != nil {
		return nil, nil, err
	}
	nn := a.Neurons[1] - a.Neurons[0]
	switch {
	case a.Format != FormatArrayReadouts:
		return nil, nil, fmt.Errorf("%s: format %q, want %s (written by another stria version: run that readout pass again)", path, a.Format, FormatArrayReadouts)
	case a.Task != i || a.Tasks != n:
		return nil, nil, fmt.Errorf("%s: written by array task %d of %d, but it is in the folder of task %d of %d", path, a.Task, a.Tasks, i, n)
	case nn < 0:
		return nil, nil, fmt.Errorf("%s: neurons [%d, %d): malformed", path, a.Neurons[0], a.Neurons[1])
	case (nn > 0) != (a.Rank > 0) || a.Rank < 0:
		return nil, nil, fmt.Errorf("%s: a readout of rank %d for %d neurons: malformed", path, a.Rank, nn)
	}
	for k, j := range a.Constant {
		if j < a.Neurons[0] || j >= a.Neurons[1] || (k > 0 && j <= a.Constant[k-1]) {
			return nil, nil, fmt.Errorf("%s: constant neurons %v are not increasing within the task's neurons [%d, %d): malformed", path, a.Constant, a.Neurons[0], a.Neurons[1])
		}
	}
	r := &RangeResult{}
	for _, name := range a.Arrays {
		file := filepath.Join(td, name+".npy")
		shape, v, err := format.ReadArray(file)
		if err != nil {
			return nil, nil, err
		}
		cols := 1
		if name == "scores" {
			cols = scoreFields
		}
		if len(shape) != 2 || shape[0] != nn || shape[1] != cols {
			return nil, nil, fmt.Errorf("%s: shape %v, want [%d %d]", file, shape, nn, cols)
		}
		switch name {
		case "readout_bias":
			r.Bias = v
		case "readout_l2":
			r.L2 = v
		case "norm_mean":
			r.NormMean = v
		case "norm_scale":
			r.NormScale = v
		case "split_half_all":
			r.Reliability = v
		case "val_r2":
			r.ValR2 = v
		case "scores":
			r.Scores = make([]eval.Scores, nn)
			for j := range r.Scores {
				r.Scores[j] = rowScore(v[j*scoreFields : (j+1)*scoreFields])
			}
		default:
			return nil, nil, fmt.Errorf("%s: unknown array %q", path, name)
		}
	}
	if !slices.Contains(a.Arrays, "readout_bias") || !slices.Contains(a.Arrays, "scores") || !slices.Contains(a.Arrays, "split_half_all") {
		return nil, nil, fmt.Errorf("%s: lacks the readout bias, scores or reliability: malformed", path)
	}
	return &a, r, nil
}

// ReadRows returns a function that writes rows [n0, n1) of the
// rows x F little-endian float64 .npy files that WriteArrayReadouts wrote
// for consecutive ranges of rows (files[k] holds rows [starts[k],
// starts[k+1])) into dst, by positioned reads of the rows asked for (one
// block of rows in memory, not a file). Each file's header must be the
// one its shape gives, and its size match. The first error is kept in
// *errp; rows then read as zero. close closes the files.
func ReadRows(files []string, starts []int, F int, errp *error) (read func(dst []float64, n0, n1 int), close func()) {
	open := make([]*os.File, len(files))
	offset := make([]int64, len(files))
	var buf []byte
	fail := func(err error) {
		if *errp == nil {
			*errp = err
		}
	}
	get := func(k int) *os.File {
		if open[k] != nil {
			return open[k]
		}
		rows := starts[k+1] - starts[k]
		hdr := format.NPYHeaderBytes("<f8", []int{rows, F})
		f, err := os.Open(files[k])
		if err != nil {
			fail(err)
			return nil
		}
		got := make([]byte, len(hdr))
		st, err := f.Stat()
		if err == nil {
			_, err = f.ReadAt(got, 0)
		}
		switch {
		case err != nil:
			fail(fmt.Errorf("%s: %w", files[k], err))
		case string(got) != string(hdr) || st.Size() != int64(len(hdr))+int64(rows)*int64(F)*8:
			fail(fmt.Errorf("%s: not the %d x %d float64 array the array task wrote; run its readout pass again", files[k], rows, F))
		default:
			open[k], offset[k] = f, int64(len(hdr))
			return f
		}
		f.Close()
		return nil
	}
	read = func(dst []float64, n0, n1 int) {
		for n := n0; n < n1; {
			k := 0
			for k+1 < len(files) && starts[k+1] <= n {
				k++
			}
			m := min(n1, starts[k+1])
			d := dst[(n-n0)*F : (m-n0)*F]
			f := get(k)
			if f == nil {
				clear(d)
				n = m
				continue
			}
			if need := 8 * len(d); cap(buf) < need {
				buf = make([]byte, need)
			}
			b := buf[:8*len(d)]
			if _, err := f.ReadAt(b, offset[k]+int64(n-starts[k])*int64(F)*8); err != nil {
				fail(fmt.Errorf("%s: %w", files[k], err))
				clear(d)
			} else {
				for i := range d {
					d[i] = math.Float64frombits(binary.LittleEndian.Uint64(b[8*i:]))
				}
			}
			n = m
		}
	}
	close = func() {
		for _, f := range open {
			if f != nil {
				f.Close()
			}
		}
	}
	return read, close
}
