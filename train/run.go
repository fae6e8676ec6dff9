package train

import (
	"bufio"
	"bytes"
	"encoding/gob"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"time"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/nn"
)

// Version is the stria version recorded in run folders; the command sets
// it.
var Version = "dev"

// Run folder file names.
const (
	FileConfig     = "config.yaml"
	FileManifest   = "model.json"
	FileFilters    = "filters.npy"
	FileMetrics    = "metrics.csv"
	FileSummary    = "summary.json"
	FileLog        = "train_log.csv"
	FileSplit      = "split.json"
	FileCheckpoint = "checkpoint.gob"
	DirWeights     = "weights"
)

// WriteAtomic writes a file through a temporary file in the same folder
// and a rename, so that a crash never leaves a half-written file.
func WriteAtomic(path string, write func(w io.Writer) error) error {
	dir := filepath.Dir(path)
	f, err := os.CreateTemp(dir, "."+filepath.Base(path)+".tmp*")
	if err != nil {
		return err
	}
	tmp := f.Name()
	bw := bufio.NewWriterSize(f, 1<<20)
	err = write(bw)
	if err == nil {
		err = bw.Flush()
	}
	if err == nil {
		err = f.Sync()
	}
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = os.Rename(tmp, path)
	}
	if err != nil {
		os.Remove(tmp)
		return fmt.Errorf("writing %s: %w", path, err)
	}
	return nil
}

// WriteJSON writes v as indented JSON, atomically.
func WriteJSON(path string, v any) error {
	b, err := json.MarshalIndent(v, "", "  ")
	if err != nil {
		return fmt.Errorf("writing %s: %w", path, err)
	}
	b = append(b, '\n')
	return WriteAtomic(path, func(w io.Writer) error { _, err := w.Write(b); return err })
}

// Array names an .npy file of the run folder and its shape.
type Array struct {
	File  string `json:"file"`
	Shape []int  `json:"shape"`
}

// LayerInfo describes one conv layer in the manifest.
type LayerInfo struct {
	Channels int       `json:"channels"`
	Kernel   int       `json:"kernel"`
	Stride   int       `json:"stride"`
	Border   nn.Border `json:"border"`
	OutLen   int       `json:"out_len"`
}

// Manifest is model.json: what is needed to rebuild the model and read its
// arrays.
type Manifest struct {
	Format   string            `json:"format"`
	Stria    string            `json:"stria_version"`
	Go       string            `json:"go_version"`
	Created  string            `json:"created"`
	Seed     uint64            `json:"seed"`
	Axis     AxisInfo          `json:"axis"`
	Layers   []LayerInfo       `json:"layers"`
	Output   nn.Activation     `json:"output"`
	Loss     Loss              `json:"loss"`
	Neurons  int               `json:"neurons"`
	Features int               `json:"features"`
	Arrays   map[string]Array  `json:"arrays"`
	ZScore   bool              `json:"zscore"`
	Names    []string          `json:"neuron_names,omitempty"`
	Trials   map[string]int    `json:"trials"`
	Sources  map[string]string `json:"sources"`
}

// AxisInfo is the stimulus axis as recorded in a run.
type AxisInfo struct {
	Name     string    `json:"name"`
	Unit     string    `json:"unit"`
	Min      float64   `json:"min"`
	Max      float64   `json:"max"`
	Periodic bool      `json:"periodic"`
	Bins     int       `json:"bins"`
	Encoding Encoding  `json:"encoding"`
	Edges    []float64 `json:"bin_edges"`
	Centers  []float64 `json:"bin_centers"`
}

// DataAxis is the axis as a data.Axis.
func (a AxisInfo) DataAxis() data.Axis {
	return data.Axis{Name: a.Name, Unit: a.Unit, Min: a.Min, Max: a.Max, Periodic: a.Periodic, Bins: a.Bins}
}

// Summary is summary.json.
type Summary struct {
	Neurons     int               `json:"neurons"`
	Scored      int               `json:"neurons_scored"`
	Excluded    int               `json:"neurons_excluded"`
	NoSignal    int               `json:"neurons_no_signal_power"`
	Medians     map[string]Num    `json:"medians"`
	Spread      map[string]Spread `json:"spread"`
	TestTrials  int               `json:"test_trials"`
	BestEpoch   int               `json:"best_epoch"`
	Epochs      int               `json:"epochs"`
	Stop        string            `json:"stop"`
	WallSeconds float64           `json:"wall_seconds"`
	Cautions    []string          `json:"cautions"`
	Warnings    []string          `json:"warnings"`
}

// Num is a float64 that writes NaN and infinities as JSON null.
type Num float64

// MarshalJSON implements json.Marshaler.
func (v Num) MarshalJSON() ([]byte, error) {
	f := float64(v)
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return []byte("null"), nil
	}
	return strconv.AppendFloat(nil, f, 'g', -1, 64), nil
}

// UnmarshalJSON implements json.Unmarshaler (null reads as NaN).
func (v *Num) UnmarshalJSON(b []byte) error {
	if string(b) == "null" {
		*v = Num(math.NaN())
		return nil
	}
	f, err := strconv.ParseFloat(string(b), 64)
	*v = Num(f)
	return err
}

// Spread is the median and quartiles of a per-neuron column over the
// scored neurons; NaN counts the neurons where the column is undefined.
type Spread struct {
	Median Num `json:"median"`
	Q1     Num `json:"q1"`
	Q3     Num `json:"q3"`
	N      int `json:"n"`
	NaN    int `json:"nan"`
}

// metricColumns are the per-neuron columns of metrics.csv, in order.
var metricColumns = []string{"test_r2", "test_r", "explainable_fraction", "fev", "cc_abs", "cc_max", "cc_norm", "spe", "split_half"}

func metricValues(s eval.Scores) []float64 {
	return []float64{s.TestR2, s.TestR, s.ExplainableFraction, s.FEV, s.CCAbs, s.CCMax, s.CCNorm, s.SPE, s.SplitHalf}
}

// Summarize builds the summary of per-neuron scores; excluded neurons are
// left out of the medians.
func Summarize(scores []eval.Scores, excluded map[int]string) Summary {
	s := Summary{Neurons: len(scores), Excluded: len(excluded), Medians: map[string]Num{}, Spread: map[string]Spread{}}
	cols := make([][]float64, len(metricColumns))
	for j, sc := range scores {
		if _, ok := excluded[j]; ok {
			continue
		}
		s.Scored++
		if !(sc.SP > 0) {
			s.NoSignal++
		}
		for k, v := range metricValues(sc) {
			cols[k] = append(cols[k], v)
		}
	}
	for k, name := range metricColumns {
		sm := eval.Summarize(cols[k])
		s.Medians[name] = Num(sm.Median)
		s.Spread[name] = Spread{Median: Num(sm.Median), Q1: Num(sm.Q1), Q3: Num(sm.Q3), N: sm.N, NaN: sm.NaN}
	}
	s.Cautions = Cautions
	return s
}

// ExcludedNeurons maps constant neurons to the reason they are excluded.
func ExcludedNeurons(p *Prepared) map[int]string {
	ex := map[int]string{}
	for _, j := range p.Report.Constant {
		ex[j] = "constant response over all trials"
	}
	return ex
}

// writeMetrics writes metrics.csv, one row per neuron.
func writeMetrics(path string, p *Prepared, scores []eval.Scores, excluded map[int]string) error {
	return WriteAtomic(path, func(w io.Writer) error {
		bw := w.(*bufio.Writer)
		bw.WriteString("neuron,name")
		for _, c := range metricColumns {
			bw.WriteString("," + c)
		}
		bw.WriteString(",excluded\n")
		buf := make([]byte, 0, 32)
		for j, sc := range scores {
			bw.WriteString(strconv.Itoa(j))
			bw.WriteByte(',')
			if p.Rec.Neurons != nil {
				bw.WriteString(csvField(p.Rec.Neurons[j]))
			}
			for _, v := range metricValues(sc) {
				bw.WriteByte(',')
				if _, ok := excluded[j]; ok {
					v = math.NaN()
				}
				buf = strconv.AppendFloat(buf[:0], v, 'g', 8, 64)
				bw.Write(buf)
			}
			bw.WriteByte(',')
			bw.WriteString(csvField(excluded[j]))
			bw.WriteByte('\n')
		}
		return nil
	})
}

func csvField(s string) string {
	if bytes.ContainsAny([]byte(s), ",\"\n") {
		return strconv.Quote(s)
	}
	return s
}

// writeLog writes the training log.
func writeLog(path string, log []EpochLog) error {
	return WriteAtomic(path, func(w io.Writer) error {
		fmt.Fprintln(w, "epoch,train_loss,val_loss,val_r2,seconds")
		for _, e := range log {
			fmt.Fprintf(w, "%d,%.10g,%.10g,%.6g,%.4f\n", e.Epoch, e.TrainLoss, e.ValLoss, e.ValR2, e.Seconds)
		}
		return nil
	})
}

// SplitInfo is split.json: the trial indices of each part.
type SplitInfo struct {
	Train []int `json:"train"`
	Val   []int `json:"validation"`
	Test  []int `json:"test"`
	Cond  []int `json:"condition"`
}

// WriteRun writes the run folder of a finished fit.
func WriteRun(dir string, p *Prepared, f *Fitted, scores []eval.Scores, wall time.Duration) (*Summary, error) {
	if err := WriteModel(dir, p, f); err != nil {
		return nil, err
	}
	return WriteResults(dir, p, f, scores, wall)
}

// WriteModel writes the part of the run folder that does not depend on the
// scores: the resolved config, the manifest, the weights, the filters, the
// split and the training log. It reads nothing the scoring changes, so it
// may run while the test trials are scored.
func WriteModel(dir string, p *Prepared, f *Fitted) error {
	if err := os.MkdirAll(filepath.Join(dir, DirWeights), 0o755); err != nil {
		return err
	}
	cfgYAML, err := p.Cfg.Marshal()
	if err != nil {
		return err
	}
	if err := WriteAtomic(filepath.Join(dir, FileConfig), func(w io.Writer) error { _, err := w.Write(cfgYAML); return err }); err != nil {
		return err
	}
	net := f.Net
	m := Manifest{
		Format: "stria-run/1", Stria: Version, Go: runtime.Version(), Created: time.Now().UTC().Format(time.RFC3339),
		Seed: p.Cfg.Seed, Output: p.Cfg.Model.Output, Loss: p.Cfg.Model.Loss,
		Neurons: net.Neurons, Features: net.Features(), Arrays: map[string]Array{}, ZScore: p.Norm != nil,
		Names:   p.Rec.Neurons,
		Trials:  map[string]int{"train": len(p.Train), "validation": len(p.Val), "test": len(p.Test)},
		Sources: map[string]string{"responses": p.Rec.Source.Responses, "stimulus": p.Rec.Source.Stimulus},
		Axis: AxisInfo{Name: p.Axis.Name, Unit: p.Axis.Unit, Min: p.Axis.Min, Max: p.Axis.Max, Periodic: p.Axis.Periodic,
			Bins: p.NBins, Encoding: p.Cfg.Axis.Encoding, Edges: p.Axis.Edges(), Centers: p.Axis.Centers()},
	}
	in := net.In
	for i, c := range net.Convs {
		m.Layers = append(m.Layers, LayerInfo{Channels: c.Out, Kernel: c.K, Stride: c.Stride, Border: c.Border, OutLen: net.OutLen(i)})
		if err := saveArray(dir, &m, fmt.Sprintf("conv%d_weight", i), []int{c.Out, in, c.K}, net.ConvW(i)); err != nil {
			return err
		}
		if err := saveArray(dir, &m, fmt.Sprintf("conv%d_bias", i), []int{c.Out}, net.ConvB(i)); err != nil {
			return err
		}
		in = c.Out
	}
	if err := saveArray(dir, &m, "readout_weight", []int{net.Neurons, net.Features()}, net.ReadW()); err != nil {
		return err
	}
	if err := saveArray(dir, &m, "readout_bias", []int{net.Neurons}, net.ReadB()); err != nil {
		return err
	}
	if p.Norm != nil {
		if err := saveArray(dir, &m, "norm_mean", []int{net.Neurons}, p.Norm.Mean); err != nil {
			return err
		}
		if err := saveArray(dir, &m, "norm_scale", []int{net.Neurons}, p.Norm.Scale); err != nil {
			return err
		}
	}
	c0 := net.Convs[0]
	if err := data.WriteNPY64(filepath.Join(dir, FileFilters), []int{c0.Out * net.In, c0.K}, net.ConvW(0)); err != nil {
		return err
	}
	if err := WriteJSON(filepath.Join(dir, FileManifest), m); err != nil {
		return err
	}
	if err := WriteJSON(filepath.Join(dir, FileSplit), SplitInfo{Train: p.Train, Val: p.Val, Test: p.Test, Cond: p.Cond}); err != nil {
		return err
	}
	return writeLog(filepath.Join(dir, FileLog), f.Log)
}

// WriteResults writes metrics.csv and summary.json from the scores of the
// test trials; wall is the time the fit took up to the scores.
func WriteResults(dir string, p *Prepared, f *Fitted, scores []eval.Scores, wall time.Duration) (*Summary, error) {
	ex := ExcludedNeurons(p)
	if err := writeMetrics(filepath.Join(dir, FileMetrics), p, scores, ex); err != nil {
		return nil, err
	}
	sum := Summarize(scores, ex)
	sum.TestTrials = len(p.Test)
	sum.BestEpoch, sum.Epochs, sum.Stop = f.BestEpoch, len(f.Log), f.Stop
	sum.WallSeconds = wall.Seconds()
	sum.Warnings = p.Report.Warnings
	if err := WriteJSON(filepath.Join(dir, FileSummary), sum); err != nil {
		return nil, err
	}
	return &sum, nil
}

func saveArray(dir string, m *Manifest, name string, shape []int, v []float64) error {
	rel := filepath.Join(DirWeights, name+".npy")
	m.Arrays[name] = Array{File: rel, Shape: shape}
	return data.WriteNPY64(filepath.Join(dir, rel), shape, v)
}

// SaveCheckpoint writes a checkpoint into the run folder.
func SaveCheckpoint(dir string, c *Checkpoint) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	return WriteAtomic(filepath.Join(dir, FileCheckpoint), func(w io.Writer) error { return gob.NewEncoder(w).Encode(c) })
}

// LoadCheckpoint reads the checkpoint of a run folder.
func LoadCheckpoint(dir string) (*Checkpoint, error) {
	path := filepath.Join(dir, FileCheckpoint)
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	var c Checkpoint
	if err := gob.NewDecoder(bufio.NewReader(f)).Decode(&c); err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	return &c, nil
}
