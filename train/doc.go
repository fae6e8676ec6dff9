// Package train fits stria's encoders in memory from the typed config of
// train/settings: preparation of a recording (bins,
// checks, the split, z-scoring), the epoch loop that every solver plugs
// into, the two solvers, and the glue that scores a fit on its test
// trials; Acuity runs stria acuity's analysis (eval/acuity) on compare's
// folds; FitState fits the per-trial state terms (eval/state) around a
// fitted encoder, and RunUnit their variants in a comparison. It reads recordings through package data and writes no files;
// the projected solvers live in train/projection (they read condition
// statistics, not a prepared recording, and plug into this package's
// epoch loop), the on-disk format of run, comparison and acuity folders
// in train/runfolder and its sub-packages, comparisons in train/compare, figures and reports in
// train/export.
//
// Conventions:
//   - Letters: T trials, N neurons, B stimulus bins (conditions), F features
//     of the last conv layer (channels x positions), W training trials.
//   - Matrices are row-major flat slices: predictions per bin are B x N,
//     per trial T x N; responses stay float32 in the recording's units.
//   - Words from the config (loss, output, border, encoding, optimizer,
//     solver) are typed values of train/settings (settings.Loss, ...);
//     code switches on them and never compares strings.
//   - With split.zscore the trainer works in z-scored units
//     (condstats.Normalizer, fitted on the training and validation trials);
//     every prediction handed out of this package is in the recording's
//     units again (Normalizer.InvertRows).
//   - One epoch loop (runEpochs) owns early stopping on the validation
//     loss, divergence, checkpoints, interruption and resume; a solver
//     supplies one epoch and its validation.
//   - Memory of large adam fits (the slow path): the best epoch's
//     parameters go to a temporary file in Hooks.TempDir (over spillParams
//     parameters), the prepared statistics are dropped once the trainer has
//     its rows, and the gradients are released before scoring; the numbers
//     do not change (train/best_test.go).
//   - Same config and seed give the same numbers, whatever the number of
//     cores: parallel kernels split work independently of GOMAXPROCS.
//   - Formulas cite eval/methods.md by section.
//   - A model Streamable accepts (one-hot, squared error, full batch, the
//     projected solver) is prepared by PrepareParts from one pass over the
//     responses (Prepared.Parts, Rec.Y nil when streamed): everything that
//     would read the trials reads the parts' sums instead, and the fitted
//     readout comes back as Fitted.Readout and Bias (eval/methods.md §8).
package train
