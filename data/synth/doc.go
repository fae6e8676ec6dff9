// Package synth makes synthetic populations with a known ground truth: the
// demo's recording, recovery tests and benchmarks.
//
// Conventions, stated once:
//
//   - Population and Bumps return a data.Recording in memory (trials x
//     neurons, 0-based) with its stimulus axis; WriteNPY streams a
//     recording too large for memory straight to a .npy file (data/format
//     layout, written atomically).
//   - Randomness comes from the config's seed (uint64) turned into PCG
//     sources of math/rand/v2; no global random source is used, so the same
//     config gives the same numbers on every machine and for any number of
//     cores.
//   - A config is checked by its Validate method; a bad field gives an
//     error naming it. Generators panic only on a config that fails
//     Validate (a programmer error).
package synth
