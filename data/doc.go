// Package data loads, checks and organises the recordings stria fits: a
// trials x neurons response matrix, one stimulus value per trial, and
// optional condition and block ids.
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
//   - A response matrix of more than 64 MB read from a little-endian float32
//     .npy is mapped, not copied (ReadNPY). Every pass over recording values
//     runs under Guard or a GuardGroup, so that a file truncated meanwhile
//     gives a *FaultError naming it instead of a crash; data's own passes
//     (CheckWith, NewCondStats, the hashing) do so already. Recording.Files
//     records the inputs as Load found them (FileID), and Recording.Unchanged
//     refuses, at the end of a fit, a file modified while stria read it.
//   - A recording too large for memory is passed over by blocks of rows
//     (NPYStream, AccumulateParts), keeping only per-part sufficient
//     statistics (PartStats, B x N), summed in ascending trial order
//     relative to each part's first trial; AccumulatePartsMatrix gives the
//     same numbers from a matrix in memory.
//   - Randomness comes from a seed (uint64) turned into a PCG source of
//     math/rand/v2; no global random source is used, so results are the same
//     for the same seed on every machine.
//
// Stimulus axis: equal-width bins (Axis). When the stimulus takes a few
// discrete values, the bins should be centred on them (Axis.CenterOnStimulus),
// or every condition's value, and so every preferred stimulus, is off by the
// distance from the values to the bin centres.
//
// File formats: .npy (NEP 1, "A Simple File Format for NumPy Arrays",
// versions 1.0, 2.0 and 3.0), .npz (a zip archive of .npy files) and
// delimited text with a header row (.csv with commas, .tsv with tabs).
package data
