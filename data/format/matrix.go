package format

import "fmt"

// Matrix is a dense row-major float32 matrix. For responses, Rows = trials
// and Cols = neurons; element (i, j) is Data[i*Cols+j] and len(Data) is
// Rows*Cols.
type Matrix struct {
	Rows, Cols int
	Data       []float32
}

// NewMatrix returns a zeroed rows x cols matrix. It panics if either
// dimension is negative.
func NewMatrix(rows, cols int) *Matrix {
	if rows < 0 || cols < 0 {
		panic(fmt.Sprintf("data: NewMatrix negative dimension %d x %d", rows, cols))
	}
	return &Matrix{Rows: rows, Cols: cols, Data: make([]float32, rows*cols)}
}

// Row returns row i as a slice sharing m.Data (length Cols, capacity Cols).
// It panics if i is out of range.
func (m *Matrix) Row(i int) []float32 {
	if i < 0 || i >= m.Rows {
		panic(fmt.Sprintf("data: Row index %d out of range [0, %d)", i, m.Rows))
	}
	return m.Data[i*m.Cols : (i+1)*m.Cols : (i+1)*m.Cols]
}
