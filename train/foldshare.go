package train

import (
	"runtime"
	"slices"
	"sync"

	"github.com/strialab/stria/data/condstats"
	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/eval"
)

// Fold is one cross-validation fold of a prepared recording with what the
// units of the fold share, each computed once, on first use, by whichever
// unit needs it first (safe for concurrent use):
//
//   - the per-condition statistics of the training and of the validation
//     trials (an encoder's TrainStats and ValStats);
//   - those of the training and validation trials together, what a baseline
//     fits (the training statistics continued with the validation trials,
//     which is what condstats.New of the joined list computes: every
//     element receives its trials in the order listed);
//   - the sums of the test trials that every one-hot model is scored from
//     (eval.HeldOutSumsOf; eval.ScoreSums then gives ScoreConditions'
//     scores bit for bit).
//
// So the responses are read once per fold for the training and validation
// trials, once more for the validation trials and once for the test trials,
// instead of once per model for each, with the numbers of units that each
// read the responses themselves, bit for bit
// (TestRunFoldUnitMatchesReference).
type Fold struct {
	p    *Prepared
	Sets [3][]int

	trainOnce, valOnce, fitOnce, testOnce, baseOnce sync.Once
	train, val, fit                                 *condstats.Stats
	test                                            *eval.HeldOutSums
	base                                            *Prepared
}

// NewFold returns fold sets = (train, validation, test) of p, as Folds
// returns them; nothing is computed yet.
func NewFold(p *Prepared, sets [3][]int) *Fold {
	return &Fold{p: p, Sets: sets}
}

func (f *Fold) trainStats() *condstats.Stats {
	f.trainOnce.Do(func() { f.train = condstats.New(f.p.Rec.Y, f.p.Cond, f.Sets[0], f.p.NBins) })
	return f.train
}

func (f *Fold) valStats() *condstats.Stats {
	f.valOnce.Do(func() { f.val = condstats.New(f.p.Rec.Y, f.p.Cond, f.Sets[1], f.p.NBins) })
	return f.val
}

// fitStats are the statistics of the training trials followed by the
// validation trials.
func (f *Fold) fitStats() *condstats.Stats {
	f.fitOnce.Do(func() {
		tr := f.trainStats()
		st := &condstats.Stats{B: tr.B, N: tr.N, Count: slices.Clone(tr.Count), Sum: slices.Clone(tr.Sum), SumSq: slices.Clone(tr.SumSq)}
		extendStats(st, f.p.Rec.Y, f.p.Cond, f.Sets[1])
		f.fit = st
	})
	return f.fit
}

func (f *Fold) testSums() *eval.HeldOutSums {
	f.testOnce.Do(func() {
		f.test = eval.HeldOutSumsOf(f.p.Rec.Y.Data, f.p.Neurons(), f.Sets[2], f.p.Cond, f.p.NBins)
	})
	return f.test
}

// extendStats adds the listed trials to st in the arithmetic of
// condstats.New (x = float64(y); Sum += x; SumSq += x*x), each element
// receiving the trials in the order listed, so that the statistics of a
// list continued with another equal those of the joined list bit for bit.
// Neuron ranges run in parallel (the result does not depend on how many).
func extendStats(st *condstats.Stats, y *format.Matrix, cond, trials []int) {
	N := st.N
	for _, t := range trials {
		st.Count[cond[t]]++
	}
	workers := runtime.GOMAXPROCS(0)
	if len(trials)*N < 1<<20 || N < 2*workers {
		workers = 1
	}
	chunk := (N + workers - 1) / workers
	var g format.GuardGroup
	for lo := 0; lo < N; lo += chunk {
		hi := min(lo+chunk, N)
		g.Go(func() {
			for _, t := range trials {
				b := cond[t]
				row := y.Data[t*N+lo : t*N+hi]
				sum := st.Sum[b*N+lo : b*N+hi]
				sq := st.SumSq[b*N+lo : b*N+hi]
				for n, v := range row {
					x := float64(v)
					sum[n] += x
					sq[n] += x * x
				}
			}
		})
	}
	if err := g.Wait(); err != nil {
		panic(err) // a *format.FaultError; the caller's format.Guard returns it
	}
}

// baselineSplit is the split a baseline fits: the training and validation
// trials together (the validation part empty), the test trials held out,
// z-scored from the statistics of the joined trials, as
// p.WithSplit(append(train, val...), nil, test) makes it. The
// normaliser of the joined statistics alone equals that of the joined and
// the (empty) validation statistics: an empty part adds nothing to any
// sum.
func (f *Fold) baselineSplit() *Prepared {
	f.baseOnce.Do(func() {
		joined := append(slices.Clone(f.Sets[0]), f.Sets[1]...)
		f.base = f.p.withSplitStats(joined, nil, f.Sets[2], f.fitStats(), nil)
	})
	return f.base
}

// withSplitStats is WithSplit with the statistics of train and val given
// (they must be those of the trials listed, as TrainStats and ValStats
// would compute them; valSt may be nil when val is empty, and is then
// computed on first use).
func (p *Prepared) withSplitStats(train, val, test []int, trainSt, valSt *condstats.Stats) *Prepared {
	q := *p
	q.Train, q.Val, q.Test = train, val, test
	q.trainSt, q.valSt = trainSt, valSt
	q.Norm = nil
	if p.Cfg.Split.ZScore {
		if valSt == nil {
			q.Norm = condstats.NormalizerFromStats(trainSt)
		} else {
			q.Norm = condstats.NormalizerFromStats(trainSt, valSt)
		}
	}
	return &q
}
