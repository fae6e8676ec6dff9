// Package acuityfolder is the on-disk format of stria's acuity folders
// (written by stria acuity, default location stria-out/acuity):
// acuity.json, information_pairs.csv, information_vs_size.csv,
// information_subsets.csv, decoding_summary.csv, decoding_vs_size.csv and
// confusion.csv, beside settings.yaml, figures/, report.html and
// complete.json. Every file of them is written and read back here, and
// nowhere else.
//
// Conventions are those of package runfolder, whose atomic writer, CSV
// and JSON helpers and completion marker this package uses: files are
// written atomically, complete.json last; tables are CSV through
// encoding/csv with a header row; numbers are written in the shortest
// form that reads back exactly; an infinite or NaN value in acuity.json
// is written as InfNum says.
package acuityfolder
