package acuityfolder

import (
	"encoding/csv"
	"errors"
	"fmt"
	"github.com/strialab/stria/train/runfolder"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"time"

	"github.com/strialab/stria/eval/acuity"
	"github.com/strialab/stria/train"
)

// Acuity folder (stria acuity), default location stria-out/acuity. Besides
// these: settings.yaml, figures/, report.html and complete.json (last).
const (
	FileAcuity          = "acuity.json"             // AcuityInfo
	FileInfoPairs       = "information_pairs.csv"   // one row per neighbouring pair
	FileInfoVsSize      = "information_vs_size.csv" // one row per population size, with the saturation fit
	FileInfoSubsets     = "information_subsets.csv" // one row per repeat, size and pair
	FileDecodingSummary = "decoding_summary.csv"    // one row per decoder
	FileDecodingVsSize  = "decoding_vs_size.csv"    // one row per decoder, size and repeat
	FileConfusion       = "confusion.csv"           // one row per decoder, true and decoded condition
)

// KindAcuity is the kind of an acuity folder; FormatAcuity its format in
// complete.json.
const (
	KindAcuity   = runfolder.KindAcuity
	FormatAcuity = "stria-acuity/1"
)

// AcuitySaturation is the saturation fit in acuity.json: I(N) = a N/(1 +
// eps a N) fitted to the pair-averaged information, and its asymptote 1/eps
// with a bootstrap interval. Extrapolation is always true: the asymptote
// lies far beyond the largest subset measured.
type AcuitySaturation struct {
	A             runfolder.Num `json:"a"`
	Eps           runfolder.Num `json:"eps"`
	Asymptote     InfNum        `json:"asymptote"`
	Lo            InfNum        `json:"asymptote_lo95"`
	Hi            InfNum        `json:"asymptote_hi95"`
	Boot          int           `json:"bootstrap"`
	RMS           runfolder.Num `json:"rms_residual"`
	Extrapolation bool          `json:"extrapolation"`
	Error         string        `json:"error,omitempty"`
}

// InfNum is a float64 that keeps infinities in JSON: NaN is written null,
// +Inf and -Inf as the strings "+Inf" and "-Inf" (an asymptote of +Inf
// means no saturation was detected, which null would hide).
type InfNum float64

// MarshalJSON implements json.Marshaler.
func (v InfNum) MarshalJSON() ([]byte, error) {
	f := float64(v)
	switch {
	case math.IsInf(f, 1):
		return []byte(`"+Inf"`), nil
	case math.IsInf(f, -1):
		return []byte(`"-Inf"`), nil
	}
	return runfolder.Num(f).MarshalJSON()
}

// UnmarshalJSON implements json.Unmarshaler.
func (v *InfNum) UnmarshalJSON(b []byte) error {
	switch string(b) {
	case `"+Inf"`:
		*v = InfNum(math.Inf(1))
		return nil
	case `"-Inf"`:
		*v = InfNum(math.Inf(-1))
		return nil
	}
	return (*runfolder.Num)(v).UnmarshalJSON(b)
}

// AcuityDecoderInfo is one decoder's summary in acuity.json.
type AcuityDecoderInfo struct {
	Name        string        `json:"name"`
	Description string        `json:"description"`
	Trials      int           `json:"trials"`
	Accuracy    runfolder.Num `json:"accuracy"`
	MAE         runfolder.Num `json:"mean_abs_error"`
	SEM         runfolder.Num `json:"mean_abs_error_sem"`
	RMSE        runfolder.Num `json:"rms_error"`
	Excluded    int           `json:"excluded_fold_neurons"`
	Floored     int           `json:"floored_predictions"`
	Untrained   int           `json:"untrained_fold_conditions"`
}

// AcuityInfo is acuity.json.
type AcuityInfo struct {
	Format        string              `json:"format"`
	Stria         string              `json:"stria_version"`
	Created       string              `json:"created"`
	Seed          uint64              `json:"seed"`
	Axis          runfolder.AxisInfo  `json:"axis"`
	Sources       map[string]string   `json:"sources"`
	Neurons       int                 `json:"neurons"`
	Trials        int                 `json:"trials"`
	Folds         int                 `json:"folds"`
	MaxSize       int                 `json:"max_size_for_correction"`
	InfoSizes     []int               `json:"information_sizes"`
	Repeats       int                 `json:"information_repeats"`
	DecodeSizes   []int               `json:"decoding_sizes"`
	DecodeRepeats int                 `json:"decoding_repeats"`
	Saturation    AcuitySaturation    `json:"saturation"`
	Decoders      []AcuityDecoderInfo `json:"decoders"`
	Seconds       map[string]float64  `json:"seconds"`
	Cautions      []string            `json:"cautions"`
	Warnings      []string            `json:"warnings"`
}

// InfoPair is one row of information_pairs.csv: the information of the
// pair of conditions A, B (stimulus Stim, the midpoint; step Ds) at the
// largest population size, mean and standard deviation over the repeats,
// its analytic standard error at the mean, the threshold at d' = 1 at the
// mean, and the same for the trial-shuffled population.
type InfoPair struct {
	A, B                                    int
	Stim, Ds                                float64
	TA, TB, Size                            int
	Info, InfoSD, SE, Threshold             float64
	Shuffled, ShuffledSD, ShuffledThreshold float64
}

// InfoSize is one row of information_vs_size.csv: the pair-averaged
// information at one population size (mean and sd over repeats, full and
// trial-shuffled) and the saturation fit there.
type InfoSize struct {
	Size                               int
	Info, InfoSD, Shuffled, ShuffledSD float64
	Fit                                float64
}

// InfoSubset is one row of information_subsets.csv: the information of
// one pair for one random subset (repeat) of one size, and the number of
// neurons it used (the subset less neurons constant in both conditions).
type InfoSubset struct {
	Repeat, Size, Pair, Neurons int
	Info, Shuffled              float64
}

// DecodeSize is one row of decoding_vs_size.csv.
type DecodeSize struct {
	Decoder       string
	Size, Repeat  int
	MAE, Accuracy float64
}

// AcuityFolder is everything an acuity folder holds besides settings.yaml.
type AcuityFolder struct {
	Info        AcuityInfo
	Pairs       []InfoPair
	Sizes       []InfoSize
	Subsets     []InfoSubset
	DecodeSizes []DecodeSize
	// Confusion[d] is decoder d's confusion matrix (Info.Decoders order),
	// B x B row-major: true condition by row, decoded by column.
	Confusion [][]int
}

// NewAcuityFolder lays out an acuity result of the prepared recording p
// as the folder's files.
func NewAcuityFolder(p *train.Prepared, r *train.AcuityResult) *AcuityFolder {
	cfg := p.Cfg
	c := r.Curve
	f := &AcuityFolder{Info: AcuityInfo{
		Format: FormatAcuity, Stria: runfolder.Version, Created: time.Now().UTC().Format(time.RFC3339), Seed: cfg.Seed,
		Axis: runfolder.AxisOf(p), Sources: map[string]string{"responses": cfg.Data.Responses, "stimulus": cfg.Data.Stimulus},
		Neurons: r.Neurons, Trials: r.Trials, Folds: r.Folds, MaxSize: r.MaxSize,
		InfoSizes: c.Sizes, Repeats: c.Repeats, DecodeRepeats: cfg.Acuity.DecodeRepeats,
		Saturation: AcuitySaturation{A: runfolder.Num(r.Fit.A), Eps: runfolder.Num(r.Fit.Eps), Asymptote: InfNum(r.Fit.Asymptote), Lo: InfNum(r.Fit.Lo), Hi: InfNum(r.Fit.Hi),
			Boot: r.Fit.Boot, RMS: runfolder.Num(r.Fit.RMS), Extrapolation: true, Error: r.FitError},
		Seconds: r.Seconds, Cautions: r.Cautions, Warnings: r.Warnings,
	}}
	if f.Info.Warnings == nil {
		f.Info.Warnings = []string{}
	}
	S := len(c.Sizes)
	info, infoSD, shuf, shufSD := r.PairMeans(S - 1)
	for i, pr := range r.Pairs {
		f.Pairs = append(f.Pairs, InfoPair{A: pr.A, B: pr.B, Stim: pr.Stim, Ds: pr.Ds, TA: r.TA[i], TB: r.TB[i], Size: c.Sizes[S-1],
			Info: info[i], InfoSD: infoSD[i], SE: acuity.InfoSE(info[i], r.TA[i], r.TB[i], c.Sizes[S-1], pr.Ds), Threshold: acuity.Threshold(info[i]),
			Shuffled: shuf[i], ShuffledSD: shufSD[i], ShuffledThreshold: acuity.Threshold(shuf[i])})
	}
	si, siSD, ss, ssSD := r.SizeMeans()
	for s, k := range c.Sizes {
		fit := math.NaN()
		if r.FitError == "" {
			fit = r.Fit.A * float64(k) / (1 + r.Fit.Eps*r.Fit.A*float64(k))
		}
		f.Sizes = append(f.Sizes, InfoSize{Size: k, Info: si[s], InfoSD: siSD[s], Shuffled: ss[s], ShuffledSD: ssSD[s], Fit: fit})
	}
	P := len(c.Pairs)
	for rep := 0; rep < c.Repeats; rep++ {
		for s, k := range c.Sizes {
			for pi := 0; pi < P; pi++ {
				i := (rep*S+s)*P + pi
				f.Subsets = append(f.Subsets, InfoSubset{Repeat: rep + 1, Size: k, Pair: pi, Neurons: c.N[i], Info: c.Info[i], Shuffled: c.Shuffled[i]})
			}
		}
	}
	for _, d := range r.Decoders {
		s := d.Summary
		f.Info.Decoders = append(f.Info.Decoders, AcuityDecoderInfo{Name: d.Name, Description: d.Description, Trials: len(s.Trials),
			Accuracy: runfolder.Num(s.Accuracy), MAE: runfolder.Num(s.MAE), SEM: runfolder.Num(s.SEM), RMSE: runfolder.Num(s.RMSE),
			Excluded: d.Stats.Excluded, Floored: d.Stats.Floored, Untrained: d.Stats.Untrained})
		f.Info.DecodeSizes = d.Curve.Sizes
		f.Confusion = append(f.Confusion, s.Confusion)
		for rep := 0; rep < d.Curve.Repeats; rep++ {
			for si, k := range d.Curve.Sizes {
				i := rep*len(d.Curve.Sizes) + si
				f.DecodeSizes = append(f.DecodeSizes, DecodeSize{Decoder: d.Name, Size: k, Repeat: rep + 1, MAE: d.Curve.MAE[i], Accuracy: d.Curve.Accuracy[i]})
			}
		}
	}
	return f
}

// BeginAcuity prepares dir for stria acuity: it creates the folder,
// removes an earlier completion marker and writes the resolved settings.
func BeginAcuity(dir string, settings []byte) error {
	if err := runfolder.Begin(dir); err != nil {
		return err
	}
	return runfolder.WriteBytes(filepath.Join(dir, runfolder.FileSettings), settings)
}

// WriteAcuity writes the tables of an acuity folder, then acuity.json,
// then complete.json (last). Call BeginAcuity first.
func WriteAcuity(dir string, f *AcuityFolder) error {
	path := func(name string) string { return filepath.Join(dir, name) }
	err := runfolder.WriteCSV(path(FileInfoPairs), []string{"condition_a", "condition_b", "stimulus", "step", "trials_a", "trials_b", "size",
		"information", "information_sd", "information_se", "threshold", "shuffled_information", "shuffled_information_sd", "shuffled_threshold"},
		func(cw *csv.Writer) error {
			for _, r := range f.Pairs {
				if err := cw.Write([]string{itoa(r.A), itoa(r.B), runfolder.FormatExact(r.Stim), runfolder.FormatExact(r.Ds), itoa(r.TA), itoa(r.TB), itoa(r.Size),
					runfolder.FormatExact(r.Info), runfolder.FormatExact(r.InfoSD), runfolder.FormatExact(r.SE), runfolder.FormatExact(r.Threshold), runfolder.FormatExact(r.Shuffled), runfolder.FormatExact(r.ShuffledSD), runfolder.FormatExact(r.ShuffledThreshold)}); err != nil {
					return err
				}
			}
			return nil
		})
	if err != nil {
		return err
	}
	err = runfolder.WriteCSV(path(FileInfoVsSize), []string{"size", "information", "information_sd", "shuffled_information", "shuffled_information_sd", "saturation_fit"},
		func(cw *csv.Writer) error {
			for _, r := range f.Sizes {
				if err := cw.Write([]string{itoa(r.Size), runfolder.FormatExact(r.Info), runfolder.FormatExact(r.InfoSD), runfolder.FormatExact(r.Shuffled), runfolder.FormatExact(r.ShuffledSD), runfolder.FormatExact(r.Fit)}); err != nil {
					return err
				}
			}
			return nil
		})
	if err != nil {
		return err
	}
	err = runfolder.WriteCSV(path(FileInfoSubsets), []string{"repeat", "size", "pair", "neurons", "information", "shuffled_information"},
		func(cw *csv.Writer) error {
			for _, r := range f.Subsets {
				if err := cw.Write([]string{itoa(r.Repeat), itoa(r.Size), itoa(r.Pair), itoa(r.Neurons), runfolder.FormatExact(r.Info), runfolder.FormatExact(r.Shuffled)}); err != nil {
					return err
				}
			}
			return nil
		})
	if err != nil {
		return err
	}
	err = runfolder.WriteCSV(path(FileDecodingSummary), []string{"decoder", "trials", "accuracy", "mean_abs_error", "mean_abs_error_sem", "rms_error", "excluded_fold_neurons", "floored_predictions", "untrained_fold_conditions"},
		func(cw *csv.Writer) error {
			for _, d := range f.Info.Decoders {
				if err := cw.Write([]string{d.Name, itoa(d.Trials), runfolder.FormatExact(float64(d.Accuracy)), runfolder.FormatExact(float64(d.MAE)), runfolder.FormatExact(float64(d.SEM)), runfolder.FormatExact(float64(d.RMSE)),
					itoa(d.Excluded), itoa(d.Floored), itoa(d.Untrained)}); err != nil {
					return err
				}
			}
			return nil
		})
	if err != nil {
		return err
	}
	err = runfolder.WriteCSV(path(FileDecodingVsSize), []string{"decoder", "size", "repeat", "mean_abs_error", "accuracy"},
		func(cw *csv.Writer) error {
			for _, r := range f.DecodeSizes {
				if err := cw.Write([]string{r.Decoder, itoa(r.Size), itoa(r.Repeat), runfolder.FormatExact(r.MAE), runfolder.FormatExact(r.Accuracy)}); err != nil {
					return err
				}
			}
			return nil
		})
	if err != nil {
		return err
	}
	centers := f.Info.Axis.Centers
	err = runfolder.WriteCSV(path(FileConfusion), []string{"decoder", "true_condition", "true_stimulus", "decoded_condition", "decoded_stimulus", "trials"},
		func(cw *csv.Writer) error {
			for d, m := range f.Confusion {
				B := len(centers)
				for a := 0; a < B; a++ {
					for b := 0; b < B; b++ {
						if err := cw.Write([]string{f.Info.Decoders[d].Name, itoa(a), runfolder.FormatExact(centers[a]), itoa(b), runfolder.FormatExact(centers[b]), itoa(m[a*B+b])}); err != nil {
							return err
						}
					}
				}
			}
			return nil
		})
	if err != nil {
		return err
	}
	if err := runfolder.WriteJSON(path(FileAcuity), f.Info); err != nil {
		return err
	}
	return runfolder.Finish(dir, FormatAcuity)
}

func itoa(v int) string { return strconv.Itoa(v) }

// IsAcuity reports whether dir looks like an acuity folder (finished or
// not): it holds acuity.json, or settings.yaml and information_pairs.csv.
func IsAcuity(dir string) bool {
	has := func(name string) bool {
		_, err := os.Stat(filepath.Join(dir, name))
		return err == nil
	}
	return has(FileAcuity) || has(FileInfoPairs)
}

// ReadAcuity reads a finished acuity folder. A folder without
// complete.json is refused, naming it.
func ReadAcuity(dir string) (*AcuityFolder, error) {
	c, err := runfolder.ReadComplete(dir)
	if err != nil {
		if errors.Is(err, os.ErrNotExist) {
			return nil, fmt.Errorf("%s is incomplete: the stria acuity run that wrote it did not finish (no %s)", dir, runfolder.FileComplete)
		}
		return nil, err
	}
	if c.Format != FormatAcuity {
		return nil, fmt.Errorf("%s: %s says format %q, want %q (an acuity folder written by stria acuity)", dir, runfolder.FileComplete, c.Format, FormatAcuity)
	}
	f := &AcuityFolder{}
	if err := runfolder.ReadJSON(filepath.Join(dir, FileAcuity), &f.Info); err != nil {
		return nil, err
	}
	path := func(name string) string { return filepath.Join(dir, name) }
	t, err := runfolder.ReadColumns(path(FileInfoPairs))
	if err != nil {
		return nil, err
	}
	for i := range t.Rows {
		var r InfoPair
		if err := scan(t, i, []string{"condition_a", "condition_b", "stimulus", "step", "trials_a", "trials_b", "size",
			"information", "information_sd", "information_se", "threshold", "shuffled_information", "shuffled_information_sd", "shuffled_threshold"},
			&r.A, &r.B, &r.Stim, &r.Ds, &r.TA, &r.TB, &r.Size, &r.Info, &r.InfoSD, &r.SE, &r.Threshold, &r.Shuffled, &r.ShuffledSD, &r.ShuffledThreshold); err != nil {
			return nil, err
		}
		f.Pairs = append(f.Pairs, r)
	}
	if t, err = runfolder.ReadColumns(path(FileInfoVsSize)); err != nil {
		return nil, err
	}
	for i := range t.Rows {
		var r InfoSize
		if err := scan(t, i, []string{"size", "information", "information_sd", "shuffled_information", "shuffled_information_sd", "saturation_fit"},
			&r.Size, &r.Info, &r.InfoSD, &r.Shuffled, &r.ShuffledSD, &r.Fit); err != nil {
			return nil, err
		}
		f.Sizes = append(f.Sizes, r)
	}
	if t, err = runfolder.ReadColumns(path(FileInfoSubsets)); err != nil {
		return nil, err
	}
	for i := range t.Rows {
		var r InfoSubset
		if err := scan(t, i, []string{"repeat", "size", "pair", "neurons", "information", "shuffled_information"},
			&r.Repeat, &r.Size, &r.Pair, &r.Neurons, &r.Info, &r.Shuffled); err != nil {
			return nil, err
		}
		f.Subsets = append(f.Subsets, r)
	}
	if t, err = runfolder.ReadColumns(path(FileDecodingVsSize)); err != nil {
		return nil, err
	}
	for i := range t.Rows {
		var r DecodeSize
		if err := scan(t, i, []string{"decoder", "size", "repeat", "mean_abs_error", "accuracy"}, &r.Decoder, &r.Size, &r.Repeat, &r.MAE, &r.Accuracy); err != nil {
			return nil, err
		}
		f.DecodeSizes = append(f.DecodeSizes, r)
	}
	if t, err = runfolder.ReadColumns(path(FileConfusion)); err != nil {
		return nil, err
	}
	B := len(f.Info.Axis.Centers)
	index := map[string]int{}
	for d, dec := range f.Info.Decoders {
		index[dec.Name] = d
		f.Confusion = append(f.Confusion, make([]int, B*B))
	}
	for i := range t.Rows {
		var name string
		var a, b, n int
		var sa, sb float64
		if err := scan(t, i, []string{"decoder", "true_condition", "true_stimulus", "decoded_condition", "decoded_stimulus", "trials"}, &name, &a, &sa, &b, &sb, &n); err != nil {
			return nil, err
		}
		d, ok := index[name]
		if !ok || a < 0 || a >= B || b < 0 || b >= B || n < 0 {
			return nil, fmt.Errorf("%s: line %d: decoder %q, conditions %d, %d, trials %d: want a decoder of %s and conditions 0..%d", t.Path, i+2, name, a, b, n, FileAcuity, B-1)
		}
		f.Confusion[d][a*B+b] = n
	}
	return f, nil
}

// scan parses row i's named columns into dst (*int, *float64 or *string);
// errors name the file, line and column.
func scan(t *runfolder.Table, i int, names []string, dst ...any) error {
	ks, err := t.Cols(names...)
	if err != nil {
		return err
	}
	for j, k := range ks {
		switch p := dst[j].(type) {
		case *int:
			v, err := t.Int(i, k)
			if err != nil {
				return err
			}
			*p = v
		case *float64:
			v, err := t.Float(i, k)
			if err != nil {
				return err
			}
			*p = v
		case *string:
			*p = t.Rows[i][k]
		default:
			panic(fmt.Sprintf("runfolder: scan into %T", dst[j]))
		}
	}
	return nil
}

// AcuityEncoder loads the encoder of the run folder dir (acuity.encoder)
// for the model decoder of stria acuity on the prepared recording p: its
// prediction at every bin centre (recording units), its loss, and the
// trials of its split. The run must be finished, and fitted on a recording
// with the same neurons, trials and bins as p (checked trial by trial);
// errors name the folder and what differs.
func AcuityEncoder(dir string, p *train.Prepared) (*train.AcuityEncoder, error) {
	m, err := runfolder.LoadModel(dir)
	if err != nil {
		return nil, fmt.Errorf("acuity.encoder: %w", err)
	}
	if n := m.Net.Neurons; n != p.Neurons() {
		return nil, fmt.Errorf("acuity.encoder %s: the run has %d neurons, the recording %d", dir, n, p.Neurons())
	}
	if b := m.Axis.NumBins(); b != p.NBins {
		return nil, fmt.Errorf("acuity.encoder %s: the run has %d bins, the config %d", dir, b, p.NBins)
	}
	sp, err := runfolder.ReadSplit(dir)
	if err != nil {
		return nil, fmt.Errorf("acuity.encoder: %w", err)
	}
	if len(sp.Cond) != len(p.Cond) {
		return nil, fmt.Errorf("acuity.encoder %s: the run's %s has %d trials, the recording %d", dir, runfolder.FileSplit, len(sp.Cond), len(p.Cond))
	}
	for t, c := range sp.Cond {
		if c != p.Cond[t] {
			return nil, fmt.Errorf("acuity.encoder %s: trial %d (0-based) is in bin %d in the run's %s but in bin %d here: not the same recording or bins", dir, t, c, runfolder.FileSplit, p.Cond[t])
		}
	}
	pred, err := m.Predict(p.Axis.Centers())
	if err != nil {
		return nil, fmt.Errorf("acuity.encoder %s: %w", dir, err)
	}
	enc := &train.AcuityEncoder{Source: dir, Pred: make([]float64, len(pred.Data)), Loss: m.Manifest.Loss,
		Train: append(append([]int(nil), sp.Train...), sp.Val...), Test: sp.Test}
	for i, v := range pred.Data {
		enc.Pred[i] = float64(v)
	}
	slices.Sort(enc.Train)
	return enc, nil
}
