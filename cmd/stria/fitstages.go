package main

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"slices"
	"strings"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/data/condstats"
	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/train"
	"github.com/strialab/stria/train/projection"
	"github.com/strialab/stria/train/runfolder"
	"github.com/strialab/stria/train/settings"
)

// A fit in four stages over a job array (stria help large), where no job
// holds the statistics of all neurons:
//
//  1. stria fit --array-task I --array-task-count N (fitarray.go): the
//     statistics of the task's neurons and their block sums;
//  2. stria gather --filters FOLDER (reduceFit): the block sums of all
//     tasks added in block order, the filters trained on them;
//  3. stria fit --array-task I --array-task-count N --readouts
//     (runFitReadouts): the task's statistics read back, its neurons'
//     readouts solved at the filters and scored;
//  4. stria gather FOLDER (gatherFit, readMerge, prepareMerged): the
//     tasks' readouts and scores joined into the run folder.

// stageHint is the command line of a stage for messages.
func stageHint(dir string, stage int) string {
	switch stage {
	case 1:
		return "stria fit --config CONFIG --out " + dir + " --array-task I --array-task-count N"
	case 2:
		return "stria gather --filters " + dir
	case 3:
		return "stria fit --config CONFIG --out " + dir + " --array-task I --array-task-count N --readouts"
	}
	return "stria gather " + dir
}

// checkTaskStats checks array task i of n's statistics against the
// recording and settings now (fingerprint want, plan, n neurons): its
// fingerprint, range, blocks and trial counts. It returns the description
// read.
func checkTaskStats(dir string, i, n int, want runfolder.Fingerprint, plan condstats.StreamPlan, neurons, trials int, cmd string) (*runfolder.ArrayStats, error) {
	a, _, err := runfolder.ReadArrayStats(dir, i, n, -1)
	file := filepath.Join(runfolder.ArrayTaskDir(dir, i, n), runfolder.FileArrayStats)
	if errors.Is(err, os.ErrNotExist) {
		return nil, fmt.Errorf("%s: array task %d of %d has not written its statistics (no %s): run it first (%s)", cmd, i, n, file, stageHint(dir, 1))
	}
	if err != nil {
		return nil, err
	}
	if diff := want.Mismatch(a.Fingerprint, settings.DiffSettings); len(diff) > 0 {
		return nil, fmt.Errorf("%s: %s was written with other settings or data than the ones now; refusing to mix them (its value -> the value now):\n  %s\nrun that task again (%s)", cmd, file, strings.Join(diff, "\n  "), stageHint(dir, 1))
	}
	n0, n1 := train.NeuronRange(i, n, neurons)
	if a.Neurons != [2]int{n0, n1} || a.TotalNeurons != neurons || a.Trials != trials || a.Blocks != rangeBlocks(n0, n1) {
		return nil, fmt.Errorf("%s: %s holds neurons %d-%d of %d and %d trials, want neurons %d-%d of %d and %d trials; run that task again (%s)",
			cmd, file, a.Neurons[0], a.Neurons[1]-1, a.TotalNeurons, a.Trials, n0, n1-1, neurons, trials, stageHint(dir, 1))
	}
	for k := range runfolder.ArrayParts {
		if !slices.Equal(a.Parts[k].Count, planCounts(plan, k)) {
			return nil, fmt.Errorf("%s: %s: the %s trials per condition differ from the split of these settings; run that task again", cmd, file, []string{"training", "validation", "test", "all"}[k])
		}
	}
	return a, nil
}

// reduceFit is stria gather --filters FOLDER: it checks every task's
// statistics, adds their block sums in block order and trains the
// filters on them, and writes them (with the sums and the training log)
// into the folder's array_tasks/filters. It reads no task's statistics
// of size conditions x neurons.
func reduceFit(ctx context.Context, dir string, stdout io.Writer) error {
	cmd := stageHint(dir, 2)
	n, err := arrayTaskCount(dir, cmd)
	if err != nil {
		return err
	}
	cfg, a1, err := arrayConfig(dir, n)
	if err != nil {
		return err
	}
	if err := checkArrayFit(cfg); err != nil {
		return err
	}
	rec, s, err := data.LoadStream(cfg.Source())
	if err != nil {
		return err
	}
	s.Close()
	_, plan, err := train.PlanParts(cfg, rec, s.Rows())
	if err != nil {
		return err
	}
	want := runfolder.Fingerprint{Settings: a1.Fingerprint.Settings, Files: rec.Files()}
	tc, vc := planCounts(plan, 0), planCounts(plan, 1)
	var blocks []projection.BlockSums
	for i := 1; i <= n; i++ {
		a, err := checkTaskStats(dir, i, n, want, plan, s.Cols(), s.Rows(), cmd)
		if err != nil {
			return err
		}
		b, err := runfolder.ReadArrayBlockSums(dir, a, tc, vc)
		if err != nil {
			return err
		}
		blocks = append(blocks, b...)
	}
	if k := (s.Cols() + projection.SumBlock - 1) / projection.SumBlock; len(blocks) != k {
		return fmt.Errorf("%s: the tasks hold %d blocks of sums, want %d", cmd, len(blocks), k)
	}
	sums := projection.AddBlocks(tc, vc, s.Cols(), blocks)
	lock, note, err := runfolder.AcquireLock(dir, strings.Join(os.Args, " "))
	if err != nil {
		return err
	}
	defer lock.Release()
	if note != "" && stdout != nil {
		fmt.Fprintln(stdout, "note:", note)
	}
	f, err := train.FitFilters(ctx, cfg, sums, train.Hooks{})
	if err != nil {
		return err
	}
	if err := rec.Unchanged(); err != nil {
		return err
	}
	if _, err := runfolder.WriteArrayFilters(dir, runfolder.ArrayFilters{Tasks: n, TotalNeurons: s.Cols(), Trials: s.Rows(), Fingerprint: want}, f, sums); err != nil {
		return err
	}
	if stdout != nil {
		fmt.Fprintf(stdout, "filters trained on the sums of %d neurons from %d array tasks (%d epochs, best %d; %s) into %s\nnext, every task: %s; then: %s\n",
			s.Cols(), n, len(f.Log), f.BestEpoch, f.Stop, runfolder.ArrayFiltersDir(dir), stageHint(dir, 3), stageHint(dir, 4))
	}
	return nil
}

// runFitReadouts is stria fit --array-task I --array-task-count N
// --readouts: the task reads its statistics back and the reduce's
// filters, solves its neurons' readouts, scores them, and writes them
// into its task folder.
func runFitReadouts(cfg *settings.Config, i, n int, stdout io.Writer) error {
	if err := checkArrayFit(cfg); err != nil {
		return err
	}
	dir := cfg.Output
	cmd := fmt.Sprintf("array task %d of %d (--readouts)", i, n)
	cfgYAML, err := cfg.Marshal()
	if err != nil {
		return err
	}
	if err := runfolder.CheckUnlocked(dir); err != nil {
		return err
	}
	filters, err := runfolder.ReadArrayFilters(dir)
	if errors.Is(err, os.ErrNotExist) {
		return fmt.Errorf("%s: the filters have not been trained (no %s): when every task has written its statistics, run %s", cmd, filepath.Join(runfolder.ArrayFiltersDir(dir), runfolder.FileArrayFilters), stageHint(dir, 2))
	}
	if err != nil {
		return err
	}
	rec, s, err := data.LoadStream(cfg.Source())
	if err != nil {
		return err
	}
	s.Close()
	p, plan, err := train.PlanParts(cfg, rec, s.Rows())
	if err != nil {
		return err
	}
	want := runfolder.Fingerprint{Settings: cfgYAML, Files: rec.Files()}
	if diff := want.Mismatch(filters.Fingerprint, settings.DiffSettings); len(diff) > 0 {
		return fmt.Errorf("%s: the filters in %s were trained with other settings or data than the ones now; refusing to mix them (their value -> the value now):\n  %s\nrun every task and the reduce again with the same settings", cmd, runfolder.ArrayFiltersDir(dir), strings.Join(diff, "\n  "))
	}
	if filters.Tasks != n || filters.TotalNeurons != s.Cols() {
		return fmt.Errorf("%s: the filters in %s were trained from %d array tasks over %d neurons, not %d over %d", cmd, runfolder.ArrayFiltersDir(dir), filters.Tasks, filters.TotalNeurons, n, s.Cols())
	}
	if _, err := checkTaskStats(dir, i, n, want, plan, s.Cols(), s.Rows(), cmd); err != nil {
		return err
	}
	parts := make([]*condstats.PartStats, runfolder.ArrayParts)
	for k := range parts {
		if _, parts[k], err = runfolder.ReadArrayStats(dir, i, n, k); err != nil {
			return err
		}
	}
	n0, n1 := train.NeuronRange(i, n, s.Cols())
	var f *train.Fitted
	r := &runfolder.RangeResult{}
	constant := []int{}
	if n1 > n0 {
		if err := p.SetParts(parts); err != nil {
			return err
		}
		var valR2 []float64
		if f, valR2, err = train.FitRange(p, filters.Sums, filters.Conv); err != nil {
			return err
		}
		r = &runfolder.RangeResult{Bias: f.ReadoutBias(), L2: f.ReadoutL2, Reliability: train.Reliability(p), ValR2: valR2}
		r.Scores = train.ScoreFitted(p, f)
		if p.Norm != nil {
			r.NormMean, r.NormScale = p.Norm.Mean, p.Norm.Scale
		}
		for _, j := range p.Report.Constant {
			constant = append(constant, n0+j)
		}
	} else {
		// A task without neurons writes empty arrays.
		net, err := train.FiltersNet(cfg, p.NBins, filters.Conv)
		if err != nil {
			return err
		}
		f = &train.Fitted{Net: net}
		e := []float64{}
		r = &runfolder.RangeResult{Bias: e, Reliability: e, Scores: []eval.Scores{}}
		if cfg.Model.ReadoutL2.Auto {
			r.L2 = e
		}
		if cfg.Split.ZScore {
			r.NormMean, r.NormScale = e, e
		}
		if len(p.Val) > 0 {
			r.ValR2 = e
		}
	}
	a := runfolder.ArrayReadouts{Task: i, Tasks: n, Neurons: [2]int{n0, n1}, Fingerprint: want, Filters: filters.ID, Constant: constant}
	if err := rec.Unchanged(); err != nil {
		return err
	}
	if err := runfolder.WriteArrayReadouts(dir, a, f, r); err != nil {
		return err
	}
	if stdout != nil {
		fmt.Fprintf(stdout, "array task %d of %d: readouts and scores of %s in %s\nwhen every task has run: %s\n",
			i, n, rangeText(n0, n1, n, s.Cols()), runfolder.ArrayTaskDir(dir, i, n), stageHint(dir, 4))
	}
	return nil
}

// readMerge checks that the reduce's filters are there and every task's
// readouts were solved at them, naming the tasks still to run.
func readMerge(cfg *settings.Config, dir string, n int) (*runfolder.Filters, error) {
	cmd := stageHint(dir, 4)
	filters, err := runfolder.ReadArrayFilters(dir)
	if err != nil {
		return nil, err
	}
	if filters.Tasks != n {
		return nil, fmt.Errorf("%s: the filters in %s were trained from %d array tasks, the folder holds %d", cmd, runfolder.ArrayFiltersDir(dir), filters.Tasks, n)
	}
	var missing, stale []string
	for i := 1; i <= n; i++ {
		a, _, err := runfolder.ReadArrayReadouts(dir, i, n)
		switch {
		case errors.Is(err, os.ErrNotExist):
			missing = append(missing, fmt.Sprint(i))
		case err != nil:
			return nil, err
		case a.Filters != filters.ID:
			stale = append(stale, fmt.Sprint(i))
		}
	}
	if len(missing) > 0 || len(stale) > 0 {
		var why []string
		if len(missing) > 0 {
			why = append(why, fmt.Sprintf("array task(s) %s of %d have no readouts (no %s)", strings.Join(missing, ", "), n, runfolder.FileArrayReadouts))
		}
		if len(stale) > 0 {
			why = append(why, fmt.Sprintf("the readouts of array task(s) %s of %d were solved at other filters than those in %s", strings.Join(stale, ", "), n, runfolder.ArrayFiltersDir(dir)))
		}
		return nil, fmt.Errorf("%s: %s: run the readout pass of those tasks (%s; with Slurm: sbatch --array=%s ...), then %s again; or remove %s to fit from the statistics in this one job",
			cmd, strings.Join(why, "; "), stageHint(dir, 3), strings.Join(append(missing, stale...), ","), cmd, runfolder.ArrayFiltersDir(dir))
	}
	return filters, nil
}

// prepareMerged prepares the recording for writing the run folder of a
// fit in stages, and the fit, from the tasks' readouts (checked against
// the data now and the filters): the z-scoring, reliability, constant
// neurons, readouts and scores of every task joined in neuron order, the
// log's best epoch given the median validation R^2 of all neurons.
func prepareMerged(cfg *settings.Config, g *arrayGather, phase func(string)) (*data.Recording, *train.Prepared, *train.Fitted, []eval.Scores, error) {
	dir, n, fl := cfg.Output, g.tasks, g.merge
	cmd := stageHint(dir, 4)
	rec, s, err := data.LoadStream(cfg.Source())
	if err != nil {
		return nil, nil, nil, nil, err
	}
	s.Close()
	p, _, err := train.PlanParts(cfg, rec, s.Rows())
	if err != nil {
		return nil, nil, nil, nil, err
	}
	want := runfolder.Fingerprint{Settings: g.settings, Files: rec.Files()}
	if diff := want.Mismatch(fl.Fingerprint, settings.DiffSettings); len(diff) > 0 {
		return nil, nil, nil, nil, fmt.Errorf("%s: the filters in %s were trained with other settings or data than array task 1 and the files now; refusing to mix them (their value -> the value now):\n  %s", cmd, runfolder.ArrayFiltersDir(dir), strings.Join(diff, "\n  "))
	}
	N := s.Cols()
	if fl.TotalNeurons != N {
		return nil, nil, nil, nil, fmt.Errorf("%s: the filters in %s are of %d neurons, the responses have %d", cmd, runfolder.ArrayFiltersDir(dir), fl.TotalNeurons, N)
	}
	var bias, l2, mean, scale, rel, valR2 []float64
	var scores []eval.Scores
	var constant []int
	files, starts := make([]string, n), make([]int, n+1)
	var basis []byte // the bytes of the first task's readout_basis.npy
	var rank, basisTask int
	for i := 1; i <= n; i++ {
		a, r, err := runfolder.ReadArrayReadouts(dir, i, n)
		if err != nil {
			return nil, nil, nil, nil, err
		}
		file := filepath.Join(runfolder.ArrayTaskDir(dir, i, n), runfolder.FileArrayReadouts)
		if diff := want.Mismatch(a.Fingerprint, settings.DiffSettings); len(diff) > 0 {
			return nil, nil, nil, nil, fmt.Errorf("%s: %s was written with other settings or data than the filters and the files now; refusing to mix them (its value -> the value now):\n  %s\nrun that task's readout pass again (%s)", cmd, file, strings.Join(diff, "\n  "), stageHint(dir, 3))
		}
		if n0, n1 := train.NeuronRange(i, n, N); a.Neurons != [2]int{n0, n1} {
			return nil, nil, nil, nil, fmt.Errorf("%s: %s holds neurons %d-%d, want %d-%d; run that task's readout pass again", cmd, file, a.Neurons[0], a.Neurons[1]-1, n0, n1-1)
		}
		if a.Neurons[1] > a.Neurons[0] && (r.L2 == nil) != !cfg.Model.ReadoutL2.Auto || (r.NormMean == nil) != !cfg.Split.ZScore || (r.ValR2 == nil) != (len(p.Val) == 0) {
			return nil, nil, nil, nil, fmt.Errorf("%s: %s lacks arrays of these settings (penalty, z-scoring or validation R^2); run that task's readout pass again", cmd, file)
		}
		bias, l2, rel, valR2 = append(bias, r.Bias...), append(l2, r.L2...), append(rel, r.Reliability...), append(valR2, r.ValR2...)
		mean, scale = append(mean, r.NormMean...), append(scale, r.NormScale...)
		scores = append(scores, r.Scores...)
		constant = append(constant, a.Constant...)
		files[i-1], starts[i] = runfolder.ArrayReadoutCoef(dir, i, n), a.Neurons[1]
		if a.Rank == 0 {
			continue
		}
		// Every task solved its readout at the same filters and trial
		// counts, so with the same basis, bit for bit: checked, not
		// assumed (a task run by another build could differ).
		b, err := os.ReadFile(runfolder.ArrayReadoutBasis(dir, i, n))
		switch {
		case err != nil:
			return nil, nil, nil, nil, fmt.Errorf("%s: %w; run that task's readout pass again", cmd, err)
		case basis == nil:
			basis, rank, basisTask = b, a.Rank, i
		case a.Rank != rank || !bytes.Equal(b, basis):
			return nil, nil, nil, nil, fmt.Errorf("%s: the readout basis of array task %d differs from that of task %d (solved at the same filters, they must be equal); refusing to mix them: run the readout pass of both again with one stria", cmd, i, basisTask)
		}
	}
	if basis == nil {
		return nil, nil, nil, nil, fmt.Errorf("%s: no array task holds any neurons", cmd)
	}
	var norm *condstats.Normalizer
	if cfg.Split.ZScore {
		norm = &condstats.Normalizer{Mean: mean, Scale: scale}
	}
	if err := p.SetMerged(N, rel, constant, norm); err != nil {
		return nil, nil, nil, nil, err
	}
	net, err := train.FiltersNet(cfg, p.NBins, fl.Conv)
	if err != nil {
		return nil, nil, nil, nil, err
	}
	f := &train.Fitted{Net: net, Solver: settings.SolverProjected, Log: fl.Log, BestEpoch: fl.BestEpoch, Stop: fl.Stop, Bias: bias}
	if cfg.Model.ReadoutL2.Auto {
		f.ReadoutL2 = l2
	}
	bfile := runfolder.ArrayReadoutBasis(dir, basisTask, n)
	br, bc, bv, err := format.ReadNPY64(bytes.NewReader(basis), int64(len(basis)), bfile)
	if err != nil || br != rank || bc != net.Features() {
		return nil, nil, nil, nil, fmt.Errorf("%s: %s is not the %d x %d basis of the readout (%v); run that task's readout pass again", cmd, bfile, rank, net.Features(), err)
	}
	f.Readout = &projection.Readout{Rank: rank, Features: net.Features(), Basis: bv}
	f.Readout.Coef, g.closeRows = runfolder.ReadRows(files, starts, rank, &g.readErr)
	if err := train.MergedLog(f, valR2); err != nil {
		return nil, nil, nil, nil, err
	}
	phase(fmt.Sprintf("read the readouts and scores of %d array tasks", n))
	return rec, p, f, scores, nil
}
