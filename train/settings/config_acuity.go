package settings

import (
	"fmt"
	"math"
	"slices"
)

// AcuityConfig is the acuity section of a config: how finely the
// population carries the stimulus (stria acuity; eval/acuity,
// eval/methods.md §10-§11). Every field has a default (Defaults).
type AcuityConfig struct {
	// Sizes are the population sizes of information against N, strictly
	// increasing; empty: SizeCount sizes spaced geometrically up to
	// MaxSize.
	Sizes []int `yaml:"sizes"`
	// SizeCount is the number of automatic sizes (information and
	// decoding against N).
	SizeCount int `yaml:"size_count"`
	// MaxSize caps the automatic information sizes; 0: half the largest
	// size the bias correction allows for every pair (TA+TB-4).
	MaxSize int `yaml:"max_size"`
	// Repeats is the number of random neuron orders for information
	// against N.
	Repeats int `yaml:"repeats"`
	// Bootstrap is the number of bootstrap resamples of the repeats for
	// the interval of the asymptotic information; 0: no interval.
	Bootstrap int `yaml:"bootstrap"`
	// Decoders are the cross-validated decoders: lda (shrinkage linear
	// discriminant) and model (maximum likelihood from an encoder fitted
	// on each fold's training trials).
	Decoders []AcuityDecoder `yaml:"decoders"`
	// Shrinkage is the LDA's shrinkage towards the diagonal covariance, in
	// [0, 1]; 1 (diagonal LDA) costs time linear in the number of
	// neurons.
	Shrinkage float64 `yaml:"shrinkage"`
	// DecodeSizes are the population sizes of decoding against N, strictly
	// increasing; empty: SizeCount sizes spaced geometrically up to all
	// neurons.
	DecodeSizes []int `yaml:"decode_sizes"`
	// DecodeRepeats is the number of random neuron orders for decoding
	// against N.
	DecodeRepeats int `yaml:"decode_repeats"`
	// Encoder is the model decoder's encoder: empty (the default) fits the
	// model section on each fold of stria compare; a run folder of stria
	// fit on the same recording uses that run's encoder, on that run's
	// held-out test trials only.
	Encoder string `yaml:"encoder"`
	// Output is the acuity folder.
	Output string `yaml:"output"`
}

// AcuityDecoder is one word of acuity.decoders.
type AcuityDecoder int

const (
	// DecoderLDA is shrinkage linear discriminant analysis.
	DecoderLDA AcuityDecoder = iota
	// DecoderModel is the maximum-likelihood decoder of an encoder fitted
	// per fold: Gaussian noise with per-neuron variance for model.loss
	// mse, Poisson for model.loss poisson.
	DecoderModel
)

var acuityDecoderWords = []string{"lda", "model"}

func (v AcuityDecoder) String() string               { return word(acuityDecoderWords, int(v)) }
func (v AcuityDecoder) MarshalText() ([]byte, error) { return marshalWord(acuityDecoderWords, int(v)) }

// UnmarshalText reads a decoder word.
func (v *AcuityDecoder) UnmarshalText(b []byte) error {
	return unmarshalWord(acuityDecoderWords, b, (*int)(v))
}

// DefaultAcuity is the acuity section of Defaults.
func DefaultAcuity() AcuityConfig {
	return AcuityConfig{
		SizeCount:     8,
		Repeats:       20,
		Bootstrap:     1000,
		Decoders:      []AcuityDecoder{DecoderLDA, DecoderModel},
		Shrinkage:     1,
		DecodeRepeats: 3,
		Output:        "stria-out/acuity",
	}
}

// validateAcuity appends the errors of the acuity section to bad; every
// message names its key.
func (c *Config) validateAcuity(bad func(format string, a ...any)) {
	a := c.Acuity
	sizes := func(key string, s []int) {
		for i, v := range s {
			if v < 1 {
				bad("acuity.%s[%d] %d: want a population size of at least 1", key, i, v)
				return
			}
			if i > 0 && v <= s[i-1] {
				bad("acuity.%s[%d] %d: sizes must increase strictly (previous %d)", key, i, v, s[i-1])
				return
			}
		}
		if len(s) == 1 {
			bad("acuity.%s: give at least two sizes (or none for the automatic ones)", key)
		}
	}
	sizes("sizes", a.Sizes)
	sizes("decode_sizes", a.DecodeSizes)
	if a.SizeCount < 2 {
		bad("acuity.size_count %d: want at least 2", a.SizeCount)
	}
	if a.MaxSize < 0 || a.MaxSize == 1 {
		bad("acuity.max_size %d: want 0 (automatic) or at least 2", a.MaxSize)
	}
	if a.Repeats < 1 {
		bad("acuity.repeats %d: want at least 1", a.Repeats)
	}
	if a.Bootstrap < 0 {
		bad("acuity.bootstrap %d: want 0 (no interval) or more resamples", a.Bootstrap)
	}
	if a.Bootstrap > 0 && a.Bootstrap < 100 {
		bad("acuity.bootstrap %d: a 95%% percentile interval needs at least 100 resamples (0: no interval)", a.Bootstrap)
	}
	if a.Bootstrap > 0 && a.Repeats < 2 {
		bad("acuity.bootstrap %d with acuity.repeats %d: the bootstrap resamples the repeats, so it needs at least 2", a.Bootstrap, a.Repeats)
	}
	if len(a.Decoders) == 0 {
		bad("acuity.decoders: give at least one of %s", orList(acuityDecoderWords))
	}
	for i, d := range a.Decoders {
		if slices.Index(a.Decoders, d) < i {
			bad("acuity.decoders[%d] %s: listed twice", i, d)
		}
	}
	if !(a.Shrinkage >= 0 && a.Shrinkage <= 1) || math.IsNaN(a.Shrinkage) {
		bad("acuity.shrinkage %v: want a value in [0, 1] (1: diagonal LDA, linear in the number of neurons)", a.Shrinkage)
	}
	if a.DecodeRepeats < 1 {
		bad("acuity.decode_repeats %d: want at least 1", a.DecodeRepeats)
	}
	if a.Encoder != "" && !slices.Contains(a.Decoders, DecoderModel) {
		bad("acuity.encoder %s: used only by the model decoder, which acuity.decoders does not list", a.Encoder)
	}
	if a.Output == "" {
		bad("acuity.output: no acuity folder given (set it in the config or with --out)")
	}
}

// GeometricSizes returns count sizes from min(lo, hi) to hi, spaced
// geometrically and rounded, without repeats (fewer than count when the
// range is too short). hi >= 1.
func GeometricSizes(lo, hi, count int) []int {
	if hi < 1 {
		panic(fmt.Sprintf("train: GeometricSizes up to %d", hi))
	}
	lo = max(1, min(lo, hi))
	var out []int
	for i := 0; i < count; i++ {
		v := hi
		if count > 1 && i < count-1 {
			v = int(math.Round(float64(lo) * math.Pow(float64(hi)/float64(lo), float64(i)/float64(count-1))))
		}
		if len(out) == 0 || v > out[len(out)-1] {
			out = append(out, v)
		}
	}
	return out
}
