// Package runfolder is the on-disk format of stria's run folders (written
// by stria fit): every file of them is written and read back here, and
// nowhere else. It also holds the machinery that the comparison folders
// (sub-package comparefolder) and acuity folders (sub-package acuityfolder)
// share with run folders: the atomic writer and CSV/JSON helpers
// (atomic.go), the completion marker and folder kinds (complete.go), the
// writer's lock and Empty (lock.go), resume state and fingerprints.
//
// Conventions (of all three formats):
//
//   - Every file is written atomically by WriteFile: into a temporary file
//     in the same folder, synced, given mode 0644 and renamed over the
//     final name, so a reader sees the old file or the whole new one and a
//     crash leaves no partial output. Folders are created with mode 0755.
//   - Tables are CSV through encoding/csv (RFC 4180 quoting: a neuron or
//     model name may hold commas, quotes, newlines or any UTF-8), with a
//     header row and "\n" line ends. Numbers are written with strconv:
//     scores with 8 significant digits, fold averages with the shortest
//     form that reads back exactly; NaN is written "NaN". Large tables
//     (one row per neuron, or per model, fold and neuron) go through
//     WriteCSVRows: blocks of rows formatted on all cores, written in
//     order, the bytes of one csv.Writer on any number of cores.
//   - JSON files are indented with two spaces; a Num that is NaN or
//     infinite is written null and read back as NaN.
//   - A finished fit or comparison writes complete.json LAST. Readers of a
//     finished folder (LoadModel, Open) refuse a folder without it, naming
//     the folder. Starting a fit or a comparison (Begin) removes an old
//     marker first.
//   - One writer per folder: AcquireLock creates .stria-lock (pid, host,
//     start time, command) with O_EXCL before anything is written; a
//     second writer gets ErrLocked naming the first; a lock of a process
//     that has ended on this host is taken over with a note. Output is
//     written in place (no staging folder): resume_state.gob must stay
//     where an interrupted fit left it, and complete.json tells a
//     finished folder from an unfinished one. RemoveStaleTemps clears the
//     temporary files of a killed write; CheckWritable probes an output
//     path before long work; Empty (an explicit overwrite) deletes only
//     names stria writes.
//   - A comparison unit's result (FoldResult) carries a Fingerprint: the
//     settings its numbers depend on and the data files' identity;
//     Fingerprint.Mismatch says what differs.
//   - Times (model.json's created, complete.json's finished) are the only
//     fields that differ between two writes of the same results; the
//     round-trip tests compare everything else byte for byte.
//   - Neurons are numbered from 0 in every file, in the recording's column
//     order; folds are numbered from 1.
package runfolder
