package state_test

import (
	"fmt"

	"github.com/strialab/stria/eval/state"
)

// Example fits running-speed gains and offsets with the tuning held at the
// training condition means and reports the held-out R^2 they add.
func Example() {
	cfg := state.DefaultSim()
	cfg.Seed = 1
	sim := state.Simulate(cfg)
	T, N, B := len(sim.Cond), cfg.Neurons, cfg.Conditions
	var train, test []int
	for t := 0; t < T; t++ {
		if (t/B)%5 == 4 {
			test = append(test, t)
		} else {
			train = append(train, t)
		}
	}
	cov, err := state.NewCovariates([]string{"speed"}, [][]float64{sim.Speed}, T)
	if err != nil {
		fmt.Println(err)
		return
	}
	if linked := state.StimulusLinked(cov, sim.Cond, B, train, state.DefaultShareThreshold); len(linked) > 0 {
		fmt.Println("warning: tied to the stimulus:", linked)
	}
	sc, err := state.NewStandardizer(cov, train)
	if err != nil {
		fmt.Println(err)
		return
	}
	z := make([]float64, T*cov.K)
	sc.Apply(z, cov)
	st, err := state.NewStats(sim.Y, N, z, cov.K, sim.Cond, B, train)
	if err != nil {
		fmt.Println(err)
		return
	}
	f := st.Mean // stimulus-only tuning: training condition means
	p := state.FitAffine(st, f, 1e-3)
	pred := make([]float64, len(test)*N)
	state.Predict(pred, p, f, z, sim.Cond, test)
	scores := make([]state.HeldOut, N)
	state.ScoreHeldOut(scores, sim.Y, N, sim.Cond, test, f, pred)
	sum := state.SummarizeGain(scores)
	fmt.Printf("median held-out R^2: stimulus %.2f, with speed %.2f; mean gain %.2f; %d of %d neurons fitted\n",
		sum.Stim.Median, sum.State.Median, sum.MeanDelta, N-len(p.Failed()), N)
	raw := sc.Raw(p)
	fmt.Printf("neuron 0: gain %.3f per cm/s, offset %.3f per cm/s\n", raw.Gain[0], raw.Offset[0])
	// Output:
	// median held-out R^2: stimulus 0.45, with speed 0.64; mean gain 0.17; 200 of 200 neurons fitted
	// neuron 0: gain 0.029 per cm/s, offset -0.044 per cm/s
}
