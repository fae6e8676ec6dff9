package runfolder

import (
	"encoding/csv"
	"fmt"
	"os"
	"path/filepath"
	"strconv"

	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/eval/state"
	"github.com/strialab/stria/train"
)

// Files of the state terms (stria fit with covariates or
// state.population_gain). The arrays are in parameters/ and listed in
// StateSummary.Arrays.
const (
	FileStateTerms = "state_terms.csv" // one row per neuron: state terms and held-out scores

	ArrayStateGains        = "state_gains"         // N x K, gain per standard deviation of each covariate
	ArrayStateOffsets      = "state_offsets"       // N x K, offset per standard deviation (response units)
	ArrayStateBias         = "state_bias"          // N
	ArrayStateTuning       = "state_tuning"        // B x N, the tuning the state terms ride on (recording units)
	ArrayStateLow          = "state_low_means"     // B x N, condition means of the trials in the first covariate's lowest third
	ArrayStateHigh         = "state_high_means"    // B x N, the same for its highest third
	ArrayPopulationCoupled = "population_coupling" // N x P, each neuron's gain (and offset) on the other half's shared terms, per standard deviation
	ArrayPopulationTerms   = "population_terms"    // T x 2P, per trial: the shared terms read from half A, then from half B
)

// StateCaution explains why a state model's R^2 may pass the stimulus-only
// noise ceiling; it is printed and saved wherever the state scores are.
const StateCaution = "R^2 with state terms can exceed the stimulus-only noise ceiling, and their FEV can exceed 1: the ceiling counts all trial-to-trial variance within a condition as noise, and the state terms predict part of it from the covariates (or the other neurons). Compare the state model's R^2 with the stimulus-only R^2 of the same neuron; fev, cc_norm and spe describe the stimulus model only."

// StateCovariate describes one covariate in summary.json: its
// standardisation on the fitting trials, its link to the stimulus (eta^2 of
// the condition and the share expected by chance) and the median of its
// terms over the fitted neurons.
type StateCovariate struct {
	Name           string `json:"name"`
	Mean           Num    `json:"mean"`
	SD             Num    `json:"sd"`
	ConditionShare Num    `json:"condition_share"`
	ChanceShare    Num    `json:"chance_share"`
	TiedToStimulus bool   `json:"tied_to_stimulus"`
	MedianGain     Num    `json:"median_gain_per_sd"`
	MedianOffset   Num    `json:"median_offset_per_sd"`
	// LowZ and HighZ are the mean standardised values of the lowest and
	// highest third of the trials (first covariate only; figures).
	LowZ  *Num `json:"low_third_z,omitempty"`
	HighZ *Num `json:"high_third_z,omitempty"`
}

// StateScores summarises held-out scores with and without state terms
// over the scored neurons: the stimulus-only R^2, the R^2 with state
// terms, what they add (per neuron, R2State - R2Stim), its mean and the
// share of neurons with a positive gain.
type StateScores struct {
	Stimulus  Spread `json:"test_r2_stimulus"`
	WithState Spread `json:"test_r2_state"`
	Added     Spread `json:"r2_added"`
	MeanAdded Num    `json:"mean_r2_added"`
	Gaining   Num    `json:"share_of_neurons_gaining"`
}

// StateSummary is the "state" block of summary.json.
type StateSummary struct {
	Tuning     string           `json:"tuning"`
	Rounds     int              `json:"refit_rounds"`
	Ridge      float64          `json:"ridge"`
	Covariates []StateCovariate `json:"covariates,omitempty"`
	Fitted     int              `json:"neurons_fitted"`
	Confounded int              `json:"neurons_confounded"`
	Scores     *StateScores     `json:"covariate_scores,omitempty"`
	// Population is the shared gain from the other half of the neurons.
	Population *PopulationSummary `json:"population,omitempty"`
	Objective  []Num              `json:"training_objective"`
	Seconds    float64            `json:"seconds"`
	Caution    string             `json:"caution"`
	Notes      []string           `json:"notes,omitempty"`
}

// PopulationSummary describes the shared population gain in summary.json.
type PopulationSummary struct {
	Terms     []string    `json:"terms"`
	Weighting string      `json:"weighting"`
	LeftOut   int         `json:"neurons_left_out"`
	Scores    StateScores `json:"scores"`
}

func stateScores(h []state.HeldOut, excluded map[int]string) StateScores {
	keep := make([]bool, len(h))
	r0, r1, d := make([]float64, len(h)), make([]float64, len(h)), make([]float64, len(h))
	for j, v := range h {
		keep[j] = excluded[j] == ""
		r0[j], r1[j], d[j] = v.R2Stim, v.R2State, v.Delta
	}
	var kept []state.HeldOut
	for j, v := range h {
		if keep[j] {
			kept = append(kept, v)
		}
	}
	g := state.SummarizeGain(kept)
	return StateScores{
		Stimulus:  SpreadOver(r0, keep, KeptScored),
		WithState: SpreadOver(r1, keep, KeptScored),
		Added:     SpreadOver(d, keep, KeptScored),
		MeanAdded: Num(g.MeanDelta), Gaining: Num(g.FracPositive),
	}
}

// WriteState writes the state terms of a fit into the run folder
// (state_terms.csv and the arrays of parameters/, each atomically) and
// returns the summary block for summary.json. Call it before Finish.
func WriteState(dir string, p *train.Prepared, sf *train.StateFit) (*StateSummary, error) {
	if err := mkdir(filepath.Join(dir, DirParameters)); err != nil {
		return nil, err
	}
	cfg := p.Cfg.State
	ex := train.ExcludedNeurons(p)
	N, B := p.Neurons(), p.NBins
	s := &StateSummary{Tuning: cfg.Tuning.String(), Rounds: sf.Rounds, Ridge: cfg.Ridge, Seconds: sf.Seconds,
		Caution: StateCaution, Notes: sf.Notes}
	for _, v := range sf.Objective {
		s.Objective = append(s.Objective, Num(v))
	}
	mf, err := ReadManifest(dir)
	if err != nil {
		return nil, err
	}
	save := func(name string, shape []int, v []float64) error {
		return writeArray(dir, mf, name, shape, v)
	}
	header := []string{"neuron", "name"}
	var cols []func(j int) string
	num := func(v float64) string { return FormatScore(v) }
	if sf.Params != nil {
		K := sf.Params.K
		names := sf.Covariates.Names
		fitT := append(append([]int(nil), p.Train...), p.Val...)
		share := make([]float64, K)
		state.ConditionShare(share, sf.Covariates, p.Cond, B, fitT)
		linked := map[string]state.Link{}
		for _, l := range sf.Linked {
			linked[l.Name] = l
		}
		nonEmpty := map[int]bool{}
		for _, t := range fitT {
			nonEmpty[p.Cond[t]] = true
		}
		null := state.NullShare(len(nonEmpty), len(fitT))
		fitted := 0
		for _, st := range sf.Params.Status {
			if st == state.Fitted {
				fitted++
			}
		}
		s.Fitted, s.Confounded = fitted, N-fitted
		for k, nm := range names {
			g, o := make([]float64, N), make([]float64, N)
			for j := 0; j < N; j++ {
				g[j], o[j] = sf.Params.Gain[j*K+k], sf.Params.Offset[j*K+k]
			}
			_, tied := linked[nm]
			c := StateCovariate{Name: nm, Mean: Num(sf.Std.Mean[k]), SD: Num(sf.Std.Scale[k]),
				ConditionShare: Num(share[k]), ChanceShare: Num(null), TiedToStimulus: tied,
				MedianGain: Num(SpreadOver(g, nil, "").Median), MedianOffset: Num(SpreadOver(o, nil, "").Median)}
			s.Covariates = append(s.Covariates, c)
		}
		if err := save(ArrayStateGains, []int{N, K}, sf.Params.Gain); err != nil {
			return nil, err
		}
		if err := save(ArrayStateOffsets, []int{N, K}, sf.Params.Offset); err != nil {
			return nil, err
		}
		if err := save(ArrayStateBias, []int{N}, sf.Params.Bias); err != nil {
			return nil, err
		}
		if err := save(ArrayStateTuning, []int{B, N}, sf.Tuning); err != nil {
			return nil, err
		}
		lv := sf.Levels(p, 0)
		lz, hz := Num(lv.LowZ), Num(lv.HighZ)
		s.Covariates[0].LowZ, s.Covariates[0].HighZ = &lz, &hz
		if err := save(ArrayStateLow, []int{B, N}, lv.LowMeans); err != nil {
			return nil, err
		}
		if err := save(ArrayStateHigh, []int{B, N}, lv.HighMeans); err != nil {
			return nil, err
		}
		sc := stateScores(sf.Scores, ex)
		s.Scores = &sc
		header = append(header, "status")
		cols = append(cols, func(j int) string { return sf.Params.Status[j].String() })
		for k, nm := range names {
			k := k
			header = append(header, "gain_"+nm, "offset_"+nm)
			cols = append(cols, func(j int) string { return num(sf.Params.Gain[j*K+k]) },
				func(j int) string { return num(sf.Params.Offset[j*K+k]) })
		}
		header = append(header, "bias")
		cols = append(cols, func(j int) string { return num(sf.Params.Bias[j]) })
		for k, nm := range names {
			k := k
			header = append(header, "gain_"+nm+"_per_unit", "offset_"+nm+"_per_unit")
			cols = append(cols, func(j int) string { return num(sf.Raw.Gain[j*K+k]) },
				func(j int) string { return num(sf.Raw.Offset[j*K+k]) })
		}
		header = append(header, "test_r2_stimulus", "test_r2_state", "r2_added")
		cols = append(cols, func(j int) string { return num(sf.Scores[j].R2Stim) },
			func(j int) string { return num(sf.Scores[j].R2State) },
			func(j int) string { return num(sf.Scores[j].Delta) })
	}
	if cr := sf.Pop; cr != nil {
		P := cr.P
		terms := []string{"population_gain", "population_offset"}[:P]
		s.Population = &PopulationSummary{Terms: terms, Weighting: sf.PopWeighting, LeftOut: len(cr.LeftOut),
			Scores: stateScores(cr.Scores, ex)}
		if err := save(ArrayPopulationCoupled, []int{N, P}, cr.Params.Gain); err != nil {
			return nil, err
		}
		T := len(cr.FromA) / P
		both := make([]float64, T*2*P)
		for t := 0; t < T; t++ {
			copy(both[t*2*P:t*2*P+P], cr.FromA[t*P:t*P+P])
			copy(both[t*2*P+P:(t+1)*2*P], cr.FromB[t*P:t*P+P])
		}
		if err := save(ArrayPopulationTerms, []int{T, 2 * P}, both); err != nil {
			return nil, err
		}
		header = append(header, "population_half")
		cols = append(cols, func(j int) string {
			if cr.Half[j] {
				return "A"
			}
			return "B"
		})
		for i, nm := range terms {
			i := i
			header = append(header, "coupling_"+nm)
			cols = append(cols, func(j int) string { return num(cr.Params.Gain[j*P+i]) })
		}
		header = append(header, "test_r2_population", "r2_added_population")
		cols = append(cols, func(j int) string { return num(cr.Scores[j].R2State) },
			func(j int) string { return num(cr.Scores[j].Delta) })
		if sf.Params == nil {
			header = append(header, "test_r2_stimulus")
			cols = append(cols, func(j int) string { return num(cr.Scores[j].R2Stim) })
		}
	}
	names := p.Rec.Neurons
	err = WriteCSV(filepath.Join(dir, FileStateTerms), header, func(cw *csv.Writer) error {
		row := make([]string, len(header))
		for j := 0; j < N; j++ {
			row[0] = strconv.Itoa(j)
			row[1] = ""
			if j < len(names) {
				row[1] = names[j]
			}
			for i, c := range cols {
				row[2+i] = c(j)
			}
			if err := cw.Write(row); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	// model.json lists the state arrays with the others.
	if err := WriteJSON(filepath.Join(dir, FileManifest), mf); err != nil {
		return nil, err
	}
	return s, nil
}

// writeArray writes parameters/name.npy and lists it in m.
func writeArray(dir string, m *Manifest, name string, shape []int, v []float64) error {
	n := 1
	for _, d := range shape {
		n *= d
	}
	if n != len(v) {
		panic(fmt.Sprintf("runfolder: %s: %d values for shape %v", name, len(v), shape))
	}
	return saveArray(dir, m, name, shape, v)
}

// readStateTerms returns the bytes of state_terms.csv, nil when the run
// has no state terms.
func readStateTerms(dir string) ([]byte, error) {
	b, err := os.ReadFile(filepath.Join(dir, FileStateTerms))
	if errNotExist(err) {
		return nil, nil
	}
	return b, err
}

// ReadStateTerms reads state_terms.csv of a run folder with state terms:
// its header and rows (every row as long as the header).
func ReadStateTerms(dir string) (header []string, rows [][]string, err error) {
	return ReadTable(filepath.Join(dir, FileStateTerms))
}

// ReadStateArray reads parameters/name.npy of a run folder with state
// terms (one of the Array* names above) and its shape.
func ReadStateArray(dir, name string) (shape []int, v []float64, err error) {
	return format.ReadArray(filepath.Join(dir, DirParameters, name+".npy"))
}
