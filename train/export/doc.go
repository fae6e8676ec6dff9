// Package export writes the figures of a finished run, comparison or
// acuity folder (SVG and PNG, with the arrays each figure is drawn from
// beside it, in the folder's figures/) and one self-contained HTML report
// of it. Everything it reads comes through train/runfolder's readers,
// which refuse a folder without complete.json; the figures come from
// eval/figure as bytes, and the report embeds the SVG bytes it rendered
// (it never reads a figure back from disk).
//
// Conventions: neurons are numbered from 0 (figure names tuning_n<j>);
// arrays are CSV through runfolder (shortest float form that reads back
// exactly, NaN as NaN) or .npy; everything is read and checked before the
// first file is written, so a refused folder leaves no output; drawing is
// deterministic, so the same folder gives byte-identical SVG files
// wherever it lies. Tuning figures and descriptors place conditions at
// their stimulus values (runfolder.AxisInfo.ConditionValues); figures of
// the ratio scores (fev, cc_norm, spe) draw the reliable neurons only, on
// the fixed range figure.RatioRange, and their captions say how many.
package export
