package train

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strconv"
	"strings"
	"time"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
	"gonum.org/v1/plot/vg/vgsvg"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/eval/figure"
	"github.com/strialab/stria/eval/report"
	"github.com/strialab/stria/eval/tuning"
)

// DirExport is the folder, inside a run or comparison folder, that stria
// export writes to by default.
const DirExport = "export"

// DefaultNeurons is the neuron selection of the tuning figures when none
// is given: the three neurons with the highest test_r2 and the one with the
// lowest.
const DefaultNeurons = "best 3,worst 1"

// Folder kinds.
const (
	KindRun        = "run"
	KindComparison = "comparison"
)

// ExportOptions are the settings of ExportFolder.
type ExportOptions struct {
	// Out is the output folder; empty: FOLDER/export.
	Out string
	// Neurons selects the neurons that get a tuning figure (run folders
	// only); see SelectNeurons. Empty: DefaultNeurons.
	Neurons string
	// Compare is a comparison folder of the same recording whose baseline
	// curves are drawn in the tuning figures (run folders only; optional).
	Compare string
}

// ExportFigure is one figure written by ExportFolder.
type ExportFigure struct {
	Name    string   // file name without extension, inside the export folder
	Caption string   // what it shows, for the report
	Arrays  []string // files (inside the export folder, or the source folder) it is drawn from
}

// Exported lists what ExportFolder wrote.
type Exported struct {
	Folder  string // the run or comparison folder
	Kind    string // KindRun or KindComparison
	Dir     string // the export folder
	Figures []ExportFigure
	Tables  []report.Table // tables written (as CSV and markdown), for the report
	// Notes say what was skipped and why (e.g. the recording could not be
	// read, so the tuning figures are missing).
	Notes []string
}

// FolderKind tells a run folder (model.json) from a comparison folder
// (comparison.json). Any other folder is an error that says what is missing.
func FolderKind(dir string) (string, error) {
	st, err := os.Stat(dir)
	if err != nil {
		return "", err
	}
	if !st.IsDir() {
		return "", fmt.Errorf("%s: not a folder", dir)
	}
	if _, err := os.Stat(filepath.Join(dir, FileComparison)); err == nil {
		return KindComparison, nil
	}
	if _, err := os.Stat(filepath.Join(dir, FileManifest)); err == nil {
		return KindRun, nil
	}
	if _, err := os.Stat(filepath.Join(dir, FileRecordings)); err == nil {
		return KindMany, nil
	}
	return "", fmt.Errorf("%s: neither a run folder (no %s, written by stria fit) nor a comparison folder (no %s, written by stria compare)", dir, FileManifest, FileComparison)
}

// ExportFolder writes the figures and arrays of a run or comparison folder
// into opt.Out (default FOLDER/export). Everything is read and checked
// before the first file is written, so a refused folder leaves no output.
// Every figure is drawn only from arrays written next to it (or from a file
// of the source folder that its ExportFigure names), and drawing is
// deterministic: the same folder, wherever it lies, gives byte-identical
// SVG files.
func ExportFolder(dir string, opt ExportOptions) (*Exported, error) {
	kind, err := FolderKind(dir)
	if err != nil {
		return nil, err
	}
	out := opt.Out
	if out == "" {
		out = filepath.Join(dir, DirExport)
	}
	if kind == KindMany {
		return nil, fmt.Errorf("%s: a comparison over several recordings: export each recording's folder inside it (or use stria report on it)", dir)
	}
	if kind == KindComparison {
		if opt.Compare != "" {
			return nil, fmt.Errorf("%s: a comparison folder; --compare applies to run folders only", dir)
		}
		if opt.Neurons != "" {
			return nil, fmt.Errorf("%s: a comparison folder; --neurons applies to run folders only", dir)
		}
		return exportComparison(dir, out)
	}
	return exportRun(dir, out, opt)
}

// figAxis is the figure package's description of a run's axis.
func figAxis(a AxisInfo) figure.AxisInfo {
	return figure.AxisInfo{Label: a.Name, Unit: a.Unit, Periodic: a.Periodic, Period: a.Max - a.Min}
}

// metricsTable is metrics.csv read back: Col[name][neuron].
type metricsTable struct {
	Col map[string][]float64
	N   int
}

// readMetrics reads metrics.csv; n is the number of neurons expected.
func readMetrics(path string, n int) (*metricsTable, error) {
	h, rows, err := readCSV(path)
	if err != nil {
		return nil, err
	}
	if len(rows) != n {
		return nil, fmt.Errorf("%s: %d neuron rows, want %d (model.json)", path, len(rows), n)
	}
	t := &metricsTable{Col: map[string][]float64{}, N: n}
	for _, name := range metricColumns {
		k := slices.Index(h, name)
		if k < 0 {
			return nil, fmt.Errorf("%s: no column %q", path, name)
		}
		v := make([]float64, n)
		for i, r := range rows {
			if v[i], err = strconv.ParseFloat(r[k], 64); err != nil {
				return nil, fmt.Errorf("%s: line %d, column %s: %q is not a number", path, i+2, name, r[k])
			}
		}
		t.Col[name] = v
	}
	return t, nil
}

// readCSV reads a CSV file with a header row.
func readCSV(path string) (header []string, rows [][]string, err error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, nil, err
	}
	defer f.Close()
	all, err := csv.NewReader(f).ReadAll()
	if err != nil {
		return nil, nil, fmt.Errorf("%s: %w", path, err)
	}
	if len(all) == 0 {
		return nil, nil, fmt.Errorf("%s: empty file", path)
	}
	return all[0], all[1:], nil
}

// SelectNeurons turns a selection into neuron indices (0-based), in the
// order given and without repeats. sel is a comma-separated list of items:
//
//	17         neuron 17 (0-based)
//	best K     the K neurons with the highest score (K defaults to 1)
//	worst K    the K neurons with the lowest score
//	random K   K neurons drawn at random with the given seed
//
// Rankings use score (one value per neuron, e.g. test_r2); neurons whose
// score is NaN are never chosen by best, worst or random. Errors name the
// item.
func SelectNeurons(sel string, score []float64, seed uint64) ([]int, error) {
	n := len(score)
	var ranked []int // finite scores, highest first; ties by index
	for j, v := range score {
		if !math.IsNaN(v) && !math.IsInf(v, 0) {
			ranked = append(ranked, j)
		}
	}
	sort.SliceStable(ranked, func(a, b int) bool { return score[ranked[a]] > score[ranked[b]] })
	var out []int
	seen := map[int]bool{}
	add := func(j int) {
		if !seen[j] {
			seen[j] = true
			out = append(out, j)
		}
	}
	for _, item := range strings.Split(sel, ",") {
		f := strings.Fields(item)
		if len(f) == 0 {
			continue
		}
		if len(f) == 1 {
			if j, err := strconv.Atoi(f[0]); err == nil {
				if j < 0 || j >= n {
					return nil, fmt.Errorf("neuron %d out of range (%d neurons, numbered from 0)", j, n)
				}
				add(j)
				continue
			}
		}
		k := 1
		if len(f) == 2 {
			var err error
			if k, err = strconv.Atoi(f[1]); err != nil || k < 1 {
				return nil, fmt.Errorf("neuron selection %q: the count must be a positive whole number", strings.TrimSpace(item))
			}
		}
		if len(f) > 2 {
			return nil, fmt.Errorf("neuron selection %q: want an index, \"best K\", \"worst K\" or \"random K\"", strings.TrimSpace(item))
		}
		k = min(k, len(ranked))
		switch f[0] {
		case "best":
			for _, j := range ranked[:k] {
				add(j)
			}
		case "worst":
			for i := len(ranked) - 1; i >= len(ranked)-k; i-- {
				add(ranked[i])
			}
		case "random":
			pool := slices.Clone(ranked)
			slices.Sort(pool)
			rng := rand.New(rand.NewPCG(seed, 0x5e1ec7))
			rng.Shuffle(len(pool), func(a, b int) { pool[a], pool[b] = pool[b], pool[a] })
			for _, j := range pool[:k] {
				add(j)
			}
		default:
			return nil, fmt.Errorf("neuron selection %q: want an index, \"best K\", \"worst K\" or \"random K\"", strings.TrimSpace(item))
		}
	}
	if len(out) == 0 {
		return nil, fmt.Errorf("neuron selection %q chose no neuron", sel)
	}
	return out, nil
}

// condData is the recording's condition means and standard errors, B x N.
type condData struct {
	Mean, SEM []float64
	Trials    int
}

// loadCondData recomputes the condition means of the recording a run was
// fitted on, binned as split.json records. The error says why it failed.
func loadCondData(dir string, m *Manifest) (*condData, error) {
	cfgPath := filepath.Join(dir, FileConfig)
	cfg, err := LoadConfig(cfgPath)
	if err != nil {
		return nil, err
	}
	rec, err := data.Load(cfg.Source())
	if err != nil {
		return nil, err
	}
	splitPath := filepath.Join(dir, FileSplit)
	b, err := os.ReadFile(splitPath)
	if err != nil {
		return nil, err
	}
	var sp SplitInfo
	if err := json.Unmarshal(b, &sp); err != nil {
		return nil, fmt.Errorf("%s: %w", splitPath, err)
	}
	nb, n := m.Axis.Bins, m.Neurons
	if rec.Y.Cols != n {
		return nil, fmt.Errorf("%s: %d neurons, but the run has %d", rec.Source.Responses, rec.Y.Cols, n)
	}
	if len(sp.Cond) != rec.Y.Rows {
		return nil, fmt.Errorf("%s: %d trials, but %s bins %d", rec.Source.Responses, rec.Y.Rows, splitPath, len(sp.Cond))
	}
	for t, c := range sp.Cond {
		if c < 0 || c >= nb {
			return nil, fmt.Errorf("%s: condition[%d] = %d, want 0..%d", splitPath, t, c, nb-1)
		}
	}
	all := make([]int, rec.Y.Rows)
	for i := range all {
		all[i] = i
	}
	st := data.NewCondStats(rec.Y, sp.Cond, all, nb)
	cd := &condData{Mean: st.Mean(nil), SEM: st.Var(nil), Trials: rec.Y.Rows}
	for c := 0; c < nb; c++ {
		for j := 0; j < n; j++ {
			cd.SEM[c*n+j] = math.Sqrt(cd.SEM[c*n+j] / float64(st.Count[c]))
		}
	}
	return cd, nil
}

// baselineCurves reads the fold-averaged curves (B x N) of the baselines of
// a comparison folder, for a run with nb bins and n neurons.
func baselineCurves(cmp string, nb, n int) (names []string, curves [][]float64, err error) {
	cj, err := readComparisonJSON(cmp)
	if err != nil {
		return nil, nil, err
	}
	if cj.Neurons != n || cj.Axis.Bins != nb {
		return nil, nil, fmt.Errorf("%s: %d neurons and %d bins, but the run has %d and %d", filepath.Join(cmp, FileComparison), cj.Neurons, cj.Axis.Bins, n, nb)
	}
	enc := encoderSet(cmp, cj)
	for _, m := range cj.Models {
		if enc[m] {
			continue
		}
		path := filepath.Join(cmp, DirCurves, FileName(m)+".npy")
		a, err := data.ReadNPY(path)
		if err != nil {
			return nil, nil, err
		}
		if a.Rows != nb || a.Cols != n {
			return nil, nil, fmt.Errorf("%s: shape %d x %d, want %d x %d (bins x neurons)", path, a.Rows, a.Cols, nb, n)
		}
		c := make([]float64, len(a.Data))
		for i, v := range a.Data {
			c[i] = float64(v)
		}
		names = append(names, m)
		curves = append(curves, c)
	}
	return names, curves, nil
}

func readComparisonJSON(dir string) (*comparisonJSON, error) {
	path := filepath.Join(dir, FileComparison)
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	var cj comparisonJSON
	if err := json.Unmarshal(b, &cj); err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	if len(cj.Models) == 0 {
		return nil, fmt.Errorf("%s: no models", path)
	}
	return &cj, nil
}

// encoderSet returns the encoders of a comparison: from its config.yaml
// when that still expands, else the models that record training epochs.
func encoderSet(dir string, cj *comparisonJSON) map[string]bool {
	enc := map[string]bool{}
	if cfg, err := LoadConfig(filepath.Join(dir, FileConfig)); err == nil {
		if specs, err := cfg.Specs(); err == nil {
			for _, s := range specs {
				if s.Baseline == "" {
					enc[s.Name] = true
				}
			}
			return enc
		}
	}
	for m := range cj.Epochs {
		enc[m] = true
	}
	return enc
}

// exportRun writes the figures and arrays of a run folder.
func exportRun(dir, out string, opt ExportOptions) (*Exported, error) {
	mod, err := LoadModel(dir)
	if err != nil {
		return nil, err
	}
	mf := &mod.Manifest
	nb, n := mf.Axis.Bins, mf.Neurons
	if len(mf.Axis.Centers) != nb {
		return nil, fmt.Errorf("%s: %d bin centres, want %d", filepath.Join(dir, FileManifest), len(mf.Axis.Centers), nb)
	}
	met, err := readMetrics(filepath.Join(dir, FileMetrics), n)
	if err != nil {
		return nil, err
	}
	sel := opt.Neurons
	if sel == "" {
		sel = DefaultNeurons
	}
	chosen, err := SelectNeurons(sel, met.Col["test_r2"], mf.Seed)
	if err != nil {
		return nil, fmt.Errorf("--neurons: %w", err)
	}
	var blNames []string
	var blCurves [][]float64
	if opt.Compare != "" {
		if _, err := FolderKind(opt.Compare); err != nil {
			return nil, err
		}
		if blNames, blCurves, err = baselineCurves(opt.Compare, nb, n); err != nil {
			return nil, err
		}
	}
	ex := &Exported{Folder: dir, Kind: KindRun, Dir: out}
	cd, err := loadCondData(dir, mf)
	if err != nil {
		ex.Notes = append(ex.Notes, fmt.Sprintf("Tuning figures skipped: the recording could not be read (%v). Filters, score histograms and preferred stimuli do not need it.", err))
		cd = nil
	}
	pm, err := mod.Predict(mf.Axis.Centers)
	if err != nil {
		return nil, fmt.Errorf("%s: predicting at the bin centres: %w", dir, err)
	}
	pred := make([]float64, len(pm.Data)) // B x N, recording units
	for i, v := range pm.Data {
		pred[i] = float64(v)
	}

	// Everything is read: write.
	if err := os.MkdirAll(out, 0o755); err != nil {
		return nil, err
	}
	ax := figAxis(mf.Axis)
	unit := mf.Axis.Unit
	net := mod.Net
	c0 := net.Convs[0]
	chans, k := c0.Out*net.In, c0.K
	binW := (mf.Axis.Max - mf.Axis.Min) / float64(nb)
	filt := net.ConvW(0)
	offs := figure.TapOffsets(k, binW)
	hdr := []string{"offset"}
	if unit != "" {
		hdr[0] = "offset_" + unit
	}
	for c := 0; c < chans; c++ {
		hdr = append(hdr, "ch"+strconv.Itoa(c+1))
	}
	rows := make([][]float64, k)
	for j := range rows {
		rows[j] = []float64{offs[j]}
		for c := 0; c < chans; c++ {
			rows[j] = append(rows[j], filt[c*k+j])
		}
	}
	if err := writeFloatCSV(filepath.Join(out, "filters.csv"), hdr, rows); err != nil {
		return nil, err
	}
	if err := data.WriteNPY64(filepath.Join(out, "filters.npy"), []int{chans, k}, filt); err != nil {
		return nil, err
	}
	if err := figure.Filters(filepath.Join(out, "filters"), filt, chans, k, binW, ax); err != nil {
		return nil, err
	}
	ex.Figures = append(ex.Figures, ExportFigure{Name: "filters", Arrays: []string{"filters.csv", "filters.npy"},
		Caption: fmt.Sprintf("Learned first-layer filters: %d channels, %d taps, against the offset of the input bin each tap reads (%g %s bins; 0 is the output bin).", chans, k, binW, unit)})

	last := len(net.Convs) - 1
	lc, lp := net.Convs[last].Out, net.OutLen(last)
	if err := data.WriteNPY64(filepath.Join(out, "readout_weights.npy"), []int{n, lc, lp}, net.ReadW()); err != nil {
		return nil, err
	}

	// Tuning of the chosen neurons.
	if cd != nil {
		for _, j := range chosen {
			mean, sem, enc := column(cd.Mean, nb, n, j), column(cd.SEM, nb, n, j), column(pred, nb, n, j)
			curves := []figure.Curve{{Name: "encoder", X: mf.Axis.Centers, Y: enc}}
			h := []string{"center", "data_mean", "data_sem", "encoder"}
			cols := [][]float64{mf.Axis.Centers, mean, sem, enc}
			for i, bn := range blNames {
				y := column(blCurves[i], nb, n, j)
				curves = append(curves, figure.Curve{Name: bn, X: mf.Axis.Centers, Y: y})
				h = append(h, bn)
				cols = append(cols, y)
			}
			name := fmt.Sprintf("tuning_n%d", j)
			if err := writeFloatCSV(filepath.Join(out, name+".csv"), h, transpose(cols)); err != nil {
				return nil, err
			}
			if err := figure.Tuning(filepath.Join(out, name), mf.Axis.Centers, mean, sem, curves, ax, "response (recording units)"); err != nil {
				return nil, err
			}
			what := "the encoder's prediction at each bin centre"
			if len(blNames) > 0 {
				what += " and the baselines' fold-averaged curves from " + opt.Compare
			}
			ex.Figures = append(ex.Figures, ExportFigure{Name: name, Arrays: []string{name + ".csv"},
				Caption: fmt.Sprintf("Neuron %d (0-based; test_r2 %.3f, cc_norm %.3f): condition means of all %d trials ± standard error, with %s. The encoder was trained on most of these trials.",
					j, met.Col["test_r2"][j], met.Col["cc_norm"][j], cd.Trials, what)})
		}
	}

	// Score histograms.
	for _, col := range []string{"cc_norm", "fev"} {
		name := "hist_" + col
		v := met.Col[col]
		if err := writeFloatCSV(filepath.Join(out, name+".csv"), []string{"neuron", col}, transpose([][]float64{seq(n), v})); err != nil {
			return nil, err
		}
		if err := figure.Histogram(filepath.Join(out, name), v, col, 0); err != nil {
			return nil, err
		}
		ex.Figures = append(ex.Figures, ExportFigure{Name: name, Arrays: []string{name + ".csv"},
			Caption: fmt.Sprintf("Distribution of %s over neurons, on the held-out test trials (metrics.csv). Neurons where it is undefined (signal power <= 0, or excluded) are counted in the legend.", col)})
	}

	// Preferred stimuli from the noise-free encoder curves.
	period := 0.0
	if mf.Axis.Periodic {
		period = mf.Axis.Max - mf.Axis.Min
	}
	pref := make([]float64, n)
	r := make([]float64, nb)
	for j := 0; j < n; j++ {
		for b := 0; b < nb; b++ {
			r[b] = pred[b*n+j]
		}
		pref[j] = tuning.Describe(r, mf.Axis.Centers, period).Preferred
	}
	if err := data.WriteNPY64(filepath.Join(out, "encoder_curves.npy"), []int{nb, n}, pred); err != nil {
		return nil, err
	}
	if err := writeFloatCSV(filepath.Join(out, "preferred.csv"), []string{"neuron", "preferred"}, transpose([][]float64{seq(n), pref})); err != nil {
		return nil, err
	}
	if err := figure.Preferred(filepath.Join(out, "preferred"), pref, ax, 0); err != nil {
		return nil, err
	}
	how := "the bin centre of the peak"
	if period > 0 {
		how = "the vector average over the bin centres"
	}
	ex.Figures = append(ex.Figures, ExportFigure{Name: "preferred", Arrays: []string{"preferred.csv", "encoder_curves.npy"},
		Caption: fmt.Sprintf("Preferred stimuli of the population: for each neuron, %s of the encoder's noise-free curve (encoder_curves.npy, bins x neurons).", how)})
	return ex, nil
}

// column returns neuron j's values of a B x N array.
func column(a []float64, nb, n, j int) []float64 {
	c := make([]float64, nb)
	for b := range c {
		c[b] = a[b*n+j]
	}
	return c
}

// transpose turns columns into rows.
func transpose(cols [][]float64) [][]float64 {
	rows := make([][]float64, len(cols[0]))
	for i := range rows {
		rows[i] = make([]float64, len(cols))
		for k, c := range cols {
			rows[i][k] = c[i]
		}
	}
	return rows
}

func seq(n int) []float64 {
	s := make([]float64, n)
	for i := range s {
		s[i] = float64(i)
	}
	return s
}

// writeFloatCSV writes a header and rows of numbers (shortest repr that
// reads back exactly; NaN as NaN), atomically.
func writeFloatCSV(path string, header []string, rows [][]float64) error {
	return WriteAtomic(path, func(w io.Writer) error {
		h := make([]string, len(header))
		for i, s := range header {
			h[i] = csvField(s)
		}
		if _, err := io.WriteString(w, strings.Join(h, ",")+"\n"); err != nil {
			return err
		}
		buf := make([]byte, 0, 256)
		for _, r := range rows {
			buf = buf[:0]
			for i, v := range r {
				if i > 0 {
					buf = append(buf, ',')
				}
				buf = strconv.AppendFloat(buf, v, 'g', -1, 64)
			}
			buf = append(buf, '\n')
			if _, err := w.Write(buf); err != nil {
				return err
			}
		}
		return nil
	})
}

// foldAveraged reads scores.csv and averages each model's per-neuron score
// over folds, NaN folds left out and excluded neurons NaN (as Summarise
// does). Result: avg[metric][model][neuron].
func foldAveraged(dir string, models []string, n int, metrics []string) (map[string]map[string][]float64, error) {
	path := filepath.Join(dir, FileScores)
	h, rows, err := readCSV(path)
	if err != nil {
		return nil, err
	}
	idx := func(name string) (int, error) {
		k := slices.Index(h, name)
		if k < 0 {
			return 0, fmt.Errorf("%s: no column %q", path, name)
		}
		return k, nil
	}
	km, err := idx("model")
	if err != nil {
		return nil, err
	}
	kn, err := idx("neuron")
	if err != nil {
		return nil, err
	}
	kx, err := idx("excluded")
	if err != nil {
		return nil, err
	}
	kc := make([]int, len(metrics))
	for i, m := range metrics {
		if kc[i], err = idx(m); err != nil {
			return nil, err
		}
	}
	type acc struct {
		sum []float64
		cnt []int
	}
	accs := map[string][]acc{}
	for _, m := range models {
		a := make([]acc, len(metrics))
		for i := range a {
			a[i] = acc{make([]float64, n), make([]int, n)}
		}
		accs[m] = a
	}
	excluded := make([]bool, n)
	for i, r := range rows {
		a, ok := accs[r[km]]
		if !ok {
			continue
		}
		j, err := strconv.Atoi(r[kn])
		if err != nil || j < 0 || j >= n {
			return nil, fmt.Errorf("%s: line %d: neuron %q out of range (0..%d)", path, i+2, r[kn], n-1)
		}
		if r[kx] != "" {
			excluded[j] = true
		}
		for q, k := range kc {
			v, err := strconv.ParseFloat(r[k], 64)
			if err != nil {
				return nil, fmt.Errorf("%s: line %d, column %s: %q is not a number", path, i+2, metrics[q], r[k])
			}
			if !math.IsNaN(v) {
				a[q].sum[j] += v
				a[q].cnt[j]++
			}
		}
	}
	out := map[string]map[string][]float64{}
	for q, met := range metrics {
		out[met] = map[string][]float64{}
		for _, m := range models {
			a := accs[m][q]
			v := make([]float64, n)
			for j := range v {
				v[j] = math.NaN()
				if a.cnt[j] > 0 && !excluded[j] {
					v[j] = a.sum[j] / float64(a.cnt[j])
				}
			}
			out[met][m] = v
		}
	}
	return out, nil
}

// exportComparison writes the figures and tables of a comparison folder.
func exportComparison(dir, out string) (*Exported, error) {
	cj, err := readComparisonJSON(dir)
	if err != nil {
		return nil, err
	}
	n := cj.Neurons
	if n < 1 {
		return nil, fmt.Errorf("%s: neurons %d", filepath.Join(dir, FileComparison), n)
	}
	metrics := []string{"cc_norm", "test_r2", "explainable_fraction", "cc_max"}
	avg, err := foldAveraged(dir, cj.Models, n, metrics)
	if err != nil {
		return nil, err
	}
	enc := encoderSet(dir, cj)
	var encoders, baselines []string
	for _, m := range cj.Models {
		if enc[m] {
			encoders = append(encoders, m)
		} else {
			baselines = append(baselines, m)
		}
	}
	if len(encoders) == 0 || len(baselines) == 0 {
		// Without the split, compare every pair against the first model.
		encoders, baselines = cj.Models[:1], cj.Models[1:]
	}
	ex := &Exported{Folder: dir, Kind: KindComparison, Dir: out}
	if err := os.MkdirAll(out, 0o755); err != nil {
		return nil, err
	}
	// Fold-averaged per-neuron scores, one file per metric.
	for _, met := range metrics {
		cols := [][]float64{seq(n)}
		for _, m := range cj.Models {
			cols = append(cols, avg[met][m])
		}
		if err := writeFloatCSV(filepath.Join(out, "foldavg_"+met+".csv"), append([]string{"neuron"}, cj.Models...), transpose(cols)); err != nil {
			return nil, err
		}
	}
	for _, met := range []string{"cc_norm", "test_r2"} {
		for _, e := range encoders {
			for _, b := range baselines {
				name := "scatter_" + met + "_" + FileName(b) + "_vs_" + FileName(e)
				if err := figure.Scatter(filepath.Join(out, name), avg[met][b], avg[met][e], b, e, met); err != nil {
					return nil, err
				}
				ex.Figures = append(ex.Figures, ExportFigure{Name: name, Arrays: []string{"foldavg_" + met + ".csv"},
					Caption: fmt.Sprintf("Per-neuron %s averaged over %d folds: %s (x) against %s (y). Points above the diagonal are neurons that %s predicts better.", met, cj.Folds, b, e, e)})
			}
		}
	}
	if err := figure.Histograms(filepath.Join(out, "hist_cc_norm_models"), avg["cc_norm"], cj.Models, "cc_norm", 0); err != nil {
		return nil, err
	}
	ex.Figures = append(ex.Figures, ExportFigure{Name: "hist_cc_norm_models", Arrays: []string{"foldavg_cc_norm.csv"},
		Caption: fmt.Sprintf("Distribution over neurons of the fold-averaged cc_norm, one outline per model (%d folds).", cj.Folds)})
	// The noise ceiling depends on the test trials of each fold, not on the
	// model: take the first model's copy.
	for _, met := range []string{"explainable_fraction", "cc_max"} {
		name := "noise_ceiling_" + met
		if err := figure.Histogram(filepath.Join(out, name), avg[met][cj.Models[0]], met, 0); err != nil {
			return nil, err
		}
		ex.Figures = append(ex.Figures, ExportFigure{Name: name, Arrays: []string{"foldavg_" + met + ".csv"},
			Caption: fmt.Sprintf("Noise ceiling: distribution over neurons of %s averaged over the %d test folds (the same for every model).", met, cj.Folds)})
	}
	// The summary table, wide, as CSV and markdown.
	tab := report.Table{Caption: fmt.Sprintf("Median over neurons of the fold-averaged score [interquartile range], %d-fold cross-validation, %d neurons.", cj.Folds, n),
		Header: []string{"model"}, Numeric: []bool{false}}
	for _, k := range CompareMetrics {
		tab.Header = append(tab.Header, k)
		tab.Numeric = append(tab.Numeric, true)
	}
	var csvRows [][]string
	csvHead := []string{"model"}
	for _, k := range CompareMetrics {
		csvHead = append(csvHead, k+"_median", k+"_q1", k+"_q3", k+"_neurons", k+"_nan")
	}
	for _, m := range cj.Models {
		row := []string{m}
		crow := []string{csvField(m)}
		for _, k := range CompareMetrics {
			s := cj.Summary[m][k]
			row = append(row, fmt.Sprintf("%.3f [%.3f, %.3f]", float64(s.Median), float64(s.Q1), float64(s.Q3)))
			crow = append(crow, fmtNum(float64(s.Median)), fmtNum(float64(s.Q1)), fmtNum(float64(s.Q3)), strconv.Itoa(s.N), strconv.Itoa(s.NaN))
		}
		tab.Rows = append(tab.Rows, row)
		csvRows = append(csvRows, crow)
	}
	err = WriteAtomic(filepath.Join(out, "summary_table.csv"), func(w io.Writer) error {
		_, err := io.WriteString(w, strings.Join(csvHead, ",")+"\n")
		for _, r := range csvRows {
			if err == nil {
				_, err = io.WriteString(w, strings.Join(r, ",")+"\n")
			}
		}
		return err
	})
	if err != nil {
		return nil, err
	}
	err = WriteAtomic(filepath.Join(out, "summary_table.md"), func(w io.Writer) error {
		fmt.Fprintf(w, "%s\n\n| %s |\n|%s\n", tab.Caption, strings.Join(tab.Header, " | "), strings.Repeat(" --- |", len(tab.Header)))
		for _, r := range tab.Rows {
			fmt.Fprintf(w, "| %s |\n", strings.Join(r, " | "))
		}
		fmt.Fprintln(w)
		for _, k := range CompareMetrics {
			fmt.Fprintf(w, "Best median %s: %s\n", k, cj.Winner[k])
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	ex.Tables = append(ex.Tables, tab)
	return ex, nil
}

// FileReport is the default file name of the report inside the folder.
const FileReport = "report.html"

// WriteReport exports the folder (into opt.Out, default FOLDER/export, with
// ExportFolder) and writes one self-contained HTML report of it to out
// (default FOLDER/report.html). It returns the report's path.
func WriteReport(dir, out string, opt ExportOptions) (string, error) {
	if out == "" {
		out = filepath.Join(dir, FileReport)
	}
	if kind, err := FolderKind(dir); err == nil && kind == KindMany {
		r, err := manyReport(dir)
		if err != nil {
			return "", err
		}
		return out, report.Write(out, r)
	}
	ex, err := ExportFolder(dir, opt)
	if err != nil {
		return "", err
	}
	var r *report.Report
	if ex.Kind == KindRun {
		r, err = runReport(ex)
	} else {
		r, err = comparisonReport(ex)
	}
	if err != nil {
		return "", err
	}
	if err := report.Write(out, r); err != nil {
		return "", err
	}
	return out, nil
}

// reportFigures reads the SVG of each figure of ex.
func reportFigures(ex *Exported, keep func(name string) bool) ([]report.Figure, error) {
	var figs []report.Figure
	for _, f := range ex.Figures {
		if !keep(f.Name) {
			continue
		}
		b, err := os.ReadFile(filepath.Join(ex.Dir, f.Name+".svg"))
		if err != nil {
			return nil, err
		}
		figs = append(figs, report.Figure{Caption: f.Caption + " Arrays: " + strings.Join(f.Arrays, ", ") + ".", SVG: b})
	}
	return figs, nil
}

func subtitle(dir string) string {
	abs, err := filepath.Abs(dir)
	if err != nil {
		abs = dir
	}
	return abs + " — " + time.Now().Format("2006-01-02 15:04")
}

func readJSONFile(path string, v any) error {
	b, err := os.ReadFile(path)
	if err != nil {
		return err
	}
	if err := json.Unmarshal(b, v); err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	return nil
}

// runReport builds the report of an exported run folder.
func runReport(ex *Exported) (*report.Report, error) {
	dir := ex.Folder
	var mf Manifest
	if err := readJSONFile(filepath.Join(dir, FileManifest), &mf); err != nil {
		return nil, err
	}
	var sum Summary
	if err := readJSONFile(filepath.Join(dir, FileSummary), &sum); err != nil {
		return nil, err
	}
	cfgYAML, err := os.ReadFile(filepath.Join(dir, FileConfig))
	if err != nil {
		return nil, err
	}
	cautions := sum.Cautions
	if len(cautions) == 0 {
		cautions = Cautions
	}
	r := &report.Report{Title: "stria run " + filepath.Base(filepath.Clean(dir)), Subtitle: subtitle(dir), Cautions: cautions}

	// Scores.
	scores := report.Table{Caption: fmt.Sprintf("Per-neuron scores on the %d held-out test trials: median and quartiles over the %d scored neurons (metrics.csv has every neuron).", sum.TestTrials, sum.Scored),
		Header: []string{"metric", "median", "q1", "q3", "neurons", "undefined"}, Numeric: []bool{false, true, true, true, true, true}}
	for _, k := range metricColumns {
		s, ok := sum.Spread[k]
		if !ok {
			continue
		}
		scores.Rows = append(scores.Rows, []string{k, f3(s.Median), f3(s.Q1), f3(s.Q3), strconv.Itoa(s.N), strconv.Itoa(s.NaN)})
	}
	r.Sections = append(r.Sections, report.Section{ID: "scores", Heading: "Held-out scores",
		Paragraphs: []string{fmt.Sprintf("Encoder: %s, output %s, loss %s, %d neurons, seed %d, stria %s, created %s.", layerText(mf.Layers), mf.Output, mf.Loss, mf.Neurons, mf.Seed, mf.Stria, mf.Created)},
		Notes:      cautions, Tables: []report.Table{scores}})

	// Data.
	parts := report.Table{Caption: "Trials in each part of the split (split.json).", Header: []string{"part", "trials"}, Numeric: []bool{false, true}}
	for _, p := range []string{"train", "validation", "test"} {
		parts.Rows = append(parts.Rows, []string{p, strconv.Itoa(mf.Trials[p])})
	}
	dataSec := report.Section{ID: "data", Heading: "Data",
		Paragraphs: []string{
			fmt.Sprintf("Recording: %s (stimulus: %s).", mf.Sources["responses"], mf.Sources["stimulus"]),
			fmt.Sprintf("Axis: %s in %s, %g to %g%s, %d bins, %s encoding.", mf.Axis.Name, mf.Axis.Unit, mf.Axis.Min, mf.Axis.Max, periodicText(mf.Axis), mf.Axis.Bins, mf.Axis.Encoding),
			fmt.Sprintf("Neurons: %d in the recording, %d scored, %d excluded; %d scored neurons have signal power <= 0 on the test trials, so their noise-ceiling ratios (fev, cc_norm) are undefined.", sum.Neurons, sum.Scored, sum.Excluded, sum.NoSignal),
		},
		Tables: []report.Table{parts}}
	for _, w := range sum.Warnings {
		dataSec.Notes = append(dataSec.Notes, "Warning: "+w)
	}
	dataSec.Notes = append(dataSec.Notes, ex.Notes...)
	r.Sections = append(r.Sections, dataSec)

	// Training.
	trainSec := report.Section{ID: "training", Heading: "Training",
		Paragraphs: []string{fmt.Sprintf("%d epochs, best epoch %d (its weights are kept), stopped by %s, %.1f s.", sum.Epochs, sum.BestEpoch, sum.Stop, sum.WallSeconds)}}
	log, err := readTrainLog(filepath.Join(dir, FileLog))
	if err != nil {
		trainSec.Notes = append(trainSec.Notes, err.Error())
	} else if len(log) > 0 {
		base := filepath.Join(ex.Dir, "loss")
		if err := lossFigure(base, log); err != nil {
			return nil, err
		}
		b, err := os.ReadFile(base + ".svg")
		if err != nil {
			return nil, err
		}
		trainSec.Figures = append(trainSec.Figures, report.Figure{SVG: b,
			Caption: "Training and validation loss per epoch (train_log.csv; loss in z-scored units when the run z-scores). Validation trials are carved from the training part; the test trials are never used."})
		tab := report.Table{Caption: "First, best and last epochs (train_log.csv).", Header: []string{"epoch", "", "train_loss", "val_loss", "val_r2"}, Numeric: []bool{true, false, true, true, true}}
		pick := func(e EpochLog, what string) {
			tab.Rows = append(tab.Rows, []string{strconv.Itoa(e.Epoch), what, g4(e.TrainLoss), g4(e.ValLoss), f3(Num(e.ValR2))})
		}
		pick(log[0], "first")
		for _, e := range log {
			if e.Epoch == sum.BestEpoch {
				pick(e, "best")
			}
		}
		pick(log[len(log)-1], "last")
		trainSec.Tables = append(trainSec.Tables, tab)
	}
	r.Sections = append(r.Sections, trainSec)

	// Figures of export.
	figs := func(keep func(string) bool) []report.Figure {
		f, e := reportFigures(ex, keep)
		if e != nil && err == nil {
			err = e
		}
		return f
	}
	r.Sections = append(r.Sections,
		report.Section{ID: "filters", Heading: "Filters", Figures: figs(func(n string) bool { return n == "filters" }),
			Paragraphs: []string{"The readout weights (neurons x channels x positions) are in readout_weights.npy."}},
		report.Section{ID: "tuning", Heading: "Tuning of selected neurons", Figures: figs(func(n string) bool { return strings.HasPrefix(n, "tuning_") }), Notes: ex.Notes},
		report.Section{ID: "population", Heading: "Scores and preferred stimuli across neurons",
			Figures: figs(func(n string) bool { return strings.HasPrefix(n, "hist_") || n == "preferred" }), Notes: cautions[:1]},
		report.Section{ID: "config", Heading: "Resolved config", Paragraphs: []string{"config.yaml of the run: refitting it gives the same numbers."}, Code: string(cfgYAML)},
	)
	if err != nil {
		return nil, err
	}
	return r, nil
}

// comparisonReport builds the report of an exported comparison folder.
func comparisonReport(ex *Exported) (*report.Report, error) {
	dir := ex.Folder
	cj, err := readComparisonJSON(dir)
	if err != nil {
		return nil, err
	}
	cfgYAML, err := os.ReadFile(filepath.Join(dir, FileConfig))
	if err != nil {
		return nil, err
	}
	cautions := cj.Cautions
	if len(cautions) == 0 {
		cautions = Cautions
	}
	r := &report.Report{Title: "stria comparison " + filepath.Base(filepath.Clean(dir)), Subtitle: subtitle(dir), Cautions: cautions}
	var win []string
	for _, k := range CompareMetrics {
		win = append(win, fmt.Sprintf("%s: %s", k, cj.Winner[k]))
	}
	r.Sections = append(r.Sections, report.Section{ID: "summary", Heading: "Summary",
		Paragraphs: []string{
			fmt.Sprintf("%d models, %d-fold cross-validation, %d neurons. Each neuron's score is averaged over the folds; the table gives the median over neurons and the interquartile range.", len(cj.Models), cj.Folds, cj.Neurons),
			"Highest median — " + strings.Join(win, "; ") + ".",
		},
		Notes: cautions, Tables: ex.Tables})

	pairs := report.Table{Caption: "Pairwise comparisons across neurons (pairs.csv): share of neurons where model A scores higher, Wilcoxon statistic W, p-value, neurons used and zero differences dropped.",
		Header: []string{"metric", "model A", "model B", "A higher", "W", "p", "n", "dropped", "method"}, Numeric: []bool{false, false, false, true, true, true, true, true, false}}
	for _, p := range cj.Pairs {
		pairs.Rows = append(pairs.Rows, []string{p.Metric, p.A, p.B, fmt.Sprintf("%.1f %%", 100*float64(p.ShareA)), g4(float64(p.W)), fmt.Sprintf("%.3g", float64(p.P)), strconv.Itoa(p.N), strconv.Itoa(p.Dropped), p.Method})
	}
	method := cj.PValues
	if method == "" {
		method = WilcoxonNote
	}
	r.Sections = append(r.Sections, report.Section{ID: "pairs", Heading: "Pairwise tests",
		Paragraphs: []string{"p-values: " + method}, Notes: cautions[1:], Tables: []report.Table{pairs}})

	figs, err := reportFigures(ex, func(n string) bool { return strings.HasPrefix(n, "scatter_") })
	if err != nil {
		return nil, err
	}
	r.Sections = append(r.Sections, report.Section{ID: "scatter", Heading: "Model against model, per neuron", Figures: figs})
	figs, err = reportFigures(ex, func(n string) bool { return n == "hist_cc_norm_models" || strings.HasPrefix(n, "noise_ceiling_") })
	if err != nil {
		return nil, err
	}
	r.Sections = append(r.Sections, report.Section{ID: "distributions", Heading: "Distributions and noise ceiling", Figures: figs, Notes: cautions[:1]})

	dataSec := report.Section{ID: "data", Heading: "Data",
		Paragraphs: []string{fmt.Sprintf("Recordings: %s.", strings.Join(cj.Recordings, ", ")),
			fmt.Sprintf("Axis: %s in %s, %g to %g%s, %d bins.", cj.Axis.Name, cj.Axis.Unit, cj.Axis.Min, cj.Axis.Max, periodicText(cj.Axis), cj.Axis.Bins),
			fmt.Sprintf("Neurons: %d, of which %d excluded from every score.", cj.Neurons, len(cj.Excluded))}}
	ids := make([]string, 0, len(cj.Excluded))
	for id := range cj.Excluded {
		ids = append(ids, id)
	}
	slices.Sort(ids)
	for _, id := range ids {
		dataSec.Notes = append(dataSec.Notes, fmt.Sprintf("Neuron %s (0-based) excluded: %s.", id, cj.Excluded[id]))
	}
	for _, w := range cj.Warnings {
		dataSec.Notes = append(dataSec.Notes, "Warning: "+w)
	}
	r.Sections = append(r.Sections, dataSec,
		report.Section{ID: "config", Heading: "Resolved config", Code: string(cfgYAML)})
	return r, nil
}

func f3(v Num) string {
	if math.IsNaN(float64(v)) {
		return "NaN"
	}
	return strconv.FormatFloat(float64(v), 'f', 3, 64)
}

func g4(v float64) string { return strconv.FormatFloat(v, 'g', 4, 64) }

func periodicText(a AxisInfo) string {
	if a.Periodic {
		return fmt.Sprintf(", periodic (period %g %s)", a.Max-a.Min, a.Unit)
	}
	return ""
}

func layerText(ls []LayerInfo) string {
	var parts []string
	for _, l := range ls {
		parts = append(parts, fmt.Sprintf("conv %d channels x kernel %d, stride %d, %s border", l.Channels, l.Kernel, l.Stride, l.Border))
	}
	return strings.Join(parts, "; ")
}

// readTrainLog reads train_log.csv.
func readTrainLog(path string) ([]EpochLog, error) {
	h, rows, err := readCSV(path)
	if err != nil {
		return nil, err
	}
	want := []string{"epoch", "train_loss", "val_loss", "val_r2"}
	k := make([]int, len(want))
	for i, w := range want {
		if k[i] = slices.Index(h, w); k[i] < 0 {
			return nil, fmt.Errorf("%s: no column %q", path, w)
		}
	}
	log := make([]EpochLog, len(rows))
	for i, r := range rows {
		var v [4]float64
		for q := range want {
			if v[q], err = strconv.ParseFloat(r[k[q]], 64); err != nil {
				return nil, fmt.Errorf("%s: line %d, column %s: %q is not a number", path, i+2, want[q], r[k[q]])
			}
		}
		log[i] = EpochLog{Epoch: int(v[0]), TrainLoss: v[1], ValLoss: v[2], ValR2: v[3]}
	}
	return log, nil
}

// lossFigure draws the training and validation loss against the epoch,
// base+".svg" and base+".png", in the figure package's sizes, fonts and
// colours.
func lossFigure(base string, log []EpochLog) error {
	p := plot.New()
	p.X.Label.Text, p.Y.Label.Text = "epoch", "loss"
	sans := font.Font{Typeface: "Liberation", Variant: "Sans"}
	for _, a := range []*plot.Axis{&p.X, &p.Y} {
		a.Label.TextStyle.Font = font.From(sans, figure.LabelSize)
		a.Label.TextStyle.Color = figure.Ink
		a.Tick.Label.Font = font.From(sans, figure.TickSize)
		a.Tick.Label.Color = figure.Ink
		a.LineStyle.Width = vg.Points(0.6)
		a.Tick.LineStyle.Width = vg.Points(0.6)
		a.Tick.Marker = plot.TickerFunc(roundTicks)
	}
	p.Legend.TextStyle.Font = font.From(sans, figure.LegendSize)
	p.Legend.TextStyle.Color = figure.Ink
	p.Legend.Top = true
	for i, name := range []string{"train", "validation"} {
		var xy plotter.XYs
		for _, e := range log {
			v := e.TrainLoss
			if i == 1 {
				v = e.ValLoss
			}
			if !math.IsNaN(v) && !math.IsInf(v, 0) {
				xy = append(xy, plotter.XY{X: float64(e.Epoch), Y: v})
			}
		}
		if len(xy) == 0 {
			continue
		}
		l, err := plotter.NewLine(xy)
		if err != nil {
			return fmt.Errorf("%s: %w", base, err)
		}
		l.LineStyle = figure.SeriesStyle(i)
		p.Add(l)
		p.Legend.Add(name, l)
	}
	sc := vgsvg.New(figure.Width, figure.Height)
	p.Draw(draw.New(sc))
	var sb bytes.Buffer
	if _, err := sc.WriteTo(&sb); err != nil {
		return fmt.Errorf("%s.svg: %w", base, err)
	}
	ic := vgimg.NewWith(vgimg.UseWH(figure.Width, figure.Height), vgimg.UseDPI(figure.DPI))
	p.Draw(draw.New(ic))
	var pb bytes.Buffer
	if _, err := (vgimg.PngCanvas{Canvas: ic}).WriteTo(&pb); err != nil {
		return fmt.Errorf("%s.png: %w", base, err)
	}
	// Name metric-compatible fallbacks, as the figure package does.
	svg := bytes.ReplaceAll(sb.Bytes(), []byte("font-family:Liberation Sans;"), []byte("font-family:'Liberation Sans',Arial,Helvetica,sans-serif;"))
	if err := figure.WriteFileAtomic(base+".svg", svg); err != nil {
		return err
	}
	return figure.WriteFileAtomic(base+".png", pb.Bytes())
}

// roundTicks labels ticks at multiples of 1, 2 or 5 times a power of ten,
// with no more decimals than the step needs.
func roundTicks(lo, hi float64) []plot.Tick {
	if !(hi > lo) || math.IsInf(hi-lo, 0) {
		return []plot.Tick{{Value: lo, Label: strconv.FormatFloat(lo, 'g', 4, 64)}}
	}
	mag := math.Pow(10, math.Floor(math.Log10((hi-lo)/5)))
	step := mag
	for _, m := range []float64{1, 2, 5, 10} {
		if step = m * mag; (hi-lo)/step <= 7 {
			break
		}
	}
	dec := max(0, -int(math.Floor(math.Log10(step)+1e-9)))
	var ticks []plot.Tick
	for i := math.Ceil(lo/step - 1e-9); i*step <= hi+1e-9*step; i++ {
		ticks = append(ticks, plot.Tick{Value: i * step, Label: strconv.FormatFloat(i*step+0, 'f', dec, 64)})
	}
	return ticks
}
