package state

import (
	"math"
	"testing"

	"github.com/strialab/stria/eval"
)

// simSplit holds out every fifth repeat of each condition.
func simSplit(s *Sim) (train, test []int) {
	B := s.Config.Conditions
	for t := range s.Cond {
		if (t/B)%5 == 4 {
			test = append(test, t)
		} else {
			train = append(train, t)
		}
	}
	return train, test
}

// speedFit fits the speed model of a simulation and returns its pieces.
func speedFit(t *testing.T, s *Sim, train, test []int, ridge float64) (*Standardizer, *Params, []HeldOut) {
	t.Helper()
	T, N, B := len(s.Cond), s.Config.Neurons, s.Config.Conditions
	cov, err := NewCovariates([]string{"speed"}, [][]float64{s.Speed}, T)
	if err != nil {
		t.Fatal(err)
	}
	sc, err := NewStandardizer(cov, train)
	if err != nil {
		t.Fatal(err)
	}
	z := make([]float64, T)
	sc.Apply(z, cov)
	st, err := NewStats(s.Y, N, z, 1, s.Cond, B, train)
	if err != nil {
		t.Fatal(err)
	}
	f := st.Mean
	p := FitAffine(st, f, ridge)
	pred := make([]float64, len(test)*N)
	Predict(pred, p, f, z, s.Cond, test)
	h := make([]HeldOut, N)
	ScoreHeldOut(h, s.Y, N, s.Cond, test, f, pred)
	return sc, p, h
}

func TestSimExplore(t *testing.T) {
	for _, seed := range []uint64{1, 2, 3} {
		cfg := DefaultSim()
		cfg.Seed = seed
		s := Simulate(cfg)
		train, test := simSplit(s)
		sc, p, h := speedFit(t, s, train, test, 0)
		raw := sc.Raw(p)
		N := cfg.Neurons
		aT, oT := make([]float64, N), make([]float64, N)
		for n := 0; n < N; n++ {
			aT[n] = s.GainPerSD[n] / s.SpeedSD
			oT[n] = s.OffsetPerSD[n] / s.SpeedSD
		}
		pr := make([]Predicted, N)
		s.Predict(pr)
		var mp, mm float64
		for n := range pr {
			mp += pr[n].Speed
			mm += h[n].Delta
		}
		t.Logf("seed %d: corr a %.4f corr o %.4f; mean dR2 pred %.4f meas %.4f", seed, eval.Pearson(aT, raw.Gain), eval.Pearson(oT, raw.Offset), mp/float64(N), mm/float64(N))
		_ = math.NaN
	}
}
