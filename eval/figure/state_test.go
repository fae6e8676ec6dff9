package figure

import (
	"bytes"
	"math"
	"math/rand/v2"
	"path/filepath"
	"strings"
	"testing"
)

// TestStateTuning draws a neuron at two state levels: points and model
// lines per level, NaN means skipped, a level without trials noted in the
// legend; the same input gives the same bytes; mismatched lengths panic.
func TestStateTuning(t *testing.T) {
	base := filepath.Join(t.TempDir(), "state")
	c, m, _, _, _ := tuningData(rand.New(rand.NewPCG(3, 3)))
	hi := make([]float64, len(m))
	lowModel, hiModel := make([]float64, len(m)), make([]float64, len(m))
	for i, v := range m {
		hi[i] = 1.2 * v
		lowModel[i], hiModel[i] = 0.9*v, 1.2*v
	}
	m[2] = math.NaN()
	nan := make([]float64, len(m))
	for i := range nan {
		nan[i] = math.NaN()
	}
	levels := []Level{{Name: "low speed", Mean: m, Model: lowModel}, {Name: "high speed", Mean: hi, Model: hiModel}, {Name: "empty", Mean: nan, Model: nan}}
	im, err := StateTuning(c, levels, heading, "rate (spikes/s)")
	if err := toFiles(base)(im, err); err != nil {
		t.Fatal(err)
	}
	checkFigure(t, base, wantSVGH, wantH, []string{"heading (deg)", "rate (spikes/s)", "low speed, model", "low speed, data", "high speed, data", "empty, data: no trials", "0", "360"}, 2)
	again, err := StateTuning(c, levels, heading, "rate (spikes/s)")
	if err != nil || !bytes.Equal(again.SVG, im.SVG) {
		t.Errorf("drawing twice gave different SVG (err %v)", err)
	}
	defer func() {
		if r, ok := recover().(string); !ok || !strings.HasPrefix(r, "figure: StateTuning") {
			t.Errorf("recovered %v, want a figure: StateTuning panic", r)
		}
	}()
	StateTuning(c, []Level{{Name: "short", Mean: m[:2], Model: lowModel}}, heading, "y")
}
