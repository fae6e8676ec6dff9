package train

import (
	"context"
	"encoding/binary"
	"fmt"
	"hash"
	"hash/fnv"
	"math"
	"slices"
	"strconv"
	"time"

	"github.com/strialab/stria/data/condstats"
	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/eval/state"
	"github.com/strialab/stria/train/settings"
)

// StateFit is the state part of a fit (eval/state, eval/methods.md §17): the
// per-trial gain and offset of every neuron on its stimulus tuning, from
// the recording's covariates and/or from the other half of the population,
// with the held-out variance they add over the stimulus-only model.
type StateFit struct {
	// Covariates are the state covariates (nil without a covariate file).
	Covariates *state.Covariates
	// Std standardises them on the fitting trials (Train and Val).
	Std *state.Standardizer
	// Params are the standardised state terms (N x K), Raw the same in the
	// covariates' units.
	Params *state.Params
	Raw    *state.RawParams
	// Stim is the stimulus-only tuning (B x N, recording units) the
	// stimulus-only scores use; Tuning the tuning the state terms ride on
	// (Stim with state.tuning fixed, the refitted encoder's with refit).
	Stim, Tuning []float64
	// Scores are the held-out scores on the test trials, stimulus-only and
	// with the covariates' state terms, per neuron (nil without
	// covariates); Summary summarises them.
	Scores  []state.HeldOut
	Summary state.GainSummary
	// Pred is the state model's prediction of the test trials
	// (len(p.Test) x N, row i for p.Test[i]); nil without covariates.
	Pred []float64
	// Linked lists the covariates tied to the stimulus (eta^2 above
	// state.stimulus_share_warning on the fitting trials).
	Linked []state.Link
	// Objective is the total training objective of the state model after
	// the fixed-tuning fit and after each refit round (state.Objective
	// summed over fitted neurons); Rounds the refit rounds accepted.
	Objective []float64
	Rounds    int
	// Pop is the shared population gain (nil unless
	// state.population_gain), PopSummary its held-out scores' summary and
	// PopWeighting the weights of its neurons (rate or noise).
	Pop          *state.CrossResult
	PopSummary   state.GainSummary
	PopWeighting string
	// PopError says why the population gain could not be estimated (Pop
	// is then nil; the reason is also in Notes).
	PopError error
	// Notes say what was done or refused, for the printout and
	// summary.json.
	Notes   []string
	Seconds float64
}

// StateCovariates checks the recording's covariates (state.NewCovariates:
// NaN, infinite, constant or wrongly long columns are named, with the
// trial) and returns them; nil when the recording has none. Errors name the
// covariate file.
func StateCovariates(p *Prepared) (*state.Covariates, error) {
	rec := p.Rec
	if len(rec.Covariates) == 0 {
		return nil, nil
	}
	cov, err := state.NewCovariates(rec.CovariateNames, rec.Covariates, rec.Y.Rows)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", covariateFile(p), err)
	}
	return cov, nil
}

// CheckState checks, before any fitting, what the state terms of p will
// need: the covariates (StateCovariates) and their spread over the fitting
// trials (a covariate constant there cannot be standardised). Nil when the
// config asks for no state terms.
func CheckState(p *Prepared) error {
	if !p.Cfg.StateActive() {
		return nil
	}
	cov, err := StateCovariates(p)
	if err != nil || cov == nil {
		return err
	}
	if _, err := state.NewStandardizer(cov, p.fitTrials()); err != nil {
		return fmt.Errorf("%s: %w", covariateFile(p), err)
	}
	return nil
}

func covariateFile(p *Prepared) string {
	src := p.Rec.Source
	switch {
	case src.Covariates != "":
		return src.Covariates
	case src.Stimulus != "":
		return src.Stimulus
	}
	return src.Responses
}

// fitTrials are the trials the state terms are fitted on: the encoder's
// training and validation trials (never the test trials), in order.
func (p *Prepared) fitTrials() []int {
	out := append(slices.Clone(p.Train), p.Val...)
	slices.Sort(out)
	return out
}

// stimulusCurves returns a fitted encoder's prediction for every
// condition (B x N) in the recording's units.
func stimulusCurves(p *Prepared, f *Fitted) []float64 {
	var pc []float64
	if f.Curves != nil {
		pc = slices.Clone(f.Curves)
	} else {
		pc = PredictConditions(f.Net, p.NBins)
	}
	p.Norm.InvertRows(pc)
	return pc
}

// FitState fits the state terms of a prepared recording around a fitted
// stimulus encoder f and scores them on p.Test (see StateFitCurves).
func FitState(ctx context.Context, p *Prepared, f *Fitted) (*StateFit, error) {
	return StateFitCurves(ctx, p, stimulusCurves(p, f), true)
}

// StateFitCurves fits the state terms around the stimulus tuning stim
// (B x N, recording units, fitted on p.Train and p.Val without state):
//
//  1. covariates (data.covariates): standardised on the fitting trials
//     (Train and Val), the per-neuron gains and offsets by
//     state.FitAffine with the tuning held at stim; with state.tuning
//     refit and encoder true, then state.rounds times: the encoder is
//     refitted on the weighted condition targets of state.ConditionTargets
//     (training and validation targets, row weights N_b: see refitEncoder)
//     and the state terms refitted on its tuning; a round is kept only if
//     it lowers the training objective. With encoder false (a per-condition
//     tuning such as condmean) tuning and state terms are fitted jointly
//     by state.FitFree, started at stim.
//  2. population gain (state.population_gain): state.CrossGain with the
//     tuning stim, halves by state.SplitHalves on the neuron names (or a
//     hash of each neuron's responses when the recording has none, see
//     neuronIDs) and the seed, so the halves do not depend on the column
//     order. When it cannot be estimated (a trial where no neuron of a
//     half has a positive tuning value, ...) the fit goes on without it:
//     Pop is nil and PopError and Notes say why.
//
// Scores are on p.Test: the stimulus-only R^2 of stim and the R^2 with the
// state terms (state.ScoreHeldOut). Errors name the covariate file, the
// covariate and the trial.
func StateFitCurves(ctx context.Context, p *Prepared, stim []float64, encoder bool) (sf *StateFit, err error) {
	if gerr := format.Guard(func() { sf, err = stateFitCurves(ctx, p, stim, encoder) }); gerr != nil {
		return nil, gerr
	}
	return sf, err
}

func stateFitCurves(ctx context.Context, p *Prepared, stim []float64, encoder bool) (*StateFit, error) {
	start := time.Now()
	cfg := p.Cfg.State
	sf := &StateFit{Stim: stim, Tuning: stim}
	cov, err := StateCovariates(p)
	if err != nil {
		return nil, err
	}
	y, n, B := p.Rec.Y.Data, p.Neurons(), p.NBins
	fitT := p.fitTrials()
	if cov != nil {
		sf.Covariates = cov
		sf.Linked = state.StimulusLinked(cov, p.Cond, B, fitT, cfg.StimulusShareWarning)
		for _, l := range sf.Linked {
			sf.Notes = append(sf.Notes, fmt.Sprintf("covariate %q is tied to the stimulus: the condition explains %.0f%% of its variance on the fitting trials (%.0f%% expected by chance); its state terms can take over stimulus-driven variance, so read its gains and offsets with care",
				l.Name, 100*l.Share, 100*l.Null))
		}
		std, err := state.NewStandardizer(cov, fitT)
		if err != nil {
			return nil, fmt.Errorf("%s: %w", covariateFile(p), err)
		}
		sf.Std = std
		z := make([]float64, cov.T*cov.K)
		std.Apply(z, cov)
		st, err := state.NewStats(y, n, z, cov.K, p.Cond, B, fitT)
		if err != nil {
			return nil, err
		}
		switch {
		case !encoder:
			ff := state.FitFree(st, stim, state.FreeOptions{Ridge: cfg.Ridge})
			sf.Tuning, sf.Params = ff.F, ff.Params
			sf.Objective = []float64{ff.History[0], ff.History[len(ff.History)-1]}
			sf.Rounds = ff.Rounds
			if !ff.Converged() {
				sf.Notes = append(sf.Notes, fmt.Sprintf("the joint fit of tuning and state terms stopped after %d rounds before every neuron met the tolerance", ff.Rounds))
			}
		default:
			sf.Params = state.FitAffine(st, stim, cfg.Ridge)
			sf.Objective = []float64{totalObjective(st, stim, sf.Params)}
			if p.Cfg.State.Tuning == settings.StateRefit {
				if err := refitRounds(ctx, p, sf, z, cov.K, st); err != nil {
					return nil, err
				}
			}
		}
		sf.Raw = std.Raw(sf.Params)
		if bad := sf.Params.Failed(); len(bad) > 0 {
			sf.Notes = append(sf.Notes, fmt.Sprintf("%d neurons' gain and offset could not be told apart (flat tuning; their state terms are NaN; raise state.ridge to keep them), first %s",
				len(bad), p.Rec.NeuronName(bad[0])))
		}
		pred := make([]float64, len(p.Test)*n)
		state.Predict(pred, sf.Params, sf.Tuning, z, p.Cond, p.Test)
		sf.Pred = pred
		sf.Scores = make([]state.HeldOut, n)
		state.ScoreHeldOut(sf.Scores, y, n, p.Cond, p.Test, stim, pred)
		sf.Summary = state.SummarizeGain(sf.Scores)
	}
	if cfg.PopulationGain {
		half, err := state.SplitHalves(neuronIDs(p), p.Cfg.Seed)
		if err != nil {
			return nil, fmt.Errorf("population gain: %w", err)
		}
		opt := state.CrossOptions{Additive: cfg.PopulationOffset, Ridge: cfg.Ridge, Weighting: state.WeightRate}
		if !nonNegative(y) {
			opt.Weighting = state.WeightNoise
		}
		sf.PopWeighting = opt.Weighting.String()
		cr, err := state.CrossGain(y, n, stim, p.Cond, B, fitT, p.Test, half, opt)
		if err != nil {
			// The covariates' terms (and the encoder) stand without it:
			// say why it is missing rather than throw the fit away.
			sf.PopError = fmt.Errorf("population gain: %w", err)
			sf.Notes = append(sf.Notes, sf.PopError.Error()+"; no population gain was fitted")
			sf.Seconds = time.Since(start).Seconds()
			return sf, nil
		}
		sf.Pop = cr
		sf.PopSummary = state.SummarizeGain(cr.Scores)
		if len(cr.LeftOut) > 0 {
			sf.Notes = append(sf.Notes, fmt.Sprintf("population gain: %d neurons have weight 0 in every condition and do not inform the shared gain (they are still scored)", len(cr.LeftOut)))
		}
	}
	sf.Seconds = time.Since(start).Seconds()
	return sf, nil
}

// neuronIDs names the neurons for state.SplitHalves so that the halves do
// not depend on the column order: the recording's neuron names, or, when
// it has none, a hash of each neuron's responses (64-bit FNV-1a of the
// float32 bits over all trials; identical columns get "#2", "#3", ... in
// column order, which cannot change any result since they are the same
// neuron twice).
func neuronIDs(p *Prepared) []string {
	n := p.Neurons()
	ids := make([]string, n)
	if len(p.Rec.Neurons) == n {
		copy(ids, p.Rec.Neurons)
	}
	var hs []hash.Hash64
	for j := range ids {
		if ids[j] == "" {
			if hs == nil {
				hs = make([]hash.Hash64, n)
			}
			hs[j] = fnv.New64a()
		}
	}
	if hs != nil {
		var buf [4]byte
		y := p.Rec.Y.Data
		for t := 0; t < p.Rec.Y.Rows; t++ {
			for j, h := range hs {
				if h != nil {
					binary.LittleEndian.PutUint32(buf[:], math.Float32bits(y[t*n+j]))
					h.Write(buf[:])
				}
			}
		}
		seen := map[string]int{}
		for j, h := range hs {
			if h == nil {
				continue
			}
			id := "responses:" + strconv.FormatUint(h.Sum64(), 16)
			seen[id]++
			if k := seen[id]; k > 1 {
				id += "#" + strconv.Itoa(k)
			}
			ids[j] = id
		}
	}
	return ids
}

func nonNegative(y []float32) bool {
	for _, v := range y {
		if v < 0 {
			return false
		}
	}
	return true
}

// totalObjective is the sum of state.Objective over the fitted neurons.
func totalObjective(st *state.Stats, f []float64, pr *state.Params) float64 {
	J := make([]float64, st.N)
	state.Objective(J, st, f, pr)
	var s float64
	for _, v := range J {
		if !math.IsNaN(v) {
			s += v
		}
	}
	return s
}

// refitRounds runs state.rounds rounds of: condition targets from the
// current state terms, the encoder refitted on them (refitEncoder), the
// state terms refitted on its tuning. A round that does not lower the
// training objective (st: the fitting trials) is dropped and the rounds
// stop.
func refitRounds(ctx context.Context, p *Prepared, sf *StateFit, z []float64, K int, st *state.Stats) error {
	y, n, B := p.Rec.Y.Data, p.Neurons(), p.NBins
	stTr, err := state.NewStats(y, n, z, K, p.Cond, B, p.Train)
	if err != nil {
		return err
	}
	stVal, err := state.NewStats(y, n, z, K, p.Cond, B, p.Val)
	if err != nil {
		return err
	}
	for r := 0; r < p.Cfg.State.Rounds; r++ {
		f, err := refitEncoder(ctx, p, sf.Params, stTr, stVal)
		if err != nil {
			return fmt.Errorf("state: refit round %d: %w", r+1, err)
		}
		pr := state.FitAffine(st, f, p.Cfg.State.Ridge)
		J := totalObjective(st, f, pr)
		if !(J < sf.Objective[len(sf.Objective)-1]) || len(pr.Failed()) > len(sf.Params.Failed()) {
			sf.Notes = append(sf.Notes, fmt.Sprintf("state refit round %d did not lower the training objective; the previous tuning is kept", r+1))
			break
		}
		sf.Objective = append(sf.Objective, J)
		sf.Tuning, sf.Params, sf.Rounds = f, pr, r+1
	}
	return nil
}

// refitEncoder fits the encoder of p again, on the condition targets of
// the state model (state.ConditionTargets with the state terms pr): for
// fixed state terms, the best stimulus tuning minimises
// sum_b W_bn (T_bn - f_bn)^2 [derived, eval/methods.md §17]. The encoder's
// solvers weight the rows of a condition by its trial count N_b, the same
// for every neuron, so the refit uses weights N_b in place of W_bn. With
// standardised covariates W_bn / N_b = 1 + 2 a.zbar_b + a^T (zz)bar_b a,
// which is the same for every condition up to the chance differences of
// the covariates' condition means [derived]; the round is kept only if the
// exact training objective falls (refitRounds). It returns the refitted
// tuning, B x N in the recording's units.
func refitEncoder(ctx context.Context, p *Prepared, pr *state.Params, stTr, stVal *state.Stats) ([]float64, error) {
	q := *p
	q.trainSt = targetStats(p, stTr, pr)
	q.valSt = targetStats(p, stVal, pr)
	f, err := Fit(ctx, &q, Hooks{}, nil)
	if err != nil {
		return nil, err
	}
	return stimulusCurves(&q, f), nil
}

// targetStats builds condition statistics whose condition means are the
// targets T_bn (recording units) and whose within-condition sums of squares
// are the trials' own, so that the encoder's solvers fit the targets with
// row weights N_b. A neuron whose state terms were not fitted keeps its
// condition means.
func targetStats(p *Prepared, st *state.Stats, pr *state.Params) *condstats.Stats {
	B, N := st.B, st.N
	T := make([]float64, B*N)
	W := make([]float64, B*N)
	state.ConditionTargets(T, W, st, pr)
	out := &condstats.Stats{B: B, N: N, Count: make([]int, B), Sum: make([]float64, B*N), SumSq: make([]float64, B*N)}
	for b := 0; b < B; b++ {
		c := st.Count[b]
		out.Count[b] = int(c)
		if c == 0 {
			continue
		}
		for j := 0; j < N; j++ {
			t := T[b*N+j]
			if math.IsNaN(t) || W[b*N+j] <= 0 {
				t = st.Mean[b*N+j]
			}
			out.Sum[b*N+j] = c * t
			out.SumSq[b*N+j] = c*t*t + st.SSW[b*N+j]
		}
	}
	return out
}

// StateLevels are the observed responses at low and high state of one
// covariate, for figures: the trials in its lowest and highest third (by
// the covariate's value over all trials), their mean standardised value
// and their per-condition mean responses (B x N, recording units; NaN
// where a condition has no such trial).
type StateLevels struct {
	Covariate             int
	LowZ, HighZ           float64
	LowMeans, HighMeans   []float64
	LowCount, HighCount   []int
	LowCutoff, HighCutoff float64
}

// Levels splits the trials by covariate k into thirds and returns the low
// and high thirds' mean z-score and condition means. It panics if the fit
// has no covariates or k is out of range.
func (sf *StateFit) Levels(p *Prepared, k int) *StateLevels {
	cov := sf.Covariates
	if cov == nil || k < 0 || k >= cov.K {
		panic("train: StateFit.Levels: no such covariate")
	}
	T, K := cov.T, cov.K
	v := make([]float64, T)
	for t := range v {
		v[t] = cov.Values[t*K+k]
	}
	sorted := slices.Clone(v)
	slices.Sort(sorted)
	lv := &StateLevels{Covariate: k, LowCutoff: sorted[(T-1)/3], HighCutoff: sorted[T-1-(T-1)/3]}
	B, N := p.NBins, p.Neurons()
	lv.LowMeans, lv.HighMeans = make([]float64, B*N), make([]float64, B*N)
	lv.LowCount, lv.HighCount = make([]int, B), make([]int, B)
	var zl, zh float64
	var nl, nh int
	y := p.Rec.Y.Data
	for t, x := range v {
		var dst []float64
		z := (x - sf.Std.Mean[k]) / sf.Std.Scale[k]
		switch {
		case x <= lv.LowCutoff:
			dst = lv.LowMeans
			lv.LowCount[p.Cond[t]]++
			zl += z
			nl++
		case x >= lv.HighCutoff:
			dst = lv.HighMeans
			lv.HighCount[p.Cond[t]]++
			zh += z
			nh++
		default:
			continue
		}
		b := p.Cond[t]
		row := dst[b*N : b*N+N]
		for j, yv := range y[t*N : t*N+N] {
			row[j] += float64(yv)
		}
	}
	for b := 0; b < B; b++ {
		for j := 0; j < N; j++ {
			lv.LowMeans[b*N+j] /= float64(lv.LowCount[b])
			lv.HighMeans[b*N+j] /= float64(lv.HighCount[b])
		}
	}
	lv.LowZ, lv.HighZ = zl/float64(max(nl, 1)), zh/float64(max(nh, 1))
	return lv
}
