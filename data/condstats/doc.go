// Package condstats accumulates the per-condition statistics of a response
// matrix that stria's scores, noise ceilings and normalisation are built
// on: Stats (counts, sums and sums of squares per condition and neuron),
// PartStats (the same per part of a split, in one pass over a file too
// large for memory) and the Normalizer (per-neuron mean and scale fitted on
// training trials).
//
// Conventions, stated once:
//
//   - Response matrices are format.Matrix values (data.Matrix is the same
//     type): Rows = trials, Cols = neurons, element (t, n) is
//     Data[t*Cols+n]. Trials, neurons and conditions are numbered from 0.
//   - Per-condition arrays are B x N, row-major: condition b, neuron n is
//     element b*N+n. Accumulations are done in float64, in ascending trial
//     order (for PartStats relative to each part's first trial), so the
//     numbers do not depend on the number of cores.
//   - A slice written by a function is its first argument and is called
//     dst; a nil dst is allocated.
//   - Wrong shapes or indices passed by a programmer panic with a message
//     starting "data: ". Non-finite or overflowing values read from a file
//     give a returned error naming the file, trial and neuron.
//   - A recording too large for memory is passed over by blocks of rows
//     (format.NPYStream, AccumulateParts), keeping only per-part sufficient
//     statistics (PartStats); AccumulatePartsMatrix gives the same numbers
//     from a matrix in memory. Passes over a mapped matrix run under
//     format.Guard, so a file truncated meanwhile gives a
//     *format.FaultError.
package condstats
