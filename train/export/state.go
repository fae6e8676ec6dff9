package export

import (
	"fmt"
	"math"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/strialab/stria/eval/figure"
	"github.com/strialab/stria/eval/report"
	"github.com/strialab/stria/train"
	"github.com/strialab/stria/train/runfolder"
)

// StateRange is the fixed x range of the state-term histograms: gains per
// standard deviation of a covariate (a fraction of the stimulus-driven
// response) and offsets per standard deviation relative to the spread of
// the neuron's tuning across conditions. Beyond +-1 a state term would
// change the response by more than the whole tuning per standard
// deviation; such neurons are counted in the legend, not drawn.
var StateRange = figure.Range{Lo: -1, Hi: 1}

// exportState writes the figures of the state terms of a run folder (none
// when it has no state terms): the distributions of gains and relative
// offsets over the fitted neurons, and the chosen neurons' tuning at low
// and high state (the first covariate's lowest and highest third of the
// trials). Arrays are written beside the figures.
func exportState(dir, out string, ex *Exported, sum *runfolder.Summary, values []float64, chosen []int, ax figure.AxisLabels) error {
	s := sum.State
	if s == nil {
		return nil
	}
	if len(s.Covariates) == 0 {
		return exportPopulation(dir, out, ex, s)
	}
	read := func(name string, want int) ([]float64, error) {
		_, v, err := runfolder.ReadStateArray(dir, name)
		if err != nil {
			return nil, err
		}
		if len(v) != want {
			return nil, fmt.Errorf("%s: %d values, want %d", filepath.Join(dir, runfolder.DirParameters, name+".npy"), len(v), want)
		}
		return v, nil
	}
	nb := len(values)
	K := len(s.Covariates)
	_, f, err := runfolder.ReadStateArray(dir, runfolder.ArrayStateTuning)
	if err != nil {
		return err
	}
	if nb == 0 || len(f)%nb != 0 {
		return fmt.Errorf("%s: %d values for %d conditions", runfolder.ArrayStateTuning, len(f), nb)
	}
	n := len(f) / nb
	gain, err := read(runfolder.ArrayStateGains, n*K)
	if err != nil {
		return err
	}
	off, err := read(runfolder.ArrayStateOffsets, n*K)
	if err != nil {
		return err
	}
	bias, err := read(runfolder.ArrayStateBias, n)
	if err != nil {
		return err
	}
	low, err := read(runfolder.ArrayStateLow, nb*n)
	if err != nil {
		return err
	}
	high, err := read(runfolder.ArrayStateHigh, nb*n)
	if err != nil {
		return err
	}
	// The spread of each neuron's tuning across conditions (ddof 0), the
	// unit of the relative offsets.
	spread := make([]float64, n)
	for j := 0; j < n; j++ {
		var m, m2 float64
		for b := 0; b < nb; b++ {
			v := f[b*n+j]
			m += v
			m2 += v * v
		}
		m /= float64(nb)
		spread[j] = math.Sqrt(math.Max(m2/float64(nb)-m*m, 0))
	}
	gSeries, oSeries := map[string][]float64{}, map[string][]float64{}
	var order []string
	hG, hO := []string{"neuron"}, []string{"neuron", "tuning_sd"}
	colsG, colsO := [][]float64{seq(n)}, [][]float64{seq(n), spread}
	for k, c := range s.Covariates {
		g, o := make([]float64, n), make([]float64, n)
		for j := 0; j < n; j++ {
			g[j] = gain[j*K+k]
			o[j] = off[j*K+k] / spread[j]
			if !(spread[j] > 0) {
				o[j] = math.NaN()
			}
		}
		gSeries[c.Name], oSeries[c.Name] = g, o
		order = append(order, c.Name)
		hG = append(hG, "gain_"+c.Name)
		hO = append(hO, "relative_offset_"+c.Name)
		colsG, colsO = append(colsG, g), append(colsO, o)
	}
	if s.Population != nil {
		c, err := populationCoupling(dir, n, len(s.Population.Terms))
		if err != nil {
			return err
		}
		gSeries[populationSeries] = c
		order = append(order, populationSeries)
		hG = append(hG, "coupling_population_gain")
		colsG = append(colsG, c)
	}
	if err := writeColumns(filepath.Join(out, "state_gains.csv"), hG, colsG); err != nil {
		return err
	}
	if err := writeColumns(filepath.Join(out, "state_offsets.csv"), hO, colsO); err != nil {
		return err
	}
	im, err := figure.HistogramsIn(gSeries, order, "gain per standard deviation of the covariate", 0, StateRange)
	pop := ""
	if s.Population != nil {
		pop = " The " + populationSeries + " series is each neuron's coupling to the shared gain read from the other half of the neurons, per standard deviation of that gain."
	}
	if err := ex.add("state_gains", im, err, fmt.Sprintf("Distribution over the %d fitted neurons of the gain per standard deviation of each covariate (0.1: the stimulus-driven response grows by 10%% per standard deviation; %s, columns gain_*). Neurons whose gain and offset could not be told apart (NaN) and values outside %g to %g are counted in the legend.%s",
		s.Fitted, runfolder.FileStateTerms, StateRange.Lo, StateRange.Hi, pop), "state_gains.csv"); err != nil {
		return err
	}
	im, err = figure.HistogramsIn(oSeries, order, "offset per sd, relative to the tuning's spread", 0, StateRange)
	if err := ex.add("state_offsets", im, err, fmt.Sprintf("Distribution over the fitted neurons of the offset per standard deviation of each covariate, divided by the standard deviation of the neuron's tuning across conditions (column tuning_sd), so that neurons in different units compare; the offsets in response units are in %s. Flat tuning (NaN) and values outside %g to %g are counted in the legend.",
		runfolder.FileStateTerms, StateRange.Lo, StateRange.Hi), "state_offsets.csv"); err != nil {
		return err
	}
	// Tuning at low and high state, first covariate.
	c0 := s.Covariates[0]
	if c0.LowZ == nil || c0.HighZ == nil {
		return nil
	}
	lz, hz := float64(*c0.LowZ), float64(*c0.HighZ)
	for _, j := range chosen {
		if j >= n {
			continue
		}
		lm, hm := make([]float64, nb), make([]float64, nb)
		lmod, hmod := make([]float64, nb), make([]float64, nb)
		for b := 0; b < nb; b++ {
			fb := f[b*n+j]
			lm[b], hm[b] = low[b*n+j], high[b*n+j]
			lmod[b] = (1+gain[j*K]*lz)*fb + off[j*K]*lz + bias[j]
			hmod[b] = (1+gain[j*K]*hz)*fb + off[j*K]*hz + bias[j]
		}
		name := fmt.Sprintf("state_tuning_n%d", j)
		if err := writeColumns(filepath.Join(out, name+".csv"), []string{"value", "low_mean", "high_mean", "low_model", "high_model"},
			[][]float64{values, lm, hm, lmod, hmod}); err != nil {
			return err
		}
		lowName := fmt.Sprintf("low %s (z %.2f)", c0.Name, lz)
		highName := fmt.Sprintf("high %s (z %.2f)", c0.Name, hz)
		im, err := figure.StateTuning(values, []figure.Level{{Name: lowName, Mean: lm, Model: lmod}, {Name: highName, Mean: hm, Model: hmod}}, ax, "response (recording units)")
		if err := ex.add(name, im, err, fmt.Sprintf("Neuron %d (0-based) at low and high %s: points are the condition means of all trials in the lowest and highest third of %s (mean z-scores %.2f and %.2f; ties go to the lower third), lines the state model at those values (gain %+.3f and offset %+.3g per standard deviation). The model was fitted on most of these trials: this shows fit, not held-out performance.",
			j, c0.Name, c0.Name, lz, hz, gain[j*K], off[j*K]), name+".csv"); err != nil {
			return err
		}
	}
	return nil
}

// populationSeries names the population gain's couplings in the gain
// histogram.
const populationSeries = "population gain"

// populationCoupling reads each neuron's coupling to the other half's
// shared gain (the first of its P terms).
func populationCoupling(dir string, n, P int) ([]float64, error) {
	_, v, err := runfolder.ReadStateArray(dir, runfolder.ArrayPopulationCoupled)
	if err != nil {
		return nil, err
	}
	if len(v) != n*P {
		return nil, fmt.Errorf("%s: %d values, want %d", filepath.Join(dir, runfolder.DirParameters, runfolder.ArrayPopulationCoupled+".npy"), len(v), n*P)
	}
	c := make([]float64, n)
	for j := range c {
		c[j] = v[j*P]
	}
	return c, nil
}

// exportPopulation writes the gain histogram of a run with the population
// gain and no covariates: each neuron's coupling to the shared gain.
func exportPopulation(dir, out string, ex *Exported, s *runfolder.StateSummary) error {
	if s.Population == nil {
		return nil
	}
	m, err := runfolder.ReadManifest(dir)
	if err != nil {
		return err
	}
	c, err := populationCoupling(dir, m.Neurons, len(s.Population.Terms))
	if err != nil {
		return err
	}
	if err := writeColumns(filepath.Join(out, "state_gains.csv"), []string{"neuron", "coupling_population_gain"}, [][]float64{seq(m.Neurons), c}); err != nil {
		return err
	}
	im, err := figure.HistogramsIn(map[string][]float64{populationSeries: c}, []string{populationSeries}, "gain per standard deviation of the shared gain", 0, StateRange)
	return ex.add("state_gains", im, err, fmt.Sprintf("Distribution over the neurons of their coupling to the shared gain read from the other half of the neurons, per standard deviation of that gain (%s, column coupling_population_gain). Values outside %g to %g are counted in the legend.",
		runfolder.FileStateTerms, StateRange.Lo, StateRange.Hi), "state_gains.csv")
}

// stateSection is the report's section on the state terms (nil without
// them): how much held-out variance they add, and why that can pass the
// stimulus-only noise ceiling.
func stateSection(ex *Exported, sum *runfolder.Summary) *report.Section {
	s := sum.State
	if s == nil {
		return nil
	}
	t := report.Table{Caption: "Held-out R^2 on the test trials without and with the state terms, median [quartiles] over the scored neurons (per neuron in " + runfolder.FileStateTerms + ").",
		Header: []string{"state terms", "R^2 stimulus only", "R^2 with state", "added (median)", "added (mean)", "neurons gaining"}, Numeric: []bool{false, true, true, true, true, true}}
	row := func(what string, sc runfolder.StateScores) {
		t.Rows = append(t.Rows, []string{what, spreadText(sc.Stimulus), spreadText(sc.WithState), spreadText(sc.Added), f3(sc.MeanAdded),
			strconv.FormatFloat(100*float64(sc.Gaining), 'f', 0, 64) + "%"})
	}
	if s.Scores != nil {
		var names []string
		for _, c := range s.Covariates {
			names = append(names, c.Name)
		}
		row("covariates: "+strings.Join(names, ", "), *s.Scores)
	}
	if s.Population != nil {
		row("population "+strings.Join(s.Population.Terms, " and ")+" (from the other half)", s.Population.Scores)
	}
	sec := &report.Section{ID: "state", Heading: "State terms: gain and offset",
		Paragraphs: []string{fmt.Sprintf("Each neuron's response is modelled as (1 + gain . z) tuning + offset . z + bias, z the standardised covariates of the trial (tuning %s). %s", s.Tuning, s.Caution)},
		Notes:      s.Notes, Tables: []report.Table{t},
		Figures: reportFigures(ex, func(n string) bool { return strings.HasPrefix(n, "state_") })}
	return sec
}

func spreadText(s runfolder.Spread) string {
	return fmt.Sprintf("%s [%s, %s]", f3(s.Median), f3(s.Q1), f3(s.Q3))
}

// stateVariants splits the state variants of stria compare off a model
// list: a model named BASE+state or BASE+popgain (train.VariantState,
// train.VariantPopGain) whose BASE is also in the list. plain keeps the
// order of the others; each variant is {BASE, name}. The variants are
// drawn only against their own model, not in every pair of encoder and
// baseline.
func stateVariants(models []string) (plain []string, variants [][2]string) {
	have := setOf(models)
	for _, m := range models {
		base, ok := "", false
		for _, kind := range []string{train.VariantState, train.VariantPopGain} {
			if b, found := strings.CutSuffix(m, "+"+kind); found && have[b] {
				base, ok = b, true
			}
		}
		if ok {
			variants = append(variants, [2]string{base, m})
		} else {
			plain = append(plain, m)
		}
	}
	return plain, variants
}
