package settings

import (
	"slices"
	"strings"
	"testing"
)

// TestAcuityConfigErrors checks that every bad setting of the acuity
// section is refused with a message naming its key.
func TestAcuityConfigErrors(t *testing.T) {
	cases := []struct {
		name string
		edit func(*AcuityConfig)
		want string
	}{
		{"sizes not increasing", func(a *AcuityConfig) { a.Sizes = []int{10, 10} }, "acuity.sizes[1] 10: sizes must increase strictly"},
		{"size zero", func(a *AcuityConfig) { a.Sizes = []int{0, 4} }, "acuity.sizes[0] 0"},
		{"one size", func(a *AcuityConfig) { a.DecodeSizes = []int{5} }, "acuity.decode_sizes: give at least two sizes"},
		{"size count", func(a *AcuityConfig) { a.SizeCount = 1 }, "acuity.size_count 1"},
		{"max size", func(a *AcuityConfig) { a.MaxSize = -3 }, "acuity.max_size -3"},
		{"repeats", func(a *AcuityConfig) { a.Repeats = 0 }, "acuity.repeats 0"},
		{"bootstrap negative", func(a *AcuityConfig) { a.Bootstrap = -1 }, "acuity.bootstrap -1"},
		{"bootstrap too few", func(a *AcuityConfig) { a.Bootstrap = 20 }, "acuity.bootstrap 20"},
		{"bootstrap one repeat", func(a *AcuityConfig) { a.Repeats = 1 }, "acuity.bootstrap 1000 with acuity.repeats 1"},
		{"no decoder", func(a *AcuityConfig) { a.Decoders = nil }, "acuity.decoders: give at least one of lda or model"},
		{"decoder twice", func(a *AcuityConfig) { a.Decoders = []AcuityDecoder{DecoderLDA, DecoderLDA} }, "acuity.decoders[1] lda: listed twice"},
		{"shrinkage", func(a *AcuityConfig) { a.Shrinkage = 1.5 }, "acuity.shrinkage 1.5"},
		{"decode repeats", func(a *AcuityConfig) { a.DecodeRepeats = 0 }, "acuity.decode_repeats 0"},
		{"output", func(a *AcuityConfig) { a.Output = "" }, "acuity.output"},
		{"encoder without model decoder", func(a *AcuityConfig) { a.Encoder, a.Decoders = "run", []AcuityDecoder{DecoderLDA} }, "acuity.encoder run: used only by the model decoder"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			cfg := validBase()
			c.edit(&cfg.Acuity)
			err := cfg.Validate()
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("got error %v, want one containing %q", err, c.want)
			}
		})
	}
	// A wrong word names the key and its line.
	_, err := ParseConfig([]byte("acuity:\n  decoders: [lda, bayes]\n"), "x.yaml")
	if err == nil || !strings.Contains(err.Error(), "acuity.decoders") || !strings.Contains(err.Error(), "line 2") || !strings.Contains(err.Error(), "lda or model") {
		t.Errorf("unknown decoder: got %v, want an error naming acuity.decoders, line 2 and the words", err)
	}
	_, err = ParseConfig([]byte("acuity:\n  repeat: 3\n"), "x.yaml")
	if err == nil || !strings.Contains(err.Error(), `"acuity.repeat"`) {
		t.Errorf("misspelt key: got %v, want an error naming acuity.repeat", err)
	}
	cfg, err := ParseConfig([]byte("acuity:\n  decoders: [model]\n  sizes: [4, 8, 16]\n"), "x.yaml")
	if err != nil || !slices.Equal(cfg.Acuity.Decoders, []AcuityDecoder{DecoderModel}) || !slices.Equal(cfg.Acuity.Sizes, []int{4, 8, 16}) || cfg.Acuity.Repeats != 20 {
		t.Errorf("parsed %+v, %v; want decoders [model], sizes [4 8 16] and the default repeats 20", cfg.Acuity, err)
	}
}

func TestGeometricSizes(t *testing.T) {
	cases := []struct {
		lo, hi, count int
		want          []int
	}{
		{10, 24000, 8, []int{10, 30, 92, 281, 854, 2597, 7894, 24000}}, // 10 * 2400^(i/7), rounded [computed by hand]
		{5, 63, 8, []int{5, 7, 10, 15, 21, 31, 44, 63}},
		{10, 4, 8, []int{4}},         // lo above hi: hi only
		{1, 4, 8, []int{1, 2, 3, 4}}, // repeats dropped
		{2, 9, 2, []int{2, 9}},
	}
	for _, c := range cases {
		if got := GeometricSizes(c.lo, c.hi, c.count); !slices.Equal(got, c.want) {
			t.Errorf("GeometricSizes(%d, %d, %d) = %v, want %v", c.lo, c.hi, c.count, got, c.want)
		}
	}
}
