package train

import (
	"context"
	"fmt"
	"testing"
	"time"

	"github.com/strialab/stria/eval/state"
	"github.com/strialab/stria/train/settings"
)

// BenchmarkStateFit times the state terms of a fit (train.FitState: one
// covariate, the population gain, the held-out scores) after the
// stimulus-only encoder, at 5,000 neurons x 3,000 trials (20 directions x
// 150 repeats), with the tuning fixed and with one refit round. The
// encoder's own fit is timed once, outside the loop, and reported as
// encoder-s for the ratio.
func BenchmarkStateFit(b *testing.B) {
	cfg := state.DefaultSim()
	cfg.Neurons, cfg.Conditions, cfg.Repeats, cfg.Seed = 5000, 20, 150, 1
	sim := state.Simulate(cfg)
	for _, tuning := range []settings.StateTuning{settings.StateFixed, settings.StateRefit} {
		b.Run(fmt.Sprintf("%s/5000x3000", tuning), func(b *testing.B) {
			p := simPrepared(b, sim, func(c *settings.Config) {
				c.State.Tuning = tuning
				c.State.PopulationGain = true
			})
			start := testingNow()
			f, err := Fit(context.Background(), p, Hooks{}, nil)
			if err != nil {
				b.Fatal(err)
			}
			enc := testingNow().Sub(start).Seconds()
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				if _, err := FitState(context.Background(), p, f); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(enc, "encoder-s")
		})
	}
}

var testingNow = time.Now
