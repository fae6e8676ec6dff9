// Command planted writes a recording with planted state effects, for
// trying the state terms of stria fit and stria compare on data whose truth
// is known: responses.npy (trials x neurons, float32), direction.npy (the
// condition's direction per trial, degrees), running.npy (running speed per
// trial, cm/s), truth.csv (each neuron's planted gain and offset per
// standard deviation of running speed and its coupling to the unobserved
// shared gain) and state.yaml, a config that fits it with the state terms.
//
// The population is eval/state's simulation (state.Simulate, the model of
// eval/methods.md §17): tuning f_n at 16 directions, running multiplies the
// tuning by (1 + a_n z) and adds o_n z, a shared latent gain multiplies it
// again, noise variance proportional to the tuning.
//
//	go run ./testdata/state/planted -out /tmp/planted [-neurons 200] [-repeats 40] [-seed 1] [-link 0]
//
// With -link > 0 running is more likely during some directions: the case in
// which a covariate can steal stimulus variance (stria warns).
package main

import (
	"encoding/csv"
	"flag"
	"fmt"
	"log"
	"os"
	"path/filepath"
	"strconv"

	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/eval/state"
)

func main() {
	cfg := state.DefaultSim()
	out := flag.String("out", "", "folder to write into (created)")
	flag.IntVar(&cfg.Neurons, "neurons", cfg.Neurons, "neurons")
	flag.IntVar(&cfg.Repeats, "repeats", cfg.Repeats, "trials per direction")
	flag.Uint64Var(&cfg.Seed, "seed", 1, "seed")
	flag.Float64Var(&cfg.SpeedLink, "link", 0, "tie running to the direction (0: independent, below 1)")
	flag.Parse()
	if *out == "" {
		log.Fatal("planted: give -out FOLDER")
	}
	if err := write(*out, cfg); err != nil {
		log.Fatal("planted: ", err)
	}
}

func write(dir string, cfg state.SimConfig) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	s := state.Simulate(cfg)
	T, N := len(s.Cond), cfg.Neurons
	step := 360 / float64(cfg.Conditions)
	dirs := make([]float64, T)
	for t, b := range s.Cond {
		dirs[t] = float64(b) * step
	}
	if err := format.WriteNPY(filepath.Join(dir, "responses.npy"), []int{T, N}, s.Y); err != nil {
		return err
	}
	if err := format.WriteNPY64(filepath.Join(dir, "direction.npy"), []int{T}, dirs); err != nil {
		return err
	}
	if err := format.WriteNPY64(filepath.Join(dir, "running.npy"), []int{T}, s.Speed); err != nil {
		return err
	}
	f, err := os.Create(filepath.Join(dir, "truth.csv"))
	if err != nil {
		return err
	}
	w := csv.NewWriter(f)
	w.Write([]string{"neuron", "gain_per_sd", "offset_per_sd", "coupling"})
	g := func(v float64) string { return strconv.FormatFloat(v, 'g', 17, 64) }
	for n := 0; n < N; n++ {
		w.Write([]string{strconv.Itoa(n), g(s.GainPerSD[n]), g(s.OffsetPerSD[n]), g(s.Coupling[n])})
	}
	w.Flush()
	if err := w.Error(); err != nil {
		f.Close()
		return err
	}
	if err := f.Close(); err != nil {
		return err
	}
	yaml := fmt.Sprintf(`seed: 1
data:
  responses: responses.npy
  stimulus: direction.npy
  covariates: running.npy
  covariate_columns: [running_speed]
axis:
  name: direction
  unit: deg
  min: 0
  max: 360
  periodic: true
  bin_width: %g
state:
  population_gain: true
output: fit
`, step)
	return os.WriteFile(filepath.Join(dir, "state.yaml"), []byte(yaml), 0o644)
}
