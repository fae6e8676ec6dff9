// Package data loads, checks and organises the recordings stria fits: a
// trials x neurons response matrix, one stimulus value per trial, and
// optional condition and block ids and per-trial state covariates (their
// values are checked by the fit, eval/state).
//
// Conventions, stated once:
//
//   - Response matrices are [Matrix] values: dense, row-major float32 with
//     Rows = trials and Cols = neurons. Element (t, n) is Data[t*Cols+n].
//     Accumulations (sums, means, variances) are done in float64.
//   - Trials, neurons, conditions (stimulus bins) and blocks are numbered
//     from 0. Every message that names a trial says "(0-based)" so that a
//     user coming from a 1-based tool is not misled.
//   - A slice written by a function is its first argument and is called dst;
//     a nil dst is allocated.
//   - Shapes of flat slices are given as "B x N", row-major: condition b,
//     neuron n is element b*N+n.
//   - Wrong shapes or indices passed by a programmer panic with a message
//     starting "data: ". Anything that comes from outside (files, config
//     values, stimulus values) gives a returned error naming the file, field,
//     line, trial or neuron. User data never causes a panic.
//   - Files are read and written by data/format (.npy, .npz, CSV/TSV);
//     a large .npy response matrix is mapped (format.ReadNPY). Every pass
//     over recording values runs under format.Guard or a
//     format.GuardGroup, so that a file truncated meanwhile gives a
//     *format.FaultError naming it instead of a crash; data's own passes
//     (CheckWith, the hashing) do so already, and so do condstats.New and
//     condstats.AccumulateParts. Recording.Files records the inputs as Load
//     found them (format.FileID), and Recording.Unchanged refuses, at the
//     end of a fit, a file modified while stria read it.
//   - Randomness comes from a seed (uint64) turned into a PCG source of
//     math/rand/v2; no global random source is used, so results are the same
//     for the same seed on every machine.
//
// Stimulus axis: equal-width bins (Axis). When the stimulus takes a few
// discrete values, the bins should be centred on them (Axis.CenterOnStimulus),
// or every condition's value, and so every preferred stimulus, is off by the
// distance from the values to the bin centres.
//
// Matrix is an alias of format.Matrix: the readers of data/format return
// it, and every fitting package names it data.Matrix; the alias spares a
// conversion at each call and a rename in every importer.
//
// Related packages: data/format (file formats and access, imported by
// data), data/condstats (statistics per condition and part, the
// normaliser) and data/synth (synthetic populations, importing data).
package data
