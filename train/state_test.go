package train

import (
	"context"
	"math"
	"strings"
	"testing"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/eval/state"
	"github.com/strialab/stria/train/settings"
)

// simPrepared prepares a state.Simulate population (16 directions, the
// running speed as covariate) for a fit.
func simPrepared(t testing.TB, sim *state.Sim, edit func(*settings.Config)) *Prepared {
	t.Helper()
	T, N, B := len(sim.Cond), sim.Config.Neurons, sim.Config.Conditions
	y := data.NewMatrix(T, N)
	copy(y.Data, sim.Y)
	stim := make([]float64, T)
	for i, c := range sim.Cond {
		stim[i] = float64(c) * 360 / float64(B)
	}
	rec := &data.Recording{Y: y, Stim: stim, CovariateNames: []string{"speed"}, Covariates: [][]float64{sim.Speed},
		Source: data.Source{Responses: "synthetic", Covariates: "speed.npy"}}
	cfg := settings.Defaults()
	cfg.Data.Responses = "synthetic"
	cfg.Data.Covariates = "speed.npy"
	cfg.Axis = settings.AxisConfig{Name: "direction", Unit: "deg", Min: 0, Max: 360, Periodic: true, Bins: B, Encoding: settings.OneHot}
	cfg.Split.KeepBlocks = false
	cfg.Model.Layers = []settings.LayerConfig{{Channels: 4, Kernel: 5, Stride: 1}}
	cfg.Train.MaxEpochs = 300
	cfg.Train.Patience = 40
	if edit != nil {
		edit(&cfg)
	}
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	p, err := PrepareRecording(&cfg, rec)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

// TestStateSimulation: on a simulation with planted running-speed gains
// and offsets (state.Simulate, Poisson-like noise, an unobserved latent
// gain left as noise), the state terms fitted around the encoder recover
// the planted ones (r > 0.9, task requirement) and the held-out R^2 they
// add matches the simulation's prediction (state.Sim.Predict, as in
// eval/state's TestSimHeldOutGain) within 0.03, for both tuning modes.
func TestStateSimulation(t *testing.T) {
	cfg := state.DefaultSim()
	cfg.Seed = 3
	sim := state.Simulate(cfg)
	N := cfg.Neurons
	pr := make([]state.Predicted, N)
	sim.Predict(pr)
	for _, tuning := range []settings.StateTuning{settings.StateFixed, settings.StateRefit} {
		t.Run(tuning.String(), func(t *testing.T) {
			p := simPrepared(t, sim, func(c *settings.Config) { c.State.Tuning = tuning })
			f, err := Fit(context.Background(), p, Hooks{}, nil)
			if err != nil {
				t.Fatal(err)
			}
			sf, err := FitState(context.Background(), p, f)
			if err != nil {
				t.Fatal(err)
			}
			var q float64
			for _, tr := range p.Test {
				z := (sim.Speed[tr] - sim.SpeedMean) / sim.SpeedSD
				q += z * z
			}
			q /= float64(len(p.Test))
			W := len(p.Train) + len(p.Val)
			aT, oT := make([]float64, N), make([]float64, N)
			var want, got float64
			for n := 0; n < N; n++ {
				aT[n] = sim.GainPerSD[n] / sim.SpeedSD
				oT[n] = sim.OffsetPerSD[n] / sim.SpeedSD
				S := pr[n].Speed * pr[n].Total
				V := pr[n].Total - S + q*S
				want += q*S/V - 3*(1-pr[n].Stim-pr[n].Speed)/float64(W)
				got += sf.Scores[n].Delta
			}
			want /= float64(N)
			got /= float64(N)
			ra, ro := eval.Pearson(aT, sf.Raw.Gain), eval.Pearson(oT, sf.Raw.Offset)
			var slope, ss float64
			for n := range aT {
				slope += aT[n] * sf.Raw.Gain[n]
				ss += aT[n] * aT[n]
			}
			t.Logf("%s: gains r %.3f (fitted/planted %.3f), offsets r %.3f; held-out R^2 added %.4f, predicted %.4f; rounds %d, objective %v; %.2f s",
				tuning, ra, slope/ss, ro, got, want, sf.Rounds, sf.Objective, sf.Seconds)
			if ra < 0.9 || ro < 0.9 {
				t.Errorf("got correlations with the planted terms: gain %.3f, offset %.3f; want both > 0.9", ra, ro)
			}
			if math.Abs(got-want) > 0.03 {
				t.Errorf("got mean held-out R^2 added %.4f, want %.4f +- 0.03 (simulation's prediction)", got, want)
			}
			// The state model passes the stimulus-only noise ceiling (the
			// explainable fraction of the test trials, eval/methods.md §4)
			// for most neurons: the ceiling counts the speed-driven variance
			// as noise (eval/methods.md §17).
			sc := ScoreCurves(p, sf.Stim)
			above := 0
			for n := 0; n < N; n++ {
				if sf.Scores[n].R2State > sc[n].ExplainableFraction {
					above++
				}
			}
			t.Logf("%d of %d neurons score above the stimulus-only ceiling with the state terms", above, N)
			if above < N/2 {
				t.Errorf("got %d of %d neurons above the stimulus-only ceiling, want most (the simulation's speed effects are large)", above, N)
			}
			for i := 1; i < len(sf.Objective); i++ {
				if sf.Objective[i] > sf.Objective[i-1] {
					t.Errorf("objective rose at round %d: %v", i, sf.Objective)
				}
			}
		})
	}
}

// TestStatePopulationGain: the shared gain read from the other half of the
// neurons adds held-out R^2 on the simulation (its latent gain and the
// speed effect are shared), for most neurons.
func TestStatePopulationGain(t *testing.T) {
	cfg := state.DefaultSim()
	cfg.Seed = 4
	sim := state.Simulate(cfg)
	p := simPrepared(t, sim, func(c *settings.Config) {
		c.Data.Covariates = ""
		c.State.PopulationGain = true
	})
	p.Rec.Covariates, p.Rec.CovariateNames = nil, nil
	f, err := Fit(context.Background(), p, Hooks{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	sf, err := FitState(context.Background(), p, f)
	if err != nil {
		t.Fatal(err)
	}
	if sf.Scores != nil || sf.Pop == nil {
		t.Fatalf("got covariate scores %v and population fit %v, want none and one", sf.Scores != nil, sf.Pop != nil)
	}
	s := sf.PopSummary
	t.Logf("population gain (%s weights): mean held-out R^2 added %.4f, %.0f%% of neurons gain", sf.PopWeighting, s.MeanDelta, 100*s.FracPositive)
	if !(s.MeanDelta > 0.02) || !(s.FracPositive > 0.7) {
		t.Errorf("got mean R^2 added %.4f and share of neurons gaining %.2f, want > 0.02 and > 0.7", s.MeanDelta, s.FracPositive)
	}
}

// TestStateCovariateErrors: bad covariates are refused with the file, the
// covariate and the trial named.
func TestStateCovariateErrors(t *testing.T) {
	cfg := state.DefaultSim()
	cfg.Neurons, cfg.Repeats, cfg.Seed = 20, 10, 5
	sim := state.Simulate(cfg)
	for _, tc := range []struct {
		name string
		edit func(v []float64)
		want string
	}{
		{"nan", func(v []float64) { v[7] = math.NaN() }, `speed.npy: state: covariate "speed": value NaN at trial 7 (0-based)`},
		{"constant", func(v []float64) {
			for i := range v {
				v[i] = 2
			}
		}, `speed.npy: state: covariate "speed": constant (2) over all`},
	} {
		t.Run(tc.name, func(t *testing.T) {
			p := simPrepared(t, sim, nil)
			v := append([]float64(nil), sim.Speed...)
			tc.edit(v)
			p.Rec.Covariates = [][]float64{v}
			_, err := StateFitCurves(context.Background(), p, p.TrainStats().Sum, true)
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("got error %v, want one containing %q", err, tc.want)
			}
		})
	}
}

// TestStateColumnOrder: reversing the neurons' columns reverses every
// state result (the covariates' terms are per neuron, and the population
// halves follow the neurons, not their columns): the covariates' terms bit
// for bit, the population scores up to rounding (the shared gain sums over
// the neurons of a half in column order).
func TestStateColumnOrder(t *testing.T) {
	cfg := state.DefaultSim()
	cfg.Neurons, cfg.Repeats, cfg.Seed = 30, 20, 6
	sim := state.Simulate(cfg)
	N := cfg.Neurons
	fit := func(rev bool) *StateFit {
		s := *sim
		if rev {
			s.Y = make([]float32, len(sim.Y))
			for i := range s.Cond {
				for j := 0; j < N; j++ {
					s.Y[i*N+j] = sim.Y[i*N+N-1-j]
				}
			}
		}
		p := simPrepared(t, &s, func(c *settings.Config) { c.State.Tuning = settings.StateFixed; c.State.PopulationGain = true })
		B := p.NBins
		st := p.TrainStats()
		m := make([]float64, B*N)
		for b := 0; b < B; b++ {
			for j := 0; j < N; j++ {
				m[b*N+j] = st.Sum[b*N+j] / float64(st.Count[b])
			}
		}
		sf, err := StateFitCurves(context.Background(), p, m, true)
		if err != nil {
			t.Fatal(err)
		}
		return sf
	}
	a, b := fit(false), fit(true)
	for j := 0; j < N; j++ {
		k := N - 1 - j
		pa, pb := a.Pop.Scores[j], b.Pop.Scores[k]
		if a.Params.Gain[j] != b.Params.Gain[k] || math.Abs(pa.R2State-pb.R2State) > 1e-12 || pa.R2Stim != pb.R2Stim || a.Pop.Half[j] != b.Pop.Half[k] {
			t.Fatalf("neuron %d: got gain %v / %v, population scores %v / %v, half %v / %v after reversing the columns",
				j, a.Params.Gain[j], b.Params.Gain[k], a.Pop.Scores[j], b.Pop.Scores[k], a.Pop.Half[j], b.Pop.Half[k])
		}
	}
}

// TestStateStimulusLinked: a covariate tied to the stimulus (running more
// during some directions, state.SimConfig.SpeedLink) is named in a note and
// flagged in the summary's share; an independent one is not.
func TestStateStimulusLinked(t *testing.T) {
	for _, link := range []float64{0, 0.9} {
		cfg := state.DefaultSim()
		cfg.Seed, cfg.SpeedLink = 8, link
		sim := state.Simulate(cfg)
		p := simPrepared(t, sim, nil)
		f, err := Fit(context.Background(), p, Hooks{}, nil)
		if err != nil {
			t.Fatal(err)
		}
		sf, err := FitState(context.Background(), p, f)
		if err != nil {
			t.Fatal(err)
		}
		noted := false
		for _, n := range sf.Notes {
			noted = noted || strings.Contains(n, `covariate "speed" is tied to the stimulus`)
		}
		if noted != (link > 0) || (len(sf.Linked) > 0) != (link > 0) {
			t.Errorf("speed link %g: got note %v and linked %v, want them only for a linked covariate", link, noted, sf.Linked)
		}
	}
}

// TestStatePopulationFails: a population gain that cannot be estimated
// (every tuning value 0 on one condition, so no neuron informs the gain of
// its trials) leaves the covariates' terms in place and says why.
func TestStatePopulationFails(t *testing.T) {
	cfg := state.DefaultSim()
	cfg.Neurons, cfg.Repeats, cfg.Seed = 20, 10, 12
	sim := state.Simulate(cfg)
	p := simPrepared(t, sim, func(c *settings.Config) { c.State.PopulationGain = true })
	B, N := p.NBins, p.Neurons()
	f := make([]float64, B*N)
	for b := 1; b < B; b++ {
		for j := 0; j < N; j++ {
			f[b*N+j] = 1 + float64(b)
		}
	}
	sf, err := StateFitCurves(context.Background(), p, f, true)
	if err != nil {
		t.Fatal(err)
	}
	if sf.Pop != nil || sf.PopError == nil || sf.Params == nil || len(sf.Notes) == 0 || !strings.Contains(sf.Notes[len(sf.Notes)-1], "no population gain was fitted") {
		t.Errorf("got population %v, error %v, notes %q; want no population gain, the covariates' terms and a note", sf.Pop != nil, sf.PopError, sf.Notes)
	}
}

// TestStateNotStreamable: the state terms need every trial's responses, so
// a fit with them is never fitted from one pass over the file (nor by
// array tasks, which check Streamable too).
func TestStateNotStreamable(t *testing.T) {
	cfg := settings.Defaults()
	cfg.Axis = settings.AxisConfig{Min: 0, Max: 360, Periodic: true, Bins: 8, Encoding: settings.OneHot}
	if why := Streamable(&cfg); why != "" {
		t.Fatalf("the default config is not streamable: %s", why)
	}
	for _, edit := range []func(*settings.Config){
		func(c *settings.Config) { c.Data.Covariates = "speed.npy" },
		func(c *settings.Config) { c.State.PopulationGain = true },
	} {
		c := cfg
		edit(&c)
		if why := Streamable(&c); !strings.Contains(why, "state terms") {
			t.Errorf("got %q, want the state terms named", why)
		}
	}
}
