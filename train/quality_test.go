package train

import (
	"context"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"github.com/strialab/stria/train/settings"
	"math"
	"os"
	"path/filepath"
	"testing"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/data/condstats"
	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/data/synth"
)

// The quality benchmark: a population of cells with one to three von
// Mises bumps at random places (synth.Bumps), 60 bins, shared gain
// noise. Quality is the share of the gap between the training trials'
// condition means and the oracle (the noise-free bin means) that a model
// closes on the test trials, on mean held-out R^2 over neurons:
//
//	share = (R2_model - R2_condmean) / (R2_oracle - R2_condmean).
//
// testdata/quality/gen_quality.py trains the same encoder in a general
// deep-learning framework on the same data and split and writes its share
// to testdata/quality/reference.json (how: testdata/quality/README.md).

// qualityScenario is the benchmark population; its responses' SHA-256 is
// recorded with the framework's reference so that a changed generator is
// noticed.
var qualityScenario = synth.BumpsConfig{Neurons: 2000, Trials: 3000, Bins: 60, UntunedFrac: 0.15, GainSD: 0.15, NoiseSD: 1.5, Seed: 42}

// qualityPrepared bins and splits the scenario with the default config.
func qualityPrepared(tb testing.TB, scen synth.BumpsConfig) (*Prepared, []float64) {
	tb.Helper()
	rec, _, oracle := synth.Bumps(scen)
	cfg := settings.Defaults()
	cfg.Data.Responses = "synthetic"
	cfg.Axis = settings.AxisConfig{Name: "heading", Unit: "deg", Min: 0, Max: 360, Periodic: true, BinWidth: 360 / float64(scen.Bins), Encoding: settings.OneHot}
	cfg.Split.KeepBlocks = false
	if err := cfg.Validate(); err != nil {
		tb.Fatal(err)
	}
	p, err := PrepareRecording(&cfg, rec)
	if err != nil {
		tb.Fatal(err)
	}
	return p, oracle
}

// meanR2 is the mean over scored neurons of the test R^2 of per-bin
// predictions pc (B x N, recording units).
func meanR2(p *Prepared, pc []float64) float64 {
	s := ScoreCurves(p, pc)
	var sum float64
	k := 0
	for _, v := range s {
		if !math.IsNaN(v.TestR2) {
			sum += v.TestR2
			k++
		}
	}
	return sum / float64(k)
}

// trainingMeans returns the training trials' condition means (B x N).
func trainingMeans(p *Prepared) []float64 {
	st := condstats.New(p.Rec.Y, p.Cond, append(append([]int(nil), p.Train...), p.Val...), p.NBins)
	return st.Mean(nil)
}

// responsesHash is the SHA-256 of the responses as little-endian float32.
func responsesHash(y *data.Matrix) string {
	h := sha256.New()
	buf := make([]byte, 4*y.Cols)
	for t := 0; t < y.Rows; t++ {
		for j, v := range y.Row(t) {
			binary.LittleEndian.PutUint32(buf[4*j:], math.Float32bits(v))
		}
		h.Write(buf)
	}
	return hex.EncodeToString(h.Sum(nil))
}

// qualityReference is testdata/quality/reference.json.
type qualityReference struct {
	ResponsesSHA256 string  `json:"responses_sha256"`
	Share           float64 `json:"gap_share"`
	MeanR2          float64 `json:"mean_r2"`
	MeanR2CondMean  float64 `json:"mean_r2_condmean"`
	MeanR2Oracle    float64 `json:"mean_r2_oracle"`
	Framework       string  `json:"framework"`
	Settings        string  `json:"settings"`
}

// TestWriteQualityData writes the benchmark's data and split for the
// generator script when STRIA_QUALITY_OUT names a folder; otherwise it
// does nothing.
func TestWriteQualityData(t *testing.T) {
	dir := os.Getenv("STRIA_QUALITY_OUT")
	if dir == "" {
		t.Skip("set STRIA_QUALITY_OUT to write the quality benchmark's data")
	}
	p, oracle := qualityPrepared(t, qualityScenario)
	if err := os.MkdirAll(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	y := p.Rec.Y
	must := func(err error) {
		if err != nil {
			t.Fatal(err)
		}
	}
	must(format.WriteNPY(filepath.Join(dir, "responses.npy"), []int{y.Rows, y.Cols}, y.Data))
	cond := make([]float64, len(p.Cond))
	for i, c := range p.Cond {
		cond[i] = float64(c)
	}
	must(format.WriteNPY64(filepath.Join(dir, "condition.npy"), []int{len(cond)}, cond))
	must(format.WriteNPY64(filepath.Join(dir, "oracle_means.npy"), []int{p.NBins, y.Cols}, oracle))
	must(format.WriteNPY64(filepath.Join(dir, "norm_mean.npy"), []int{y.Cols}, p.Norm.Mean))
	must(format.WriteNPY64(filepath.Join(dir, "norm_scale.npy"), []int{y.Cols}, p.Norm.Scale))
	b, _ := json.MarshalIndent(map[string]any{
		"train": p.Train, "validation": p.Val, "test": p.Test,
		"bins": p.NBins, "responses_sha256": responsesHash(y),
	}, "", " ")
	must(os.WriteFile(filepath.Join(dir, "split.json"), b, 0o644))
}

// BenchmarkQuality fits the default config to the benchmark population and
// reports the gap share it closes beside the framework's on the same split
// (ReportMetric: share, share_framework), and beside them the projected
// solver with its filters trained by Adam (the default before the
// quasi-Newton solver) and the adam solver. It fails when the default
// closes less than the framework.
func BenchmarkQuality(b *testing.B) {
	p, oracle := qualityPrepared(b, qualityScenario)
	var ref qualityReference
	raw, err := os.ReadFile("../testdata/quality/reference.json")
	if err != nil {
		b.Fatal(err)
	}
	if err := json.Unmarshal(raw, &ref); err != nil {
		b.Fatal(err)
	}
	if h := responsesHash(p.Rec.Y); h != ref.ResponsesSHA256 {
		b.Fatalf("the benchmark population changed (responses %s, reference made on %s): rerun testdata/quality/gen_quality.py", h, ref.ResponsesSHA256)
	}
	cm, orc := meanR2(p, trainingMeans(p)), meanR2(p, oracle)
	for _, run := range []struct {
		name   string
		solver settings.Solver
		adam   bool // projectedAdam: the projected solver's filters by Adam
	}{
		{"default", settings.SolverAuto, false},
		{"projected-filters-by-adam", settings.SolverProjected, true},
		{"solver=adam", settings.SolverAdam, false},
	} {
		solver := run.solver
		b.Run(run.name, func(b *testing.B) {
			cfg := *p.Cfg
			cfg.Train.Solver = solver
			q := *p
			q.Cfg = &cfg
			var share float64
			for i := 0; i < b.N; i++ {
				projectedAdam = run.adam
				f, err := Fit(context.Background(), &q, Hooks{}, nil)
				projectedAdam = false
				if err != nil {
					b.Fatal(err)
				}
				b.ReportMetric(float64(f.BestEpoch), "best_epoch")
				b.ReportMetric(float64(len(f.Log)), "epochs")
				pc := append([]float64(nil), f.Curves...)
				if f.Curves == nil {
					pc = PredictConditions(f.Net, q.NBins)
				}
				q.Norm.InvertRows(pc)
				share = (meanR2(&q, pc) - cm) / (orc - cm)
			}
			b.ReportMetric(share, "share")
			b.ReportMetric(ref.Share, "share_framework")
			b.ReportMetric(cm, "r2_condmean")
			b.ReportMetric(orc, "r2_oracle")
			if solver == settings.SolverAuto && share < ref.Share {
				b.Errorf("the default fit closes %.3f of the gap, the framework %.3f", share, ref.Share)
			}
		})
	}
}

// BenchmarkCompareQuality runs the comparison of stria compare (the default
// encoder and the per-neuron baselines on the same five folds) on the
// benchmark population and reports each model's mean over neurons of the
// fold-averaged test R^2 (r2_<model>) and the share of neurons on which the
// encoder's is higher than each von Mises baseline's (wins_<model>). It
// fails unless the encoder has the highest mean and beats each von Mises
// baseline on more than half of the neurons.
func BenchmarkCompareQuality(b *testing.B) {
	p, _ := qualityPrepared(b, qualityScenario)
	folds, err := Folds(p)
	if err != nil {
		b.Fatal(err)
	}
	global := *p.Cfg
	global.Model.ReadoutL2PerNeuron = false
	specs := []ModelSpec{{Name: "encoder", Cfg: p.Cfg}, {Name: "encoder-global", Cfg: &global}}
	for _, k := range []string{"condmean", "vonmises", "vonmises2", "smoothlinear"} {
		specs = append(specs, ModelSpec{Name: k, Baseline: k})
	}
	N := p.Neurons()
	for i := 0; i < b.N; i++ {
		avg := map[string][]float64{}
		for _, s := range specs {
			sum := make([]float64, N)
			for f, sets := range folds {
				r, err := RunUnit(context.Background(), p, s, f, sets)
				if err != nil {
					b.Fatal(err)
				}
				for j, sc := range r.Scores {
					sum[j] += sc.TestR2 / float64(len(folds))
				}
			}
			avg[s.Name] = sum
		}
		best, bestV := "", math.Inf(-1)
		for _, s := range specs {
			var m float64
			for _, v := range avg[s.Name] {
				m += v / float64(N)
			}
			b.ReportMetric(m, "r2_"+s.Name)
			b.Logf("%-12s mean fold-averaged test R2 %.5f", s.Name, m)
			if m > bestV {
				best, bestV = s.Name, m
			}
		}
		if best != "encoder" {
			b.Errorf("highest mean test R2: %s, want the encoder", best)
		}
		for _, e := range []string{"encoder", "encoder-global"} {
			for _, k := range []string{"vonmises", "vonmises2"} {
				wins := 0
				for j := range avg[k] {
					if avg[e][j] > avg[k][j] {
						wins++
					}
				}
				share := float64(wins) / float64(N)
				b.ReportMetric(share, "wins_"+e+"_"+k)
				b.Logf("%s beats %s on %.1f %% of the neurons", e, k, 100*share)
				if e == "encoder" && share <= 0.5 {
					b.Errorf("the encoder beats %s on %.1f %% of the neurons, want more than half", k, 100*share)
				}
			}
		}
	}
}
