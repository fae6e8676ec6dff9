// Package runfolder is the on-disk format of stria's run folders (written
// by stria fit) and comparison folders (written by stria compare and
// stria gather): every file of both is written and read back here, and
// nowhere else.
//
// Conventions:
//
//   - Every file is written atomically by WriteFile: into a temporary file
//     in the same folder, synced, given mode 0644 and renamed over the
//     final name, so a reader sees the old file or the whole new one and a
//     crash leaves no partial output. Folders are created with mode 0755.
//   - Tables are CSV through encoding/csv (RFC 4180 quoting: a neuron or
//     model name may hold commas, quotes, newlines or any UTF-8), with a
//     header row and "\n" line ends. Numbers are written with strconv:
//     scores with 8 significant digits, fold averages with the shortest
//     form that reads back exactly; NaN is written "NaN".
//   - JSON files are indented with two spaces; a Num that is NaN or
//     infinite is written null and read back as NaN.
//   - A finished fit or comparison writes complete.json LAST. Readers of a
//     finished folder (LoadModel, Open) refuse a folder without it, naming
//     the folder. Starting a fit or a comparison (Begin) removes an old
//     marker first.
//   - Times (model.json's created, complete.json's finished) are the only
//     fields that differ between two writes of the same results; the
//     round-trip tests compare everything else byte for byte.
//   - Neurons are numbered from 0 in every file, in the recording's column
//     order; folds are numbered from 1.
package runfolder
