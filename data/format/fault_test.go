package format

import "testing"

// TestGuardOtherPanics checks that Guard leaves every other panic alone,
// including a nil dereference (a fault outside any mapping).
func TestGuardOtherPanics(t *testing.T) {
	for _, c := range []struct {
		name string
		fn   func()
	}{
		{"value", func() { panic("boom") }},
		{"nil", func() {
			var p *Matrix
			_ = p.Rows
		}},
		{"index", func() {
			v := []int{}
			_ = v[len(v)+1]
		}},
	} {
		t.Run(c.name, func(t *testing.T) {
			defer func() {
				if r := recover(); r == nil {
					t.Error("the panic was swallowed")
				} else if faultOf(r) != nil {
					t.Errorf("panic %v taken for a fault of a mapped file", r)
				}
			}()
			err := Guard(c.fn)
			t.Errorf("Guard returned %v instead of panicking again", err)
		})
	}
	if err := Guard(func() {}); err != nil {
		t.Errorf("Guard of a function that does nothing: %v", err)
	}
}
