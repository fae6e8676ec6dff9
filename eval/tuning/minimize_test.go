package tuning

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
)

// TestMinimizerMatchesGonum fits many neurons with the synchronous
// minimizer and with gonum's optimize.Minimize (the reference it
// reproduces; the implementation before it), each curve kind on grids of
// several sizes, with tuned, flat, noisy, dipped and sparse data and
// several start counts, and requires the same parameters and notes bit for
// bit.
func TestMinimizerMatchesGonum(t *testing.T) {
	perCase := 150
	if testing.Short() {
		perCase = 30
	}
	rng := rand.New(rand.NewPCG(21, 22))
	type grid struct {
		name    string
		centers []float64
		period  float64
	}
	grids := []grid{
		{"60 directions", gridOf(60, 6, 3), 360},
		{"12 directions", gridOf(12, 30, 0), 360},
		{"8 orientations", gridOf(8, 22.5, 0), 180},
		{"4 directions", gridOf(4, 90, 0), 360},
		{"40 track bins", gridOf(40, 2.5, 1.25), 0},
		{"6 track bins", gridOf(6, 10, 5), 0},
	}
	mismatch := 0
	for _, g := range grids {
		kinds := []string{"vonmises", "vonmises2"}
		if g.period == 0 {
			kinds = []string{"gaussian"}
		}
		for _, kind := range kinds {
			for _, starts := range []int{1, 3, 8} {
				name := fmt.Sprintf("%s/%s/starts=%d", g.name, kind, starts)
				models := [2]*Curve{}
				for i := range models {
					var m Model
					src := rand.New(rand.NewPCG(5, uint64(starts)))
					switch kind {
					case "vonmises":
						m = NewVonMises(g.centers, g.period, starts, src)
					case "vonmises2":
						m = NewVonMisesTwoPeak(g.centers, g.period, starts, src)
					default:
						m = NewGaussianBump(g.centers, starts, src)
					}
					models[i] = m.(*Curve)
				}
				models[1].f.gonumRef = true
				B := len(g.centers)
				for k := 0; k < perCase; k++ {
					counts, means := randomNeuron(rng, g.centers, g.period, k)
					var got [2][]float64
					var notes [2]string
					for i, m := range models {
						err := m.Fit(counts, means)
						if err != nil {
							t.Fatalf("%s neuron %d: %v", name, k, err)
						}
						got[i] = append([]float64(nil), m.Params()...)
						notes[i] = m.Note
					}
					same := notes[0] == notes[1]
					for i := range got[0] {
						same = same && math.Float64bits(got[0][i]) == math.Float64bits(got[1][i])
					}
					if !same {
						mismatch++
						if mismatch <= 10 {
							t.Errorf("%s neuron %d (%d bins): minimizer %v %q, gonum %v %q", name, k, B, got[0], notes[0], got[1], notes[1])
						}
					}
				}
			}
		}
	}
	if mismatch > 0 {
		t.Errorf("%d fits differ", mismatch)
	}
}

func gridOf(n int, step, offset float64) []float64 { return grid(n, step, offset) }

// randomNeuron draws condition counts and means of one of several kinds:
// a von Mises or Gaussian bump with noise (also a dip), pure noise, flat,
// a single non-empty condition, and sparse counts with empty conditions.
func randomNeuron(rng *rand.Rand, centers []float64, period float64, k int) ([]int, []float64) {
	B := len(centers)
	counts := make([]int, B)
	means := make([]float64, B)
	span := centers[B-1] - centers[0]
	mu := centers[0] + span*rng.Float64()
	amp := 0.2 + 3*rng.Float64()
	if k%7 == 3 {
		amp = -amp // a dip
	}
	kap := math.Exp(-1 + 4*rng.Float64())
	width := span / (2 + 8*rng.Float64())
	noise := []float64{0.01, 0.3, 1, 5}[k%4]
	for b, x := range centers {
		counts[b] = 1 + rng.IntN(12)
		if k%5 == 4 && rng.Float64() < 0.3 {
			counts[b] = 0 // empty conditions
		}
		var f float64
		if period > 0 {
			f = amp * math.Exp(kap*(math.Cos(2*math.Pi*(x-mu)/period)-1))
			if k%3 == 1 {
				f += 0.6 * amp * math.Exp(kap*(math.Cos(2*math.Pi*(x-mu)/period+math.Pi)-1))
			}
		} else {
			d := (x - mu) / width
			f = amp * math.Exp(-0.5*d*d)
		}
		means[b] = 0.5 + f + noise*rng.NormFloat64()/math.Sqrt(float64(max(counts[b], 1)))
	}
	switch k % 11 {
	case 5: // flat
		for b := range means {
			means[b] = 1.25
		}
	case 9: // one non-empty condition
		for b := range counts {
			counts[b] = 0
		}
		counts[rng.IntN(B)] = 4
	case 10: // pure noise
		for b := range means {
			means[b] = rng.NormFloat64()
		}
	}
	nonEmpty := 0
	for _, c := range counts {
		if c > 0 {
			nonEmpty++
		}
	}
	if nonEmpty == 0 {
		counts[0] = 1
	}
	return counts, means
}
