package main

import (
	"bytes"
	"encoding/json"
	"image/png"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"sort"
	"strconv"
	"strings"
	"testing"

	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/train"
	"github.com/strialab/stria/train/runfolder"
	"github.com/strialab/stria/train/runfolder/comparefolder"
)

// copyDir copies a folder tree, leaving out the folder named skip.
func copyDir(t *testing.T, src, dst, skip string) {
	t.Helper()
	err := filepath.WalkDir(src, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(src, p)
		if d.IsDir() {
			if d.Name() == skip {
				return filepath.SkipDir
			}
			return os.MkdirAll(filepath.Join(dst, rel), 0o755)
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		return os.WriteFile(filepath.Join(dst, rel), b, 0o644)
	})
	if err != nil {
		t.Fatal(err)
	}
}

// readCSVCols reads a numeric CSV written by export into columns by name.
func readCSVCols(t *testing.T, path string) map[string][]float64 {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSpace(string(b)), "\n")
	head := strings.Split(lines[0], ",")
	cols := map[string][]float64{}
	for i, l := range lines[1:] {
		f := strings.Split(l, ",")
		if len(f) != len(head) {
			t.Fatalf("%s line %d: %d fields, want %d", path, i+2, len(f), len(head))
		}
		for k, h := range head {
			v, err := strconv.ParseFloat(f[k], 64)
			if err != nil {
				t.Fatalf("%s line %d: %v", path, i+2, err)
			}
			cols[h] = append(cols[h], v)
		}
	}
	return cols
}

func median(v []float64) float64 {
	var x []float64
	for _, a := range v {
		if !math.IsNaN(a) {
			x = append(x, a)
		}
	}
	sort.Float64s(x)
	n := len(x)
	if n%2 == 1 {
		return x[n/2]
	}
	return (x[n/2-1] + x[n/2]) / 2
}

// checkFigure checks that base.svg and base.png exist with sane content.
func checkFigure(t *testing.T, base string, texts ...string) {
	t.Helper()
	svg, err := os.ReadFile(base + ".svg")
	if err != nil || len(svg) < 2000 {
		t.Errorf("%s.svg: %d bytes, %v", base, len(svg), err)
		return
	}
	for _, s := range texts {
		if !bytes.Contains(svg, []byte(s)) {
			t.Errorf("%s.svg lacks %q", base, s)
		}
	}
	f, err := os.Open(base + ".png")
	if err != nil {
		t.Error(err)
		return
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Errorf("%s.png: %v", base, err)
		return
	}
	// 3.5 x 2.6 in (or 3.5 x 3.3 in for a scatter) at 300 dpi: eval/figure's
	// package documentation.
	if b := img.Bounds(); b.Dx() != 1050 || (b.Dy() != 780 && b.Dy() != 990) {
		t.Errorf("%s.png is %d x %d pixels, want 1050 x 780 or 990", base, b.Dx(), b.Dy())
	}
}

// externalRef finds src= or href= attributes that point outside the file.
var externalRef = regexp.MustCompile(`(?i)\b(src|href)\s*=\s*["']?([^"'#\s>][^"'\s>]*)`)

func checkSelfContained(t *testing.T, path string, figures int) {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	html := string(b)
	for _, m := range externalRef.FindAllStringSubmatch(html, -1) {
		if !strings.HasPrefix(m[2], "data:") {
			t.Errorf("%s: external reference %s=%q", path, m[1], m[2])
		}
	}
	// Namespace names are identifiers, not references; nothing else may
	// name a web address.
	rest := strings.NewReplacer("http://www.w3.org/2000/svg", "", "http://www.w3.org/1999/xlink", "").Replace(html)
	if i := strings.Index(rest, "http://"); i >= 0 {
		t.Errorf("%s: http:// at %.60s", path, rest[i:])
	}
	if i := strings.Index(rest, "https://"); i >= 0 {
		t.Errorf("%s: https:// at %.60s", path, rest[i:])
	}
	if got := strings.Count(html, "<svg"); got != figures {
		t.Errorf("%s: %d inline SVG figures, want %d", path, got, figures)
	}
	if strings.Contains(html, "<script") {
		t.Errorf("%s: contains a script", path)
	}
}

// TestExportAndReport runs a small demo, exports its run and comparison
// folders, writes both reports, and checks export on a copied run folder.
func TestExportAndReport(t *testing.T) {
	dir := t.TempDir()
	if out, err := runCLI(t, "demo", "--out", dir, "--neurons", "40", "--trials", "1200", "--quiet"); err != nil {
		t.Fatalf("demo: %v\n%s", err, out)
	}
	run, cmp := filepath.Join(dir, "run"), filepath.Join(dir, "compare")
	// The demo wrote its reports, exporting with the default neurons; start
	// from clean folders so that the exports below are checked on their own.
	for _, d := range []string{run, cmp} {
		if err := os.RemoveAll(filepath.Join(d, runfolder.DirFigures)); err != nil {
			t.Fatal(err)
		}
	}

	// Copy the run folder before anything is exported into it.
	other := filepath.Join(t.TempDir(), "elsewhere", "run-copy")
	copyDir(t, run, other, runfolder.DirFigures)

	out, err := runCLI(t, "export", "--neurons", "best 2,worst 1,5", "--compare", cmp, run)
	if err != nil {
		t.Fatalf("export: %v\n%s", err, out)
	}
	exp := filepath.Join(run, runfolder.DirFigures)
	tunings, _ := filepath.Glob(filepath.Join(exp, "tuning_n*.svg"))
	if len(tunings) != 4 {
		t.Errorf("%d tuning figures, want 4 (best 2, worst 1, neuron 5): %v", len(tunings), tunings)
	}
	checkFigure(t, filepath.Join(exp, "filters"), "offset (deg)", "ch 1")
	checkFigure(t, filepath.Join(exp, "tuning_n5"), "heading (deg)", "encoder", "vonmises", "data (mean")
	checkFigure(t, filepath.Join(exp, "hist_cc_norm"), "cc_norm", "neurons")
	checkFigure(t, filepath.Join(exp, "hist_fev"), "fev")
	checkFigure(t, filepath.Join(exp, "preferred"), "heading (deg)")

	// filters.csv: the tap offsets of a 9-tap filter over 6 deg bins are
	// -24..24 deg ((j - 4) * 6, eval/figure.TapOffsets), the weights those of
	// the run's filters.npy (8 x 9, written by stria fit).
	fc := readCSVCols(t, filepath.Join(exp, "filters.csv"))
	m, err := format.ReadNPY(filepath.Join(run, runfolder.FileFilters))
	if err != nil {
		t.Fatal(err)
	}
	if m.Rows != 8 || m.Cols != 9 || len(fc["offset_deg"]) != 9 {
		t.Fatalf("filters: npy %d x %d, csv %d rows", m.Rows, m.Cols, len(fc["offset_deg"]))
	}
	for j := 0; j < 9; j++ {
		if want := float64(j-4) * 6; fc["offset_deg"][j] != want {
			t.Errorf("filters.csv offset row %d = %v, want %v", j, fc["offset_deg"][j], want)
		}
		for c := 0; c < 8; c++ {
			// ReadNPY converts to float32: compare at float32 precision.
			if got := float32(fc["ch"+strconv.Itoa(c+1)][j]); got != m.Data[c*9+j] {
				t.Errorf("filters.csv ch%d tap %d = %v, filters.npy %v", c+1, j, got, m.Data[c*9+j])
			}
		}
	}

	// The condition means of the tuning figure agree with those stria
	// compare saved from the same recording and binning (curves/data_mean.npy,
	// float64 written, float32 read: relative tolerance 1e-6).
	if dm, err := format.ReadNPY(filepath.Join(cmp, comparefolder.DirCurves, "data_mean.npy")); err == nil {
		tc := readCSVCols(t, filepath.Join(exp, "tuning_n5.csv"))
		if len(tc["data_mean"]) != dm.Rows {
			t.Fatalf("tuning_n5.csv: %d bins, data_mean.npy %d", len(tc["data_mean"]), dm.Rows)
		}
		for b := 0; b < dm.Rows; b++ {
			want := float64(dm.Data[b*dm.Cols+5])
			if got := tc["data_mean"][b]; math.Abs(got-want) > 1e-6*math.Max(1, math.Abs(want)) {
				t.Errorf("tuning_n5.csv bin %d mean %v, curves/data_mean.npy %v", b, got, want)
			}
			if !(tc["data_sem"][b] >= 0) {
				t.Errorf("tuning_n5.csv bin %d sem %v", b, tc["data_sem"][b])
			}
		}
	}
	rw, err := os.ReadFile(filepath.Join(exp, "readout_weights.npy"))
	if err != nil || !bytes.Contains(rw[:128], []byte("'shape': (40, 8, 60)")) {
		t.Errorf("readout_weights.npy header: %.100q %v", rw, err)
	}

	// Export on the copy in another folder gives byte-identical figures.
	if out, err := runCLI(t, "export", "--neurons", "best 2,worst 1,5", "--compare", cmp, other); err != nil {
		t.Fatalf("export of the copy: %v\n%s", err, out)
	}
	svgs, _ := filepath.Glob(filepath.Join(exp, "*.svg"))
	if len(svgs) < 8 {
		t.Fatalf("only %d SVG files", len(svgs))
	}
	for _, p := range svgs {
		a, _ := os.ReadFile(p)
		b, err := os.ReadFile(filepath.Join(other, runfolder.DirFigures, filepath.Base(p)))
		if err != nil || !bytes.Equal(a, b) {
			t.Errorf("%s differs after copying the run folder (%v)", filepath.Base(p), err)
		}
	}

	// Comparison folder.
	if out, err := runCLI(t, "export", cmp); err != nil {
		t.Fatalf("export comparison: %v\n%s", err, out)
	}
	cexp := filepath.Join(cmp, runfolder.DirFigures)
	checkFigure(t, filepath.Join(cexp, "scatter_cc_norm_condmean_vs_encoder"), "cc_norm, condmean", "cc_norm, encoder")
	checkFigure(t, filepath.Join(cexp, "scatter_test_r2_vonmises_vs_encoder"), "test_r2, vonmises")
	checkFigure(t, filepath.Join(cexp, "hist_cc_norm_models"), "condmean", "smoothlinear")
	checkFigure(t, filepath.Join(cexp, "noise_ceiling_cc_max"), "cc_max")
	// The fold-averaged scores export draws (read back from
	// fold_averages.csv, which stria compare wrote exactly) give the
	// medians that stria compare computed in memory (comparison.json
	// summary, via compare.AcrossFolds); 1e-6 as when export recomputed them.
	var cj struct {
		Models  []string
		Summary map[string]map[string]struct{ Median float64 }
	}
	if b, err := os.ReadFile(filepath.Join(cmp, runfolder.FileComparison)); err != nil {
		t.Fatal(err)
	} else if err := json.Unmarshal(b, &cj); err != nil {
		t.Fatal(err)
	}
	fa := readCSVCols(t, filepath.Join(cexp, "foldavg_cc_norm.csv"))
	for _, m := range cj.Models {
		var kept []float64 // the reliable neurons, those of the summary
		for j, v := range fa[m] {
			if fa["kept"][j] == 1 {
				kept = append(kept, v)
			}
		}
		if got, want := median(kept), cj.Summary[m]["cc_norm"].Median; math.Abs(got-want) > 1e-6 {
			t.Errorf("%s: median fold-averaged cc_norm %v, comparison.json %v", m, got, want)
		}
	}
	md, _ := os.ReadFile(filepath.Join(cexp, "summary_table.md"))
	if !bytes.Contains(md, []byte("| encoder |")) || !bytes.Contains(md, []byte("Best median cc_norm")) {
		t.Errorf("summary_table.md:\n%s", md)
	}

	// Reports.
	out, err = runCLI(t, "report", run)
	if err != nil {
		t.Fatalf("report: %v\n%s", err, out)
	}
	rp := filepath.Join(run, runfolder.FileReport)
	if strings.TrimSpace(out) != rp {
		t.Errorf("report printed %q, want its path %s", out, rp)
	}
	// Default selection (best 3, worst 1): filters, 4 tuning, 3 histograms
	// (fev, cc_norm, spe), preferred, and the loss curve; the demo's
	// running speed adds the gain and offset histograms and 4 tuning
	// figures at low and high state.
	checkSelfContained(t, rp, 1+4+3+1+1+2+4)
	html, _ := os.ReadFile(rp)
	for _, want := range []string{"Resolved config", "signal power", train.Cautions[0][:40], "train_loss", "test_r2"} {
		if !bytes.Contains(html, []byte(want)) {
			t.Errorf("run report lacks %q", want)
		}
	}
	crp := filepath.Join(t.TempDir(), "cmp.html")
	if out, err := runCLI(t, "report", "--out", crp, cmp); err != nil {
		t.Fatalf("report comparison: %v\n%s", err, out)
	}
	// 2 encoders x 4 baselines x 2 metrics scatters, the overlaid histograms
	// and 2 noise-ceiling histograms (demo: encoder, encoder-4ch and the
	// four baselines of a 360 deg axis).
	checkSelfContained(t, crp, 16+1+2)
	html, _ = os.ReadFile(crp)
	for _, want := range []string{"Wilcoxon signed-rank", "Highest median", "vonmises2"} {
		if !bytes.Contains(html, []byte(want)) {
			t.Errorf("comparison report lacks %q", want)
		}
	}

	// Without the recording, the tuning figures are skipped with a note and
	// the rest is written.
	cfgPath := filepath.Join(other, runfolder.FileSettings)
	cfg, _ := os.ReadFile(cfgPath)
	cfg = bytes.ReplaceAll(cfg, []byte(filepath.Join(dir, "responses.npy")), []byte(filepath.Join(dir, "gone.npy")))
	os.WriteFile(cfgPath, cfg, 0o644)
	miss := filepath.Join(t.TempDir(), "x")
	out, err = runCLI(t, "export", "--out", miss, other)
	if err != nil || !strings.Contains(out, "Tuning figures skipped") || !strings.Contains(out, "gone.npy") {
		t.Errorf("export without the recording: %v\n%s", err, out)
	}
	if g, _ := filepath.Glob(filepath.Join(miss, "tuning_*")); len(g) != 0 {
		t.Errorf("tuning files written without the recording: %v", g)
	}
	checkFigure(t, filepath.Join(miss, "filters"), "offset (deg)")

	// Usage errors.
	if _, err := runCLI(t, "export", run, "--neurons", "3"); err == nil || !strings.Contains(err.Error(), "after the folder") {
		t.Errorf("option after the folder: %v", err)
	}
	if _, err := runCLI(t, "export", "--neurons", "400", run); err == nil || !strings.Contains(err.Error(), "out of range") {
		t.Errorf("neuron out of range: %v", err)
	}
	// A run folder whose fit did not finish is refused by every reader.
	os.Remove(filepath.Join(other, runfolder.FileComplete))
	const incomplete = "is incomplete: the fit that wrote it did not finish (no complete.json)"
	for _, args := range [][]string{{"export", other}, {"report", other}, {"predict", "--stimulus", filepath.Join(dir, "heading.npy"), "--out", filepath.Join(t.TempDir(), "p.npy"), other}} {
		if _, err := runCLI(t, args...); err == nil || !strings.Contains(err.Error(), incomplete) {
			t.Errorf("%s of an unfinished run: %v, want an error containing %q", args[0], err, incomplete)
		}
	}
	empty := t.TempDir()
	if _, err := runCLI(t, "report", empty); err == nil || !strings.Contains(err.Error(), "neither a run folder") {
		t.Errorf("report of an empty folder: %v", err)
	}
	if ents, _ := os.ReadDir(empty); len(ents) != 0 {
		t.Errorf("a refused report left files: %v", ents)
	}
}
