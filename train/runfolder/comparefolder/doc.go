// Package comparefolder is the on-disk format of stria's comparison
// folders (written by stria compare and stria gather, default location
// stria-out/compare): fold_scores.csv, fold_averages.csv,
// model_summary.csv, model_pairs.csv, comparison.json,
// tuning_descriptors.csv, tuning_curves/, fold_results/ (one FoldResult
// per array-task unit) and, for several recordings, per_recording.csv,
// pooled_summary.csv and pooled_pairs.csv. Every file of them is written
// and read back here, and nowhere else.
//
// Conventions are those of package runfolder, whose atomic writer, CSV
// and JSON helpers, completion marker and lock this package uses: files
// are written atomically, tables are CSV through encoding/csv with a
// header row, scores carry 8 significant digits and fold averages the
// shortest exact form, NaN is written "NaN" (null in JSON), neurons are
// numbered from 0 in the recording's column order and folds from 1.
// The names a comparison folder holds at its top level are also known to
// runfolder (Empty deletes only those); a test keeps both in step.
package comparefolder
