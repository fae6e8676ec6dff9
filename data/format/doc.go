// Package format reads and writes the files stria takes recordings from
// and writes arrays to, and guards the passes over mapped files: .npy (NEP
// 1, "A Simple File Format for NumPy Arrays", versions 1.0, 2.0 and 3.0),
// .npz (a zip archive of .npy files) and delimited text with a header row
// (.csv with commas, .tsv with tabs). It imports nothing of stria.
//
// Conventions, stated once:
//
//   - Matrices are [Matrix] values: dense, row-major float32; element
//     (i, j) is Data[i*Cols+j]. For responses, Rows = trials and
//     Cols = neurons (package data gives them their meaning).
//   - Shapes are given as in numpy (C order); a 1-D array of length n is
//     a 1 x n matrix.
//   - Wrong shapes passed by a programmer panic with a message starting
//     "data: " (the name users and logs know the reader by). Anything read
//     from a file gives a returned error naming the file and, where it
//     applies, the field, line, row or column. File content never causes
//     a panic.
//   - Writers are atomic: a temporary file in the same directory, renamed
//     over the target; a failed write leaves no partial file.
//   - A response matrix of more than MapThreshold bytes read from a
//     little-endian float32 .npy is mapped, not copied (ReadNPY). Every
//     pass over mapped values runs under Guard or a GuardGroup, so that a
//     file truncated meanwhile gives a *FaultError naming it instead of a
//     crash.
//   - Files are identified by FileID (path, size, modification time and a
//     content hash of 4 MiB pieces, see PieceHasher); ChangedError reports
//     a file that changed while stria read it, wrapping ErrChanged.
//   - A recording too large for memory is read by blocks of rows or spans
//     of elements (NPYStream) without mapping it.
package format
