package export

import (
	"fmt"
	"math"
	"path/filepath"
	"strconv"

	"github.com/strialab/stria/eval/figure"
	"github.com/strialab/stria/eval/report"
	"github.com/strialab/stria/train/runfolder"
	"github.com/strialab/stria/train/runfolder/acuityfolder"
	"github.com/strialab/stria/train/runfolder/comparefolder"
)

// AcuityFigures writes the figures of a finished acuity folder, each with
// the CSV arrays it is drawn from, into out (default FOLDER/figures).
// Everything is read before the first file is written.
func AcuityFigures(dir, out string) (*Exported, *acuityfolder.AcuityFolder, error) {
	f, err := acuityfolder.ReadAcuity(dir)
	if err != nil {
		return nil, nil, err
	}
	if out == "" {
		out = filepath.Join(dir, runfolder.DirFigures)
	}
	if err := runfolder.MakeFolder(out); err != nil {
		return nil, nil, err
	}
	ex := &Exported{Folder: dir, Kind: acuityfolder.KindAcuity, Dir: out}
	info := f.Info
	ax := figAxis(info.Axis)
	unit := info.Axis.Unit
	infoUnit := "1/" + orUnits(unit) + "²"
	path := func(name string) string { return filepath.Join(out, name) }

	// Information and threshold against the stimulus.
	P := len(f.Pairs)
	stim, in, inSD, sh, shSD, thr, shThr := make([]float64, P), make([]float64, P), make([]float64, P), make([]float64, P), make([]float64, P), make([]float64, P), make([]float64, P)
	for i, r := range f.Pairs {
		stim[i], in[i], inSD[i], sh[i], shSD[i], thr[i], shThr[i] = r.Stim, r.Info, r.InfoSD, r.Shuffled, r.ShuffledSD, r.Threshold, r.ShuffledThreshold
	}
	size := 0
	if P > 0 {
		size = f.Pairs[0].Size
	}
	if err := writeColumns(path("acuity_information.csv"), []string{"stimulus", "information", "information_sd", "shuffled_information", "shuffled_information_sd", "threshold", "shuffled_threshold"},
		[][]float64{stim, in, inSD, sh, shSD, thr, shThr}); err != nil {
		return nil, nil, err
	}
	im, err := figure.AgainstStimulus([]figure.Band{{Name: "recorded", X: stim, Y: in, SD: inSD}, {Name: "trial-shuffled", X: stim, Y: sh, SD: shSD}},
		ax, "linear Fisher information ("+infoUnit+")")
	if err := ex.add("acuity_information", im, err, fmt.Sprintf("Bias-corrected linear Fisher information between neighbouring conditions, at their midpoint, for random subsets of %d neurons: mean ± sd over %d subsets, for the recorded trials and with noise correlations removed by shuffling trials within a condition.", size, info.Repeats), "acuity_information.csv"); err != nil {
		return nil, nil, err
	}
	im, err = figure.AgainstStimulus([]figure.Band{{Name: "recorded", X: stim, Y: thr}, {Name: "trial-shuffled", X: stim, Y: shThr}},
		ax, "threshold at d' = 1 ("+orUnits(unit)+")")
	if err := ex.add("acuity_threshold", im, err, fmt.Sprintf("Discrimination threshold at d' = 1, 1/sqrt(information), of the mean information of %d-neuron subsets; where no information is detected the threshold is infinite and not drawn.", size), "acuity_information.csv"); err != nil {
		return nil, nil, err
	}

	// Information against population size with the saturation fit.
	S := len(f.Sizes)
	n, si, siSD, ss, ssSD, fit := make([]float64, S), make([]float64, S), make([]float64, S), make([]float64, S), make([]float64, S), make([]float64, S)
	for i, r := range f.Sizes {
		n[i], si[i], siSD[i], ss[i], ssSD[i], fit[i] = float64(r.Size), r.Info, r.InfoSD, r.Shuffled, r.ShuffledSD, r.Fit
	}
	if err := writeColumns(path("acuity_saturation.csv"), []string{"size", "information", "information_sd", "shuffled_information", "shuffled_information_sd"},
		[][]float64{n, si, siSD, ss, ssSD}); err != nil {
		return nil, nil, err
	}
	sat := info.Saturation
	var fx, fy []float64
	if sat.Error == "" && S > 0 {
		a, eps := float64(sat.A), float64(sat.Eps)
		for k := 0; k <= 100; k++ {
			x := n[S-1] * float64(k) / 100
			fx = append(fx, x)
			fy = append(fy, a*x/(1+eps*a*x))
		}
	}
	if err := writeColumns(path("acuity_saturation_fit.csv"), []string{"size", "saturation_fit"}, [][]float64{orEmpty(fx), orEmpty(fy)}); err != nil {
		return nil, nil, err
	}
	asym := float64(sat.Asymptote)
	im, err = figure.Saturation([]figure.Band{{Name: "recorded", X: n, Y: si, SD: siSD}, {Name: "trial-shuffled", X: n, Y: ss, SD: ssSD}}, fx, fy, asym,
		"information, mean over pairs ("+infoUnit+")")
	if err := ex.add("acuity_saturation", im, err, fmt.Sprintf("Linear Fisher information (mean over neighbouring pairs) against the number of neurons: mean ± sd over %d random subsets, and the fit I(N) = a N/(1 + eps a N) to the recorded information. Its asymptote 1/eps is an extrapolation far beyond the largest subset.", info.Repeats),
		"acuity_saturation.csv", "acuity_saturation_fit.csv"); err != nil {
		return nil, nil, err
	}

	// Decoding: confusion matrices and error against N.
	centers := info.Axis.Centers
	var bands []figure.Band
	for d, dec := range info.Decoders {
		share := figure.ConfusionShare(f.Confusion[d], len(centers))
		name := "acuity_confusion_" + comparefolder.FileName(dec.Name)
		rows := make([][]string, 0, len(share))
		B := len(centers)
		for a := 0; a < B; a++ {
			for b := 0; b < B; b++ {
				rows = append(rows, []string{strconv.Itoa(a), g8(centers[a]), strconv.Itoa(b), g8(centers[b]), strconv.Itoa(f.Confusion[d][a*B+b]), g8(share[a*B+b])})
			}
		}
		if err := runfolder.WriteTable(path(name+".csv"), []string{"true_condition", "true_stimulus", "decoded_condition", "decoded_stimulus", "trials", "share"}, rows); err != nil {
			return nil, nil, err
		}
		im, err := figure.Confusion(f.Confusion[d], centers, ax)
		if err := ex.add(name, im, err, fmt.Sprintf("Confusion matrix of the %s decoder on the held-out trials of %d folds: the share of each true condition's trials decoded as each condition, from white (none) to blue (all). Accuracy %.3f.", dec.Name, info.Folds, float64(dec.Accuracy)),
			name+".csv"); err != nil {
			return nil, nil, err
		}
		var xs, mae, sd []float64
		for _, k := range info.DecodeSizes {
			var v []float64
			for _, r := range f.DecodeSizes {
				if r.Decoder == dec.Name && r.Size == k {
					v = append(v, r.MAE)
				}
			}
			m, s := meanSD(v)
			xs, mae, sd = append(xs, float64(k)), append(mae, m), append(sd, s)
		}
		bands = append(bands, figure.Band{Name: dec.Name, X: xs, Y: mae, SD: sd})
	}
	if len(bands) > 0 {
		cols := [][]float64{bands[0].X}
		head := []string{"size"}
		for _, b := range bands {
			cols = append(cols, b.Y, b.SD)
			head = append(head, b.Name+"_mean_abs_error", b.Name+"_mean_abs_error_sd")
		}
		if err := writeColumns(path("acuity_decoding_error.csv"), head, cols); err != nil {
			return nil, nil, err
		}
		im, err := figure.AgainstSize(bands, "mean absolute error ("+orUnits(unit)+")")
		if err := ex.add("acuity_decoding_error", im, err, fmt.Sprintf("Cross-validated decoding error against the number of neurons (log scale): mean absolute error of the decoded stimulus on held-out trials%s, mean ± sd over %d random subsets.", circularText(info.Axis), info.DecodeRepeats),
			"acuity_decoding_error.csv"); err != nil {
			return nil, nil, err
		}
	}
	return ex, f, nil
}

// WriteAcuityReport writes the figures of an acuity folder (AcuityFigures)
// and one self-contained HTML report of it to out (default
// FOLDER/report.html). It returns the report's path.
func WriteAcuityReport(dir, out string) (string, error) {
	if out == "" {
		out = filepath.Join(dir, runfolder.FileReport)
	}
	ex, f, err := AcuityFigures(dir, "")
	if err != nil {
		return "", err
	}
	r, err := acuityReport(ex, f)
	if err != nil {
		return "", err
	}
	return out, writeReport(out, r)
}

// AcuitySections are the report sections of an acuity folder, for its own
// report or inside another one.
func AcuitySections(ex *Exported, f *acuityfolder.AcuityFolder) []report.Section {
	info := f.Info
	unit := orUnits(info.Axis.Unit)
	infoUnit := "1/" + unit + "²"
	caution := func(i int) []string {
		if i < len(info.Cautions) {
			return info.Cautions[i : i+1]
		}
		return nil
	}
	figs := func(names ...string) []report.Figure {
		return reportFigures(ex, func(n string) bool {
			for _, m := range names {
				if n == m || len(m) > 0 && m[len(m)-1] == '*' && len(n) >= len(m)-1 && n[:len(m)-1] == m[:len(m)-1] {
					return true
				}
			}
			return false
		})
	}
	pairs := report.Table{Caption: fmt.Sprintf("Information between neighbouring conditions for random subsets of %d neurons, mean over %d subsets (%s): information in %s, its sd over subsets and its analytic standard error for Gaussian noise (se); threshold at d' = 1 in %s.", firstSize(f), info.Repeats, acuityfolder.FileInfoPairs, infoUnit, unit),
		Header:  []string{"stimulus", "trials A", "trials B", "information", "sd", "se", "threshold", "shuffled", "shuffled threshold"},
		Numeric: []bool{true, true, true, true, true, true, true, true, true}}
	for _, r := range f.Pairs {
		pairs.Rows = append(pairs.Rows, []string{g4(r.Stim), strconv.Itoa(r.TA), strconv.Itoa(r.TB), g4(r.Info), g4(r.InfoSD), g4(r.SE), g4(r.Threshold), g4(r.Shuffled), g4(r.ShuffledThreshold)})
	}
	sizes := report.Table{Caption: "Information (mean over pairs, " + infoUnit + ") against the number of neurons: mean and sd over random subsets, and the saturation fit (" + acuityfolder.FileInfoVsSize + ").",
		Header: []string{"neurons", "information", "sd", "shuffled", "shuffled sd", "fit"}, Numeric: []bool{true, true, true, true, true, true}}
	for _, r := range f.Sizes {
		sizes.Rows = append(sizes.Rows, []string{strconv.Itoa(r.Size), g4(r.Info), g4(r.InfoSD), g4(r.Shuffled), g4(r.ShuffledSD), g4(r.Fit)})
	}
	sat := info.Saturation
	satText := "The saturation model could not be fitted: " + sat.Error
	if sat.Error == "" && math.IsInf(float64(sat.Asymptote), 1) {
		satText = fmt.Sprintf("Saturation fit I(N) = a N/(1 + eps a N): a = %s %s per neuron, eps = 0: no saturation detected within the sizes measured, so the asymptotic information 1/eps is infinite (95%% bootstrap interval over the subsets %s to %s, %d resamples); more neurons per subset, which needs more trials per condition, would be needed to see one.",
			g4(float64(sat.A)), infoUnit, g4(float64(sat.Lo)), g4(float64(sat.Hi)), sat.Boot)
	} else if sat.Error == "" {
		satText = fmt.Sprintf("Saturation fit I(N) = a N/(1 + eps a N): a = %s %s per neuron, eps = %s %s²; asymptotic information 1/eps = %s %s (EXTRAPOLATION; 95%% bootstrap interval over the subsets %s to %s, %d resamples), so a threshold of an infinite population of %s %s; rms residual %s %s.",
			g4(float64(sat.A)), infoUnit, g4(float64(sat.Eps)), unit, g4(float64(sat.Asymptote)), infoUnit, g4(float64(sat.Lo)), g4(float64(sat.Hi)), sat.Boot, g4(1/math.Sqrt(float64(sat.Asymptote))), unit, g4(float64(sat.RMS)), infoUnit)
	}
	dec := report.Table{Caption: "Cross-validated decoding of the held-out trials with all neurons (" + acuityfolder.FileDecodingSummary + "); errors in " + unit + circularText(info.Axis) + ".",
		Header: []string{"decoder", "trials", "accuracy", "mean abs error", "s.e.m.", "rms error", "left out"}, Numeric: []bool{false, true, true, true, true, true, true}}
	var decText []string
	for _, d := range info.Decoders {
		dec.Rows = append(dec.Rows, []string{d.Name, strconv.Itoa(d.Trials), f3(d.Accuracy), g4(float64(d.MAE)), g4(float64(d.SEM)), g4(float64(d.RMSE)),
			fmt.Sprintf("%d fold-neurons, %d floored, %d untrained", d.Excluded, d.Floored, d.Untrained)})
		decText = append(decText, d.Name+": "+d.Description+".")
	}
	return []report.Section{
		{ID: "acuity-information", Heading: "Linear Fisher information across the stimulus",
			Paragraphs: []string{fmt.Sprintf("%d neurons, %d trials; bias-corrected for finite trials (eval/methods.md §10). The correction allows at most %d neurons for the pair with the fewest trials.", info.Neurons, info.Trials, info.MaxSize)},
			Notes:      caution(0), Figures: figs("acuity_information", "acuity_threshold"), Tables: []report.Table{pairs}},
		{ID: "acuity-size", Heading: "Information against the number of neurons",
			Paragraphs: []string{satText}, Notes: caution(1), Figures: figs("acuity_saturation"), Tables: []report.Table{sizes}},
		{ID: "acuity-decoding", Heading: "Cross-validated decoding",
			Paragraphs: append([]string{fmt.Sprintf("Decoders train on each fold's training trials and decode its test trials; the folds are those of stria compare (%d folds, same seed and split settings).", info.Folds)}, decText...),
			Notes:      caution(2), Figures: figs("acuity_confusion_*", "acuity_decoding_error"), Tables: []report.Table{dec}},
	}
}

func acuityReport(ex *Exported, f *acuityfolder.AcuityFolder) (*report.Report, error) {
	dir := ex.Folder
	cfgYAML, err := runfolder.ReadSettings(dir)
	if err != nil {
		return nil, err
	}
	info := f.Info
	r := &report.Report{Title: "stria acuity " + filepath.Base(filepath.Clean(dir)), Subtitle: subtitle(dir), Cautions: info.Cautions}
	r.Sections = AcuitySections(ex, f)
	dataSec := report.Section{ID: "data", Heading: "Data",
		Paragraphs: []string{fmt.Sprintf("Recording: %s (stimulus: %s).", info.Sources["responses"], info.Sources["stimulus"]),
			fmt.Sprintf("Axis: %s in %s, %g to %g%s, %d bins.", info.Axis.Name, info.Axis.Unit, info.Axis.Min, info.Axis.Max, periodicText(info.Axis), info.Axis.Bins),
			fmt.Sprintf("stria %s, seed %d, created %s.", info.Stria, info.Seed, info.Created)}}
	for _, w := range info.Warnings {
		dataSec.Notes = append(dataSec.Notes, "Warning: "+w)
	}
	r.Sections = append(r.Sections, dataSec, report.Section{ID: "config", Heading: "Resolved config", Code: string(cfgYAML)})
	return r, nil
}

func firstSize(f *acuityfolder.AcuityFolder) int {
	if len(f.Pairs) == 0 {
		return 0
	}
	return f.Pairs[0].Size
}

func orUnits(u string) string {
	if u == "" {
		return "axis units"
	}
	return u
}

func orEmpty(v []float64) []float64 {
	if v == nil {
		return []float64{}
	}
	return v
}

func circularText(a runfolder.AxisInfo) string {
	if a.Periodic {
		return " (shortest distance around the circle)"
	}
	return ""
}

// meanSD returns the mean and sd (divisor n-1) of v; NaN where undefined.
func meanSD(v []float64) (float64, float64) {
	if len(v) == 0 {
		return math.NaN(), math.NaN()
	}
	m := 0.0
	for _, x := range v {
		m += x
	}
	m /= float64(len(v))
	if len(v) < 2 {
		return m, math.NaN()
	}
	s := 0.0
	for _, x := range v {
		s += (x - m) * (x - m)
	}
	return m, math.Sqrt(s / float64(len(v)-1))
}
