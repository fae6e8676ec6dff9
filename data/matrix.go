package data

import "github.com/strialab/stria/data/format"

// Matrix is the response matrix (Rows = trials, Cols = neurons), defined in
// data/format, which reads and writes it. The alias keeps data.Matrix, the
// name every fitting package uses, without a conversion at each call.
type Matrix = format.Matrix

// NewMatrix returns a zeroed rows x cols matrix (see format.NewMatrix).
func NewMatrix(rows, cols int) *Matrix { return format.NewMatrix(rows, cols) }
