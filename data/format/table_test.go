package format

import (
	"math"
	"strings"
	"testing"
)

// TestReadTableFixtures compares every column of the good tables with what
// numpy.genfromtxt read from the same text (expected.json, numpy 1.24.2,
// gen_npy.py). Tolerance: exact (both parse decimal text to the nearest
// float64); null in the JSON means numpy read NaN.
func TestReadTableFixtures(t *testing.T) {
	e := loadExpected(t)
	for file, want := range e.Tables {
		t.Run(file, func(t *testing.T) {
			tb, err := ReadTable(fixture(file))
			if err != nil {
				t.Fatal(err)
			}
			if strings.Join(tb.Header, ",") != strings.Join(want.Columns, ",") {
				t.Fatalf("header %q, want %q", tb.Header, want.Columns)
			}
			for _, col := range want.Columns {
				got, err := tb.Column(col)
				if err != nil {
					t.Fatal(err)
				}
				for i, w := range want.Values[col] {
					if w == nil {
						if !math.IsNaN(got[i]) {
							t.Errorf("%s[%d] = %v, want NaN", col, i, got[i])
						}
					} else if got[i] != *w {
						t.Errorf("%s[%d] = %v, want %v", col, i, got[i], *w)
					}
				}
			}
		})
	}
}

func TestTableColumnsAndInts(t *testing.T) {
	tb, err := ReadTable(fixture("rec.csv"))
	if err != nil {
		t.Fatal(err)
	}
	m, err := tb.Columns([]string{"n1", "n0"})
	if err != nil {
		t.Fatal(err)
	}
	// rec.csv rows (gen_npy.py): n0 = 1.5, 2.5, 3.5, 4.5; n1 = 2, 3, 4, 5e-1.
	want := []float32{2, 1.5, 3, 2.5, 4, 3.5, 0.5, 4.5}
	if m.Rows != 4 || m.Cols != 2 {
		t.Fatalf("shape %dx%d want 4x2", m.Rows, m.Cols)
	}
	for i, w := range want {
		if m.Data[i] != w {
			t.Errorf("Columns value %d = %v want %v", i, m.Data[i], w)
		}
	}
	ft, err := ReadTable(fixture("floatint.csv"))
	if err != nil {
		t.Fatal(err)
	}
	ids, err := ft.IntColumn("cond") // cells "0.0", "3.0", "1" (gen_npy.py)
	if err != nil || ids[0] != 0 || ids[1] != 3 || ids[2] != 1 {
		t.Errorf("IntColumn = %v, %v; want [0 3 1]", ids, err)
	}
}

// TestReadTableErrors checks that bad tables are refused with the file, the
// line, the trial and the column in the message.
func TestReadTableErrors(t *testing.T) {
	cases := []struct {
		file, col string
		ints      bool
		want      []string
	}{
		{"bad_cell.csv", "n0", false, []string{"bad_cell.csv", "line 3", "trial 1, 0-based", `column "n0"`, `"abc"`}},
		{"ragged.csv", "", false, []string{"ragged.csv", "line 3", "wrong number of fields"}},
		{"dup.csv", "", false, []string{"dup.csv", `"n0" appears twice`}},
		{"badint.csv", "cond", true, []string{"badint.csv", "line 3", `column "cond"`, "integer"}},
		{"rec.csv", "nope", false, []string{"rec.csv", `no column "nope"`}},
		{"f4_c_le_v1.npy", "", false, []string{"unknown table extension"}},
	}
	for _, c := range cases {
		t.Run(c.file, func(t *testing.T) {
			tb, err := ReadTable(fixture(c.file))
			if err == nil {
				if c.ints {
					_, err = tb.IntColumn(c.col)
				} else {
					_, err = tb.Column(c.col)
				}
			}
			if err == nil {
				t.Fatal("no error")
			}
			for _, w := range c.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q does not contain %q", err, w)
				}
			}
		})
	}
}
