package train

import (
	"context"
	"fmt"
	"os"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/strialab/stria/train/settings"
)

// BenchmarkPoissonVariants: experiment harness (temporary).
func BenchmarkPoissonVariants(b *testing.B) {
	sizes := []int{500, 2000}
	if v := os.Getenv("PV_N"); v != "" {
		sizes = nil
		for _, f := range strings.Split(v, ",") {
			n, _ := strconv.Atoi(f)
			sizes = append(sizes, n)
		}
	}
	variants := strings.Split(os.Getenv("PV"), ";")
	for _, n := range sizes {
		scen := poissonBumps(n)
		if v := os.Getenv("PV_SEED"); v != "" {
			x, _ := strconv.Atoi(v)
			scen.Seed = uint64(x)
		}
		pa, oracle := poissonBumpsPrepared(b, scen, settings.SolverAdam)
		cm, or := testR2(pa, condMeanPred(pa)), testR2(pa, oracle)
		for _, v := range variants {
			b.Run(fmt.Sprintf("neurons=%d/%s", n, v), func(b *testing.B) {
				pf, _ := poissonBumpsPrepared(b, scen, settings.SolverProjected)
				poissonQN = true
				for _, kv := range strings.Split(v, ",") {
					k, val, _ := strings.Cut(kv, "=")
					x, _ := strconv.ParseFloat(val, 64)
					switch k {
					case "lr":
						pf.Cfg.Train.LearningRate = x
					case "pat":
						pf.Cfg.Train.Patience = int(x)
					case "qn":
						poissonQN = x != 0
					case "qnpat":
						poissonQNPatience = int(x)
					}
				}
				defer func() { poissonQN, poissonQNPatience = true, 10 }()
				for range b.N {
					c0, t0 := cpuSeconds(), time.Now()
					ff, err := Fit(context.Background(), pf, Hooks{}, nil)
					if err != nil {
						b.Fatal(err)
					}
					cf, tf := cpuSeconds()-c0, time.Since(t0).Seconds()
					rf := testR2(pf, ff.Curves)
					if os.Getenv("PV_LOG") != "" {
						for _, e := range ff.Log {
							fmt.Fprintf(os.Stderr, "%d train %.6f val %.6f r2 %.4f s %.2f\n", e.Epoch, e.TrainLoss, e.ValLoss, e.ValR2, e.Seconds)
						}
					}
					b.ReportMetric(cf, "cpu_s")
					b.ReportMetric(tf, "wall_s")
					b.ReportMetric(float64(len(ff.Log)), "epochs")
					b.ReportMetric(float64(ff.BestEpoch), "best")
					b.ReportMetric(nanMedian(rf), "r2")
					b.ReportMetric(gapShare(rf, cm, or), "gap")
					b.ReportMetric(ff.Log[ff.BestEpoch-1].ValLoss, "val")
				}
			})
		}
	}
}
