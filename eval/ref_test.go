package eval

import (
	"encoding/json"
	"math"
	"os"
	"testing"
)

// refFile is written by testdata/eval/gen_eval.py (scipy 1.10.1, numpy 1.24.2,
// scikit-learn 1.2.1; the versions are recorded in the file).
const refFile = "../testdata/eval/eval_ref.json"

type evalRef struct {
	Versions map[string]string `json:"versions"`
	Wilcoxon []struct {
		Name, ScipyMethod, Note string
		X, Y                    []float64
		W, P                    float64
	} `json:"wilcoxon"`
	Pearson []struct {
		Name string
		X, Y []float64
		R    float64
	} `json:"pearson"`
	Regression []struct {
		Name    string
		Y, Yhat []float64
		R2, EV  float64
	} `json:"regression"`
}

func loadRef(t *testing.T) evalRef {
	t.Helper()
	b, err := os.ReadFile(refFile)
	if err != nil {
		t.Fatal(err)
	}
	var r evalRef
	if err := json.Unmarshal(b, &r); err != nil {
		t.Fatal(err)
	}
	return r
}

func TestWilcoxonScipy(t *testing.T) {
	ref := loadRef(t)
	// Method stria must pick for each fixture (see the notes in the JSON).
	want := map[string]string{
		"n10_exact": "exact", "n25_exact": "exact", "n50_exact": "exact",
		"n80_normal": "normal", "n120_ties_zeros": "normal", "n30_ties_zeros": "normal",
		"n12_ties_nozeros_approx": "normal",
	}
	for _, c := range ref.Wilcoxon {
		t.Run(c.Name, func(t *testing.T) {
			got := WilcoxonSignedRank(c.X, c.Y)
			// W is a sum of (half-)integer ranks: exact. P: scipy.stats.wilcoxon
			// (gen_eval.py); 1e-12 relative covers summation order in the
			// exact table and erfc vs scipy's norm.sf.
			if got.W != c.W {
				t.Errorf("W = %v, want %v (scipy)", got.W, c.W)
			}
			if !near(got.P, c.P, 1e-12*math.Max(c.P, 1e-3)) {
				t.Errorf("P = %.15g, want %.15g (scipy)", got.P, c.P)
			}
			if got.Method != want[c.Name] {
				t.Errorf("method %q, want %q", got.Method, want[c.Name])
			}
		})
	}
}

func TestWilcoxonEdgeCases(t *testing.T) {
	// NaN pairs are dropped and counted; the rest is the same test.
	x := []float64{1, 2, math.NaN(), 4, 5}
	y := []float64{0, 0, 0, math.NaN(), 0}
	got := WilcoxonSignedRank(x, y)
	// d = [1, 2, 5]: all positive, n = 3: W = 0, exact two-sided p = 2/8 = 0.25 [computed by hand].
	if got.Dropped != 2 || got.N != 3 || got.W != 0 || got.P != 0.25 || got.Method != "exact" {
		t.Errorf("got %+v", got)
	}
	got = WilcoxonSignedRank([]float64{1, 2}, []float64{1, 2})
	if got.Method != "none" || !math.IsNaN(got.P) || got.N != 0 {
		t.Errorf("all-zero differences: got %+v", got)
	}
}

func TestPearsonScipy(t *testing.T) {
	for _, c := range loadRef(t).Pearson {
		// scipy.stats.pearsonr (gen_eval.py); 1e-13: two-pass moments in float64.
		if got := Pearson(c.X, c.Y); !near(got, c.R, 1e-13) {
			t.Errorf("%s: r = %.16g, want %.16g", c.Name, got, c.R)
		}
	}
}

func TestRegressionSklearn(t *testing.T) {
	for _, c := range loadRef(t).Regression {
		// sklearn r2_score / explained_variance_score (gen_eval.py); 1e-13 as above.
		if got := R2(c.Y, c.Yhat); !near(got, c.R2, 1e-13) {
			t.Errorf("%s: R2 = %.16g, want %.16g", c.Name, got, c.R2)
		}
		if got := ExplainedVarianceScore(c.Y, c.Yhat); !near(got, c.EV, 1e-13) {
			t.Errorf("%s: EV = %.16g, want %.16g", c.Name, got, c.EV)
		}
	}
}
