package train

import (
	"context"
	"errors"
	"github.com/strialab/stria/train/settings"
	"math"
	"math/rand/v2"
	"runtime/debug"
	"slices"

	"github.com/strialab/stria/data/condstats"
	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/nn"
	"github.com/strialab/stria/train/projection"
)

// EpochLog is one line of the training log.
type EpochLog struct {
	Epoch     int
	TrainLoss float64 // data loss on the training trials (trial-level units), penalty excluded
	ValLoss   float64 // the same loss on the validation trials
	ValR2     float64 // median over neurons of the trial-level R^2 on the validation trials
	Seconds   float64 // wall time since the start of training
}

// Hooks lets the caller watch and checkpoint a fit. Any field may be nil.
type Hooks struct {
	// OnEpoch is called after every epoch.
	OnEpoch func(EpochLog)
	// Checkpoint is called every train.checkpoint_every epochs and when
	// the context is cancelled. The Checkpoint shares the trainer's
	// buffers: it is valid only during the call (write it out, or copy
	// what you keep); after a cancellation training does not continue, so
	// that last one stays valid.
	Checkpoint func(*Checkpoint) error
	// TempDir, when not "", is an existing folder (the run folder) where
	// a large fit keeps the parameters of its best epoch in a hidden
	// temporary file (".stria-best.tmp*", matched by
	// runfolder.RemoveStaleTemps) instead of in memory: 92 MB at 24,000
	// neurons. The file is removed before Fit returns, also on an error or
	// an interruption; the results do not change.
	TempDir string
	// CurvesOnly says that the caller reads only Fitted.Curves (the
	// per-bin predictions), as a comparison's fold does: the projected
	// MSE solver with model.readout_l2 auto then computes no readout
	// weights (N x F values) and returns a Net whose readout is that of
	// one neuron, zero. The curves are the same bit for bit.
	CurvesOnly bool
}

// Checkpoint is the whole training state, enough to continue a fit with
// identical results.
type Checkpoint struct {
	Epoch     int // epochs completed
	Params    []float64
	M, V      []float64
	T         int
	Best      []float64
	BestVal   float64
	BestEpoch int
	Since     int // epochs since the best
	RNG       []byte
	// SolverState is the solver's own state (the quasi-Newton memory of
	// the projected solvers; nil for Adam).
	SolverState []float64
	Log         []EpochLog
	// Config is the resolved config the fit was started with; the caller
	// sets it and checks it on resume.
	Config []byte
	// Files are the recording's files the fit was started on (with their
	// content hashes); the caller sets them and checks them on resume.
	Files []format.FileID
}

// ErrInterrupted is returned (wrapped) when the context is cancelled; a
// checkpoint has been handed to Hooks.Checkpoint first.
var ErrInterrupted = errors.New("training interrupted")

// Fitted is a trained encoder.
type Fitted struct {
	Net *nn.Net
	// Solver is the solver that ran (never SolverAuto).
	Solver settings.Solver
	// ReadoutL2 is the readout penalty of each neuron when it was chosen
	// from the data (model.readout_l2: auto on the projected solver); nil
	// when the config's number was used throughout.
	ReadoutL2 []float64
	Log       []EpochLog
	BestEpoch int
	// Stop says why training ended: "patience" or "max_epochs".
	Stop string
	// Curves, when not nil, is the net's prediction for every bin
	// (nbins x N, in the units the net was trained in), which a solver
	// could compute more cheaply than a forward pass.
	Curves []float64
	// Readout, when not nil, holds the readout weights in factored form
	// (projection.Readout: per-neuron coefficients times a basis all
	// neurons share), and they are not in Net (its ReadW is zero). A fit
	// from Parts leaves them there, so that a million neurons' weights
	// (3.8 GB) are never held or written. Net then has a single neuron
	// (only its filters are used) and Bias holds the readout bias of
	// every neuron. Use ReadoutWeights and ReadoutBias.
	Readout *projection.Readout
	Bias    []float64
}

// ReadoutBias returns the readout bias of every neuron.
func (f *Fitted) ReadoutBias() []float64 {
	if f.Readout != nil {
		return f.Bias
	}
	return f.Net.ReadB()
}

// ReadoutWeights writes the readout weights of neurons [n0, n1) into dst
// ((n1-n0) x features, the layout of the net's ReadW).
func (f *Fitted) ReadoutWeights(dst []float64, n0, n1 int) {
	if f.Readout != nil {
		f.Readout.Weights(dst, n0, n1)
		return
	}
	F := f.Net.Features()
	copy(dst, f.Net.ReadW()[n0*F:n1*F])
}

// rowSet is a set of training rows: model inputs, targets and row weights.
// On one-hot input a row is a condition (target the condition mean, weight
// N_b); otherwise a row is a trial.
type rowSet struct {
	x      []float64 // rows x B
	target []float64 // rows x N
	weight []float64 // rows, or nil for all 1
	rows   int
	// within is sum over trials of (y - ybar_b)^2 summed over neurons: added
	// to the weighted condition-level MSE it gives the trial-level sum
	// (eval/methods.md §8).
	within float64
	// trials is the number of trials the rows stand for.
	trials int
	// ssTot is, per neuron, sum over trials of (y - mean y)^2.
	ssTot []float64
	// withinN is, per neuron, the within-condition sum of squares
	// sum over trials of (y - ybar_b)^2 (condition rows only): the
	// trial-level residual sum of squares of a prediction f is withinN +
	// sum_b N_b (f_b - ybar_b)^2.
	withinN []float64
	// scratch marks rows whose targets are refilled before every use (the
	// trainer's trial batch): the loss gradient overwrites the targets
	// instead of taking a buffer of its own.
	scratch bool
}

// condRows builds the condition-level rows of a trial set from its
// per-condition statistics, in the trainer's (possibly z-scored) units.
func condRows(p *Prepared, st *condstats.Stats) *rowSet {
	b, n := p.NBins, p.Neurons()
	ntrials := 0
	for _, k := range st.Count {
		ntrials += k
	}
	rs := &rowSet{trials: ntrials}
	var keep []int
	for c := 0; c < b; c++ {
		if st.Count[c] > 0 {
			keep = append(keep, c)
		}
	}
	rs.rows = len(keep)
	rs.x = make([]float64, rs.rows*b)
	rs.target = make([]float64, rs.rows*n)
	rs.weight = make([]float64, rs.rows)
	rs.withinN = make([]float64, n)
	rs.ssTot = make([]float64, n)
	grand := make([]float64, n)
	mu, inv := make([]float64, n), make([]float64, n)
	for j := range mu {
		mu[j], inv[j] = p.Norm.Affine(j)
	}
	for r, c := range keep {
		rs.x[r*b+c] = 1
		cnt := float64(st.Count[c])
		rs.weight[r] = cnt
		sum := st.Sum[c*n : (c+1)*n]
		sq := st.SumSq[c*n : (c+1)*n]
		tg := rs.target[r*n : (r+1)*n]
		for j := range tg {
			// Sums of z = (y - mu) * inv over the condition's trials.
			zs := (sum[j] - cnt*mu[j]) * inv[j]
			zq := (sq[j] - 2*mu[j]*sum[j] + cnt*mu[j]*mu[j]) * inv[j] * inv[j]
			tg[j] = zs / cnt
			rs.within += zq - zs*tg[j]
			rs.withinN[j] += zq - zs*tg[j]
			rs.ssTot[j] += zq
			grand[j] += zs
		}
	}
	for j := range grand {
		rs.ssTot[j] -= grand[j] * grand[j] / float64(ntrials)
	}
	return rs
}

// trialRows fills rs with the given trials (rs must have room), in the
// trainer's units.
func trialRows(rs *rowSet, p *Prepared, trials []int) {
	b, n := p.NBins, p.Neurons()
	rs.rows = len(trials)
	for i, t := range trials {
		p.encode(rs.x[i*b:(i+1)*b], t)
		p.Norm.ApplyRow(rs.target[i*n:(i+1)*n], p.Rec.Y.Row(t))
	}
}

// ssTotOf returns per-neuron total sums of squares over trials, in the
// trainer's units.
func ssTotOf(p *Prepared, st *condstats.Stats) []float64 {
	trials := 0
	for _, k := range st.Count {
		trials += k
	}
	n := p.Neurons()
	tot := make([]float64, n)
	grand := make([]float64, n)
	for c := 0; c < p.NBins; c++ {
		for j := 0; j < n; j++ {
			tot[j] += st.SumSq[c*n+j]
			grand[j] += st.Sum[c*n+j]
		}
	}
	for j := range tot {
		_, inv := p.Norm.Affine(j)
		tot[j] = (tot[j] - grand[j]*grand[j]/float64(trials)) * inv * inv
	}
	return tot
}

// trainer holds the state of one fit.
type trainer struct {
	p      *Prepared
	cfg    *settings.Config
	net    *nn.Net
	work   *nn.Work
	rng    *rand.Rand
	pcg    *rand.PCG
	poiss  bool
	chunk  int
	l2     float64   // readout penalty per neuron weight: lambda/N
	dpred  []float64 // loss gradient of condition rows (rows x N), grown on demand
	batch  *rowSet   // scratch rows for trial-level work
	trainC *rowSet   // condition rows of the training trials (one-hot)
	valC   *rowSet   // condition rows of the validation trials (one-hot)
	valTot []float64
	ssRes  []float64
	r2     []float64
	// excluded are the neurons left out of training and scoring.
	excluded []int
	// gradScale turns gradients of means over all neurons into gradients
	// of means over the trained ones.
	gradScale float64
}

// chunkRows bounds the rows of one forward pass on trial-level data: a
// mini-batch larger than this is passed in pieces whose gradients add up.
// Each of the trainer's row buffers (predictions before and after the
// output nonlinearity, one buffer when it is the identity; the targets,
// which the loss gradient overwrites) holds chunkRows x N values: 12 MB
// each at 24,000 neurons.
const chunkRows = 64

func newTrainer(p *Prepared, net *nn.Net) *trainer {
	cfg := p.Cfg
	tr := &trainer{p: p, cfg: cfg, net: net, poiss: cfg.Model.Loss == settings.Poisson, excluded: p.Report.Constant}
	// The losses are means over the neurons that train: the penalty per
	// weight and the gradient scale do not change when excluded neurons
	// are added (Adam's epsilon would otherwise make them matter).
	trained := p.Neurons() - len(tr.excluded)
	tr.gradScale = float64(p.Neurons()) / float64(max(trained, 1))
	tr.l2 = cfg.Model.ReadoutL2.Value / float64(max(trained, 1))
	tc := cfg.Train
	tr.pcg = rand.NewPCG(cfg.Seed, 0x5eed)
	tr.rng = rand.New(tr.pcg)
	tr.chunk = chunkRows
	rows := max(tr.chunk, p.NBins)
	tr.work = net.NewWork(rows)
	n := p.Neurons()
	if p.Soft() || tc.BatchSize > 0 {
		tr.batch = &rowSet{x: make([]float64, tr.chunk*p.NBins), target: make([]float64, tr.chunk*n), scratch: true}
	}
	if !p.Soft() {
		if tc.BatchSize == 0 {
			// Full batch on one-hot input: one step on the condition rows.
			tr.trainC = condRows(p, p.TrainStats())
			tr.dpred = make([]float64, tr.trainC.rows*n)
		}
		tr.valC = condRows(p, p.ValStats())
		tr.valTot = tr.valC.ssTot
	} else {
		tr.valTot = ssTotOf(p, p.ValStats())
	}
	tr.ssRes = make([]float64, n)
	tr.r2 = make([]float64, n)
	return tr
}

// lossGrad computes the data loss of rs and, if grad, adds its gradient
// scaled by scale into the net's gradients. It returns the unnormalised
// trial-level loss sum (sum over trials and neurons) so that chunks add up.
// If ssRes is not nil it accumulates the per-neuron residual sum of squares.
// With grad on scratch rows (rowSet.scratch) the targets are overwritten.
func (tr *trainer) lossGrad(rs *rowSet, grad bool, scale float64, ssRes []float64) float64 {
	n := tr.p.Neurons()
	pred := tr.net.Forward(tr.work, rs.x, rs.rows)
	if ssRes != nil {
		tr.addSSRes(ssRes, rs, pred)
	}
	var l float64
	var dp []float64 // nil: the loss alone
	if grad {
		dp = tr.gradBuf(rs)
	}
	w := rs.weight
	if tr.poiss {
		l = nn.Poisson(dp, pred[:rs.rows*n], rs.target[:rs.rows*n], w, rs.rows, n)
	} else {
		l = nn.MSE(dp, pred[:rs.rows*n], rs.target[:rs.rows*n], w, rs.rows, n)
	}
	scale *= tr.gradScale
	wsum := float64(rs.rows)
	if w != nil {
		wsum = 0
		for _, v := range w {
			wsum += v
		}
	}
	total := l * wsum * float64(n)
	if !tr.poiss && w != nil {
		total += rs.within
	}
	if grad {
		// Excluded neurons are not trained: no gradient reaches their
		// readout (which stays at zero weights and their mean) or the
		// filters.
		for _, j := range tr.excluded {
			for r := 0; r < rs.rows; r++ {
				dp[r*n+j] = 0
			}
		}
		if scale != 1 {
			for i := range dp {
				dp[i] *= scale
			}
		}
		tr.net.Backward(tr.work, dp, rs.rows)
	}
	return total
}

// gradBuf returns the buffer (rs.rows x N) that receives the loss gradient
// of rs: the targets themselves on scratch rows (nn.MSE and nn.Poisson
// allow dst to be target), otherwise tr.dpred.
func (tr *trainer) gradBuf(rs *rowSet) []float64 {
	m := rs.rows * tr.p.Neurons()
	if rs.scratch {
		return rs.target[:m]
	}
	if len(tr.dpred) < m {
		tr.dpred = make([]float64, m)
	}
	return tr.dpred[:m]
}

// addSSRes adds the trial-level residual sum of squares of each neuron.
// Condition rows (all of a set in one call) add sum_t (y_t - f_b)^2 =
// withinN + sum_b N_b (f_b - ybar_b)^2.
func (tr *trainer) addSSRes(ss []float64, rs *rowSet, pred []float64) {
	n := tr.p.Neurons()
	if rs.weight != nil {
		for j, w := range rs.withinN {
			ss[j] += w
		}
	}
	for r := 0; r < rs.rows; r++ {
		f := pred[r*n : (r+1)*n]
		y := rs.target[r*n : (r+1)*n]
		if rs.weight != nil {
			cnt := rs.weight[r]
			for j := range f {
				d := y[j] - f[j]
				ss[j] += cnt * d * d
			}
			continue
		}
		for j := range f {
			d := y[j] - f[j]
			ss[j] += d * d
		}
	}
}

// penalty adds the readout L2 gradient and returns the penalty.
func (tr *trainer) penalty(grad bool) float64 {
	if tr.l2 == 0 {
		return 0
	}
	w := tr.net.ReadW()
	var s float64
	for _, v := range w {
		s += v * v
	}
	if grad {
		g := tr.net.ReadWGrad()
		for i, v := range w {
			g[i] += tr.l2 * v
		}
	}
	return 0.5 * tr.l2 * s
}

// sweep runs the data loss (and gradient, scaled to the mean over all the
// trials) over a set of trials in chunks; it returns the mean trial-level
// loss per trial and neuron.
func (tr *trainer) sweep(trials []int, grad bool, ssRes []float64) float64 {
	n := float64(tr.p.Neurons())
	T := float64(len(trials))
	var total float64
	for lo := 0; lo < len(trials); lo += tr.chunk {
		hi := min(lo+tr.chunk, len(trials))
		trialRows(tr.batch, tr.p, trials[lo:hi])
		total += tr.lossGrad(tr.batch, grad, float64(hi-lo)/T, ssRes)
	}
	return total / (T * n)
}

// evalVal returns the validation loss and the median validation R^2.
func (tr *trainer) evalVal() (float64, float64) {
	clear(tr.ssRes)
	var loss float64
	if tr.valC != nil {
		loss = tr.lossGrad(tr.valC, false, 1, tr.ssRes) / (float64(tr.valC.trials) * float64(tr.p.Neurons()))
	} else {
		loss = tr.sweep(tr.p.Val, false, tr.ssRes)
	}
	k := 0
	for j, ss := range tr.ssRes {
		if tr.valTot[j] > 0 {
			tr.r2[k] = 1 - ss/tr.valTot[j]
			k++
		}
	}
	return loss, median(tr.r2[:k])
}

func (tr *trainer) Name() string         { return "adam" }
func (tr *trainer) Trainable() []float64 { return tr.net.Params }
func (tr *trainer) Begin() error         { return nil }
func (tr *trainer) Random() *rand.PCG    { return tr.pcg }

// scratch lends the epoch loop the gradients, which every step zeroes
// before use (see scratcher).
func (tr *trainer) scratch() []float64 { return tr.net.Grads }

func (tr *trainer) Validate(int) (float64, float64, error) {
	l, r2 := tr.evalVal()
	return l, r2, nil
}

// epoch runs one epoch of training (one full-batch step, or one step per
// mini-batch) and returns the training loss.
func (tr *trainer) Epoch(opt *nn.Adam) float64 {
	p, tc := tr.p, tr.cfg.Train
	n := float64(p.Neurons())
	if tc.BatchSize == 0 {
		tr.net.ZeroGrad()
		var loss float64
		if tr.trainC != nil {
			loss = tr.lossGrad(tr.trainC, true, 1, nil) / (float64(tr.trainC.trials) * n)
		} else {
			loss = tr.sweep(p.Train, true, nil)
		}
		tr.penalty(true)
		opt.Step(tr.net.Params, tr.net.Grads)
		return loss
	}
	order := slices.Clone(p.Train)
	tr.rng.Shuffle(len(order), func(i, j int) { order[i], order[j] = order[j], order[i] })
	var total float64
	for lo := 0; lo < len(order); lo += tc.BatchSize {
		hi := min(lo+tc.BatchSize, len(order))
		tr.net.ZeroGrad()
		// The batch's mean gradient, in pieces of at most chunkRows trials.
		for clo := lo; clo < hi; clo += tr.chunk {
			chi := min(clo+tr.chunk, hi)
			trialRows(tr.batch, p, order[clo:chi])
			total += tr.lossGrad(tr.batch, true, float64(chi-clo)/float64(hi-lo), nil)
		}
		tr.penalty(true)
		opt.Step(tr.net.Params, tr.net.Grads)
	}
	return total / (float64(len(order)) * n)
}

// Fit trains the encoder the config describes on the prepared recording.
// With resume not nil, training continues from that checkpoint. The context
// stops training between epochs; then a checkpoint is handed to hooks and
// ErrInterrupted is returned.
//
// Every read of the recording runs under format.Guard: a mapped responses
// file truncated during the fit gives a *format.FaultError naming it, not a
// crash.
func Fit(ctx context.Context, p *Prepared, hooks Hooks, resume *Checkpoint) (f *Fitted, err error) {
	if gerr := format.Guard(func() { f, err = fit(ctx, p, hooks, resume) }); gerr != nil {
		return nil, gerr
	}
	return f, err
}

func fit(ctx context.Context, p *Prepared, hooks Hooks, resume *Checkpoint) (*Fitted, error) {
	cfg := p.Cfg
	if p.Parts != nil {
		// PrepareParts accepted the config: the projected MSE solver.
		return fitProjected(ctx, p, hooks, resume)
	}
	if cfg.SolverToRun() == settings.SolverProjected {
		if cfg.Model.Loss == settings.Poisson {
			return fitPoissonProjected(ctx, p, hooks, resume)
		}
		return fitProjected(ctx, p, hooks, resume)
	}
	net := nn.NewNet(cfg.Shape(p.NBins, p.Neurons()))
	net.Init(rand.New(rand.NewPCG(cfg.Seed, 0x1417)))
	initReadout(p, net)
	// Neurons excluded from scoring (constant ones) predict their mean and
	// take no part in training.
	rw, nf := net.ReadW(), net.Features()
	for _, j := range p.Report.Constant {
		clear(rw[j*nf : (j+1)*nf])
	}
	tr := newTrainer(p, net)
	if len(net.Params) >= largeNet {
		// The trainer has taken what it needs from the per-condition
		// statistics of p (4 B x N values, 46 MB at 24,000 neurons and
		// 60 bins): drop them (a later use computes them again) and give
		// their memory, and what preparing left, back to the system
		// before the optimiser's moments are allocated and touched.
		p.trainSt, p.valSt = nil, nil
		debug.FreeOSMemory()
	}
	res, err := runEpochs(ctx, tr, cfg.Train, hooks, resume)
	if err != nil {
		return nil, err
	}
	if len(net.Params) >= largeNet {
		// The gradients, the optimiser's moments and the trainer's row
		// buffers (three parameter-sized arrays and more) are garbage now:
		// give them back to the system, so that scoring and writing, which
		// may allocate up to the collector's goal (twice the live heap)
		// before the next collection, stay below the peak of training.
		net.ReleaseGrads()
		debug.FreeOSMemory()
	}
	return &Fitted{Net: net, Solver: settings.SolverAdam, Log: res.log, BestEpoch: res.bestEpoch, Stop: res.stop}, nil
}

// largeNet is the number of parameters (8 M: 64 MB) from which a fit
// collects its garbage before returning.
const largeNet = 1 << 23

// initReadout sets the readout bias to each neuron's mean training
// response (through the inverse of the output nonlinearity), so that
// training starts from the grand-mean model rather than from zero.
func initReadout(p *Prepared, net *nn.Net) {
	n := p.Neurons()
	mean := make([]float64, n)
	for _, t := range p.Train {
		for j, v := range p.Rec.Y.Row(t) {
			mean[j] += float64(v)
		}
	}
	b := net.ReadB()
	for j := range mean {
		mu, inv := p.Norm.Affine(j)
		m := (mean[j]/float64(len(p.Train)) - mu) * inv
		switch net.Output {
		case nn.Exp:
			m = math.Log(math.Max(m, 1e-3))
		case nn.Softplus:
			m = math.Max(m, 1e-3)
			m = m + math.Log(-math.Expm1(-m)) // inverse softplus
		}
		b[j] = m
	}
}

// median returns the median of x (x is reordered); NaN if empty.
func median(x []float64) float64 { return eval.Median(x) }
