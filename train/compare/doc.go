// Package compare plans and runs cross-validated comparisons of encoders
// and per-neuron baselines: it expands the compare section of a config
// (encoder grids, the recordings list) into units — one model on one fold
// of one recording, each with a stable id recording/model/fold<k> — runs
// them with a pool of workers, alone or as one task of a job array, and
// gathers the finished units into the comparison folder that
// train/runfolder writes.
//
// Conventions: models are listed encoders first, baselines last; folds are
// numbered from 0 in code and from 1 in ids and files; array tasks are
// numbered from 1 (task I of N runs the I-th of N runs of consecutive
// units, ordered by recording, fold and model; see Plan.ArrayTask).
// Results do not depend on the number of workers or array tasks: each unit
// is seeded by the config, not by the order it runs in.
//
// Work is shared where the numbers allow it, bit for bit: a recording is
// loaded, checked and hashed once for Check, RunUnits and Gather (the most
// recent ones are kept); the units of a fold share its statistics
// (train.Fold) and run fold by fold; Gather uses the results a run just
// wrote when KeepResults is set. Plan.Timings records the wall time of each
// phase.
//
// Every unit's result records its fingerprint (the settings it depends on,
// see unitSettings, and the recording's file identities with content
// hashes). A finished unit is reused only when its fingerprint matches;
// Check, RunUnits and Gather refuse one that does not with a *StaleError
// naming each difference. Every pass over a recording runs under the data
// package's fault guard, and each result is written only after the
// recording's files are found unchanged.
//
// Scores are judged as in a fit: every fold's noise ceilings are gated at
// scores.ceiling_alpha (AcrossFolds), the ratio scores average over the folds
// where a neuron's ceiling is usable, and their summaries and pair tests
// use the neurons with split-half reliability over all trials >=
// scores.min_reliability (Kept); every summary records the neurons it
// kept.
package compare
