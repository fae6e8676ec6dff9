package main

import (
	"fmt"
	"os"
	"path/filepath"

	"github.com/strialab/stria/train/runfolder/acuityfolder"
)

// acuityTemplate is the acuity section of the timed config: the defaults.
const acuityTemplate = `acuity:
  output: %s
`

// timeAcuity runs `stria acuity` with its default settings on r, once, in
// a child process, and prints the wall and CPU time, the peak memory, the
// time of each part and the headline numbers.
func timeAcuity(o options, r rec) error {
	name := "acuity_full"
	out := filepath.Join(o.dir, "run_"+name)
	cfgPath := filepath.Join(o.dir, "config_"+name+".yaml")
	cfg := fmt.Sprintf(configTemplate, o.seed, r.resp, r.stim, o.projectedReadoutL2, "projected", o.projectedLR, 0, o.projectedMaxEpochs, o.projectedPatience, out+"_fit")
	cfg += fmt.Sprintf(acuityTemplate, out)
	if err := os.WriteFile(cfgPath, []byte(cfg), 0o644); err != nil {
		return err
	}
	os.RemoveAll(out)
	fmt.Println("\nstria acuity, default settings (information: 8 sizes x 20 subsets; lda and model decoders on 5 folds, 8 sizes x 3 subsets), child process:")
	cr, err := inChild(o, "acuity", cfgPath, nil)
	if err != nil {
		return err
	}
	f, err := acuityfolder.ReadAcuity(out)
	if err != nil {
		return err
	}
	bench.line(fmt.Sprintf("Acuity/neurons=%d/trials=%d", r.neurons, r.trials), cr.Wall, "cpu-s", cr.CPU, "peak-MB", cr.MaxRSS/1e6)
	fmt.Printf("  wall %.1f s, CPU %.1f s (user + system, all threads), peak resident memory %.0f MB\n", cr.Wall, cr.CPU, cr.MaxRSS/1e6)
	fmt.Printf("  parts (wall s): information %.1f", f.Info.Seconds["information"])
	for _, d := range f.Info.Decoders {
		fmt.Printf(", decoder %s %.1f", d.Name, f.Info.Seconds["decoder "+d.Name])
		defer fmt.Printf("  %-15s accuracy %.3f, mean absolute error %.3g deg\n", d.Name, float64(d.Accuracy), float64(d.MAE))
	}
	fmt.Printf("; asymptote 1/eps %.4g /deg^2 (extrapolation)\n", float64(f.Info.Saturation.Asymptote))
	if !o.keepRuns {
		os.RemoveAll(out)
	}
	return nil
}
