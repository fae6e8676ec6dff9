package acuity

import (
	"encoding/json"
	"math"
	"os"
	"testing"
)

// refFile is written by testdata/acuity/gen_acuity.py (scikit-learn 1.2.1,
// numpy 1.24.2; the versions are recorded in the file).
const refFile = "../../testdata/acuity/acuity_ref.json"

type acuityRef struct {
	Versions map[string]string `json:"versions"`
	Neurons  int               `json:"neurons"`
	NBins    int               `json:"nbins"`
	Period   float64           `json:"period"`
	Values   []float64         `json:"values"`
	Y        []float64         `json:"y"`
	Cond     []int             `json:"cond"`
	Fold     []int             `json:"fold"`
	Folds    int               `json:"folds"`
	Cases    []struct {
		Name         string    `json:"name"`
		Shrinkage    float64   `json:"shrinkage"`
		UniformPrior bool      `json:"uniform_prior"`
		Pred         []int     `json:"pred"`
		Accuracy     float64   `json:"accuracy"`
		Scores       []float64 `json:"scores"`
	} `json:"cases"`
}

// TestLDAScikitLearn: the shrinkage LDA matches scikit-learn's
// LinearDiscriminantAnalysis(solver="lsqr", shrinkage=alpha) on responses
// scaled per neuron by the pooled within-condition sd of the training trials
// (gen_acuity.py explains the equivalence): same decoded condition for every
// trial, same accuracy, and the same decision scores up to a constant per
// trial (our scores are centred on the training mean, which shifts every
// class by the same amount), to 1e-9 relative to the score range.
func TestLDAScikitLearn(t *testing.T) {
	b, err := os.ReadFile(refFile)
	if err != nil {
		t.Fatal(err)
	}
	var ref acuityRef
	if err := json.Unmarshal(b, &ref); err != nil {
		t.Fatal(err)
	}
	n, B := ref.Neurons, ref.NBins
	T := len(ref.Cond)
	y := make([]float32, len(ref.Y))
	for i, v := range ref.Y {
		y[i] = float32(v) // exact: the file holds float32 values
	}
	folds := make([]Fold, ref.Folds)
	for tr, f := range ref.Fold {
		for g := range folds {
			if g == f {
				folds[g].Test = append(folds[g].Test, tr)
			} else {
				folds[g].Train = append(folds[g].Train, tr)
			}
		}
	}
	ax := Conditions{Values: ref.Values, Period: ref.Period}
	cols := make([]int, n)
	for j := range cols {
		cols[j] = j
	}
	for _, c := range ref.Cases {
		t.Run(c.Name, func(t *testing.T) {
			d := Decoder{Kind: LinearDiscriminant, Shrinkage: c.Shrinkage, UniformPrior: c.UniformPrior}
			dec := make([]int, T)
			if _, err := d.Decode(dec, y, n, ref.Cond, B, folds, nil); err != nil {
				t.Fatal(err)
			}
			miss := 0
			for tr := range dec {
				if dec[tr] != c.Pred[tr] {
					miss++
				}
			}
			sum, err := Summarize(ax, ref.Cond, dec)
			if err != nil {
				t.Fatal(err)
			}
			t.Logf("accuracy %.4f (scikit-learn %.4f), %d of %d trials decoded differently, MAE %.3f +- %.3f deg",
				sum.Accuracy, c.Accuracy, miss, T, sum.MAE, sum.SEM)
			if miss != 0 || sum.Accuracy != c.Accuracy {
				t.Errorf("got %d differing trials, accuracy %v; want 0 and %v", miss, sum.Accuracy, c.Accuracy)
			}
			// Decision scores, fold by fold, against the classifier's own.
			var cl classifier
			var st DecodeStats
			x := make([]float64, n)
			worst := 0.0
			for _, fold := range folds {
				if err := cl.fitLDA(y, n, ref.Cond, B, fold.Train, cols, c.Shrinkage, c.UniformPrior, &st); err != nil {
					t.Fatal(err)
				}
				for _, tr := range fold.Test {
					for j := range x {
						x[j] = float64(y[tr*n+j]) - cl.g[j]
					}
					want := c.Scores[tr*B : tr*B+B]
					got := make([]float64, B)
					lo, hi := math.Inf(1), math.Inf(-1)
					for k := 0; k < B; k++ {
						s := cl.c[k]
						for j, v := range x {
							s += v * cl.w[k*n+j]
						}
						got[k] = s
						lo, hi = math.Min(lo, want[k]), math.Max(hi, want[k])
					}
					for k := 1; k < B; k++ {
						e := math.Abs((got[k]-got[0])-(want[k]-want[0])) / (hi - lo)
						worst = math.Max(worst, e)
					}
				}
			}
			t.Logf("largest score difference %.2e of the score range", worst)
			if worst > 1e-9 {
				t.Errorf("score differences up to %v of the range, want <= 1e-9", worst)
			}
		})
	}
}
