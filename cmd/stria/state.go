package main

import (
	"context"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"path/filepath"
	"slices"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/eval/state"
	"github.com/strialab/stria/train"
	"github.com/strialab/stria/train/runfolder"
	"github.com/strialab/stria/train/settings"
)

// fitState fits the state terms of a finished fit when the config asks for
// them (data.covariates or state.population_gain), writes them into the
// run folder and adds their block to summary.json. Notes go to stderr.
func fitState(ctx context.Context, dir string, p *train.Prepared, fitted *train.Fitted, sum *runfolder.Summary, stderr io.Writer) error {
	if !p.Cfg.StateActive() {
		return nil
	}
	sf, err := train.FitState(ctx, p, fitted)
	if err != nil {
		return err
	}
	for _, n := range sf.Notes {
		fmt.Fprintln(stderr, "note:", n)
	}
	st, err := runfolder.WriteState(dir, p, sf)
	if err != nil {
		return err
	}
	sum.State = st
	return runfolder.WriteJSON(filepath.Join(dir, runfolder.FileSummary), sum)
}

// printState prints the state block of a summary.
func printState(w io.Writer, s *runfolder.StateSummary) {
	if s == nil {
		return
	}
	line := func(what string, sc runfolder.StateScores) {
		fmt.Fprintf(w, "  %-24s test R^2 %.3f -> %.3f (median); added: median %.3f [%.3f, %.3f], mean %.3f; %.0f%% of neurons gain\n",
			what, float64(sc.Stimulus.Median), float64(sc.WithState.Median), float64(sc.Added.Median),
			float64(sc.Added.Q1), float64(sc.Added.Q3), float64(sc.MeanAdded), 100*float64(sc.Gaining))
	}
	fmt.Fprintf(w, "state terms (%s): %s\n", runfolder.FileStateTerms, stateHow(s))
	for _, c := range s.Covariates {
		tied := ""
		if c.TiedToStimulus {
			tied = " (tied to the stimulus: see the note above)"
		}
		fmt.Fprintf(w, "  covariate %-14s median gain %+.3f and offset %+.3g per sd (sd %.3g)%s\n", c.Name, float64(c.MedianGain), float64(c.MedianOffset), float64(c.SD), tied)
	}
	if s.Scores != nil {
		line("with covariates:", *s.Scores)
	}
	if s.Population != nil {
		line("with population gain:", s.Population.Scores)
	}
	fmt.Fprintln(w, "note:", s.Caution)
}

func stateHow(s *runfolder.StateSummary) string {
	out := ""
	if len(s.Covariates) > 0 {
		out = fmt.Sprintf("tuning %s", s.Tuning)
		if s.Tuning == "refit" {
			out += fmt.Sprintf(" (%d rounds kept)", s.Rounds)
		}
		out += fmt.Sprintf(", %d neurons fitted", s.Fitted)
		if s.Confounded > 0 {
			out += fmt.Sprintf(", %d with gain and offset confounded", s.Confounded)
		}
	}
	if s.Population != nil {
		if out != "" {
			out += "; "
		}
		out += fmt.Sprintf("population gain from the other half of the neurons (%s weights)", s.Population.Weighting)
	}
	return out + fmt.Sprintf("; %.1f s", s.Seconds)
}

// demoRunning makes the demo's running speed (cm/s) from the population's
// per-trial gain g_t: 12 + 60 (g_t - 1) plus noise of SD 3, never below 0,
// so that running speeds up the gain, as reported for mouse visual cortex.
func demoRunning(gain []float64, seed uint64) []float64 {
	rng := rand.New(rand.NewPCG(seed, 0x72756e)) // "run"
	v := make([]float64, len(gain))
	for t, g := range gain {
		v[t] = max(0, 12+60*(g-1)+3*rng.NormFloat64())
	}
	return v
}

// printCovariates prints, for stria inspect, each state covariate's range,
// mean and standard deviation and its link to the stimulus (the share of
// its variance the condition explains, eta^2, against chance), and returns
// the problems that would stop stria fit (NaN, constant, wrong length).
func printCovariates(w io.Writer, cfg *settings.Config, rec *data.Recording, cond []int, nb int) []string {
	if len(rec.Covariates) == 0 {
		return nil
	}
	cov, err := state.NewCovariates(rec.CovariateNames, rec.Covariates, rec.Y.Rows)
	if err != nil {
		return []string{fmt.Sprintf("%s: %v", covariateSource(rec.Source), err)}
	}
	all := make([]int, cov.T)
	for i := range all {
		all[i] = i
	}
	share := make([]float64, cov.K)
	state.ConditionShare(share, cov, cond, nb, all)
	nonEmpty := map[int]bool{}
	for _, c := range cond {
		nonEmpty[c] = true
	}
	null := state.NullShare(len(nonEmpty), cov.T)
	fmt.Fprintf(w, "state covariates (%s): %d\n", covariateSource(rec.Source), cov.K)
	for k, name := range cov.Names {
		col := rec.Covariates[k]
		s := eval.Summarize(col)
		lo, hi := slices.Min(col), slices.Max(col)
		var m, m2 float64
		for _, v := range col {
			m += v
		}
		m /= float64(len(col))
		for _, v := range col {
			m2 += (v - m) * (v - m)
		}
		tied := ""
		if share[k] > cfg.State.StimulusShareWarning {
			tied = fmt.Sprintf(" (above state.stimulus_share_warning %g: tied to the stimulus, its state terms can take over stimulus variance)", cfg.State.StimulusShareWarning)
		}
		fmt.Fprintf(w, "  %-16s %.4g to %.4g, median %.4g, mean %.4g, sd %.4g; condition explains %.1f%% of its variance (chance %.1f%%)%s\n",
			name, lo, hi, s.Median, m, math.Sqrt(m2/float64(len(col))), 100*share[k], 100*null, tied)
	}
	return nil
}

func covariateSource(src data.Source) string {
	switch {
	case src.Covariates != "":
		return src.Covariates
	case src.Stimulus != "":
		return src.Stimulus
	}
	return src.Responses
}
