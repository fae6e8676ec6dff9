package train

import (
	"context"
	"fmt"
	"github.com/strialab/stria/train/settings"
	"math"
	"math/rand/v2"
	"slices"
	"time"

	"github.com/strialab/stria/eval/acuity"
)

// AcuityResult is what stria acuity computes for one prepared recording
// (eval/acuity; eval/methods.md §10-§11). Information is in 1/(axis
// unit)^2, thresholds and decoding errors in axis units.
type AcuityResult struct {
	Axis acuity.Conditions
	// Pairs are the neighbouring pairs of conditions, with their trials.
	Pairs    []acuity.Pair
	TA, TB   []int
	Neurons  int
	Trials   int
	MaxSize  int // the largest size the bias correction allows for every pair
	Curve    *acuity.SizeCurve
	Fit      acuity.Saturation
	FitError string // why the saturation could not be fitted ("" when it was)
	Decoders []AcuityDecoding
	Folds    int
	// FoldSets are the folds the decoders used: Folds(p), the folds of
	// stria compare, as (train, validation, test) trial sets.
	FoldSets [][3][]int
	// Cautions go beside every number (acuity.Caution*); Warnings are the
	// recording's and the folds'.
	Cautions, Warnings []string
	// Seconds is the wall time of each part: information, and each
	// decoder.
	Seconds map[string]float64
}

// AcuityDecoding is one decoder's cross-validated result.
type AcuityDecoding struct {
	// Name is lda, model-gaussian or model-poisson.
	Name string
	// Description says what the decoder is, for tables and the report.
	Description string
	Summary     acuity.DecodeSummary
	Stats       acuity.DecodeStats
	Curve       *acuity.DecodeCurve
}

// AcuityCautions are the cautions of stria acuity, in the order they are
// printed.
var AcuityCautions = []string{acuity.CautionTrials, acuity.CautionExtrapolation, acuity.CautionDecoder}

// AcuityConditions are the conditions of a prepared recording as eval/acuity
// wants it: the bin centres, and the period on a periodic axis.
func AcuityConditions(p *Prepared) acuity.Conditions {
	ax := acuity.Conditions{Values: p.Axis.Centers()}
	if p.Axis.Periodic {
		ax.Period = p.Axis.Max - p.Axis.Min
	}
	return ax
}

// AcuityFolds converts the folds of Folds (train, validation, test) to
// eval/acuity's: the training side is training plus validation trials.
func AcuityFolds(folds [][3][]int) []acuity.Fold {
	out := make([]acuity.Fold, len(folds))
	for f, s := range folds {
		tr := append(slices.Clone(s[0]), s[1]...)
		slices.Sort(tr)
		out[f] = acuity.Fold{Train: tr, Test: s[2]}
	}
	return out
}

// AcuityEncoder is a fitted encoder for the model decoder, given instead
// of fitting one per fold (acuity.encoder: a run folder).
type AcuityEncoder struct {
	// Source names it (the run folder), for messages and descriptions.
	Source string
	// Pred is its prediction for every condition, B x N row-major, in the
	// recording's units.
	Pred []float64
	// Loss is the loss it was fitted with: Poisson selects the Poisson
	// likelihood.
	Loss settings.Loss
	// Train are the trials it was fitted on (training and validation),
	// Test its held-out trials, the only ones it decodes.
	Train, Test []int
}

// AcuityProgress receives a line per finished step.
type AcuityProgress func(step string)

// Acuity measures how finely the population of p carries the stimulus,
// on the folds of stria compare (Folds): bias-corrected linear Fisher
// information of every neighbouring pair for nested random subsets of the
// sizes of cfg.Acuity, the saturation fit of its mean over pairs, and
// cross-validated decoding with each decoder of cfg.Acuity.Decoders, for
// all neurons and against the number of neurons. Information uses every
// trial (it is not cross-validated); decoders train on each fold's
// training and validation trials and decode its test trials.
//
// With enc not nil the model decoder uses that encoder, on its own
// held-out trials (one fold), instead of fitting one per fold.
//
// Random subsets and the bootstrap are seeded by cfg.Seed: the same config
// gives the same numbers, whatever the number of cores. Errors name the
// config key, pair, fold or trial.
func Acuity(ctx context.Context, p *Prepared, enc *AcuityEncoder, progress AcuityProgress) (*AcuityResult, error) {
	cfg := p.Cfg
	ac := cfg.Acuity
	say := func(format string, a ...any) {
		if progress != nil {
			progress(fmt.Sprintf(format, a...))
		}
	}
	ax := AcuityConditions(p)
	n, T := p.Neurons(), len(p.Cond)
	y := p.Rec.Y.Data
	res := &AcuityResult{Axis: ax, Pairs: ax.Pairs(), Neurons: n, Trials: T, Seconds: map[string]float64{},
		Cautions: slices.Clone(AcuityCautions)}
	counts := make([]int, p.NBins)
	for _, c := range p.Cond {
		counts[c]++
	}
	for _, pr := range res.Pairs {
		res.TA = append(res.TA, counts[pr.A])
		res.TB = append(res.TB, counts[pr.B])
	}

	// Information against population size.
	limit, err := acuity.MaxSubset(p.Cond, ax)
	if err != nil {
		return nil, fmt.Errorf("acuity: %w (every pair of neighbouring conditions needs trials in both; use wider bins)", err)
	}
	res.MaxSize = limit
	sizes := ac.Sizes
	if len(sizes) == 0 {
		hi := min(n, limit/2)
		if ac.MaxSize > 0 {
			hi = min(hi, ac.MaxSize)
		}
		if hi < 2 {
			return nil, fmt.Errorf("acuity: too few trials for information against population size: the smallest pair of neighbouring conditions allows %d neurons (fewer than TA+TB-3), and half of it is below 2; use wider bins", limit)
		}
		// From 5 neurons, or from a quarter of the largest size when that
		// is small, so that the saturation fit sees a range of sizes.
		sizes = settings.GeometricSizes(min(5, max(1, hi/4)), hi, ac.SizeCount)
	} else if last := sizes[len(sizes)-1]; last > n || last > limit {
		return nil, fmt.Errorf("acuity.sizes: the largest size %d is above the %d neurons of the recording or the %d the bias correction allows for the pair with the fewest trials (fewer than TA+TB-3 neurons)", last, n, limit)
	}
	start := time.Now()
	rng := rand.New(rand.NewPCG(cfg.Seed, 0xac01))
	curve, err := acuity.InfoVsSize(y, n, p.Cond, ax, sizes, ac.Repeats, rng)
	if err != nil {
		return nil, fmt.Errorf("acuity: information: %w", err)
	}
	res.Curve = curve
	boot := rand.New(rand.NewPCG(cfg.Seed, 0xac02))
	fit, err := acuity.FitSaturation(curve.Sizes, curve.Curves(-1), ac.Bootstrap, boot)
	if err != nil {
		res.FitError = err.Error()
		res.Fit = acuity.Saturation{A: math.NaN(), Eps: math.NaN(), Asymptote: math.NaN(), Lo: math.NaN(), Hi: math.NaN(), RMS: math.NaN()}
	} else {
		res.Fit = fit
	}
	res.Seconds["information"] = time.Since(start).Seconds()
	say("information: %d pairs, sizes %v, %d repeats (%.1f s)", len(res.Pairs), sizes, ac.Repeats, res.Seconds["information"])
	if err := ctx.Err(); err != nil {
		return nil, err
	}

	// Decoding on the folds of stria compare.
	folds, err := Folds(p)
	if err != nil {
		return nil, err
	}
	res.Folds, res.FoldSets = len(folds), folds
	res.Warnings = slices.Clone(p.Report.Warnings)
	afolds := AcuityFolds(folds)
	dsizes := ac.DecodeSizes
	if len(dsizes) == 0 {
		dsizes = settings.GeometricSizes(10, n, ac.SizeCount)
	} else if last := dsizes[len(dsizes)-1]; last > n {
		return nil, fmt.Errorf("acuity.decode_sizes: the largest size %d is above the %d neurons of the recording", last, n)
	}
	if slices.Contains(ac.Decoders, settings.DecoderLDA) && ac.Shrinkage < 1 && n > acuity.DefaultMaxFull {
		return nil, fmt.Errorf("acuity.shrinkage %g: the linear discriminant with a full covariance is limited to %d neurons and the recording has %d (its cost grows with the cube of the number of neurons); use acuity.shrinkage: 1", ac.Shrinkage, acuity.DefaultMaxFull, n)
	}
	for _, kind := range ac.Decoders {
		start := time.Now()
		d := acuity.Decoder{Kind: acuity.LinearDiscriminant, Shrinkage: ac.Shrinkage}
		r := AcuityDecoding{Name: "lda", Description: ldaText(ac.Shrinkage)}
		dfolds := afolds
		if kind == settings.DecoderModel {
			d = acuity.Decoder{Kind: acuity.GaussianModel}
			loss, which := cfg.Model.Loss, "the encoder fitted on each fold's training trials"
			if enc != nil {
				loss, which = enc.Loss, fmt.Sprintf("the encoder of the run folder %s, on its %d held-out test trials only", enc.Source, len(enc.Test))
			}
			r.Name, r.Description = "model-gaussian", "maximum likelihood from "+which+", independent Gaussian noise with per-neuron variance (the training residuals)"
			if loss == settings.Poisson {
				d.Kind = acuity.PoissonModel
				r.Name, r.Description = "model-poisson", "maximum likelihood from "+which+", independent Poisson noise"
			}
			if enc != nil {
				if len(enc.Pred) != p.NBins*n {
					return nil, fmt.Errorf("acuity.encoder %s: %d predictions, want %d conditions x %d neurons", enc.Source, len(enc.Pred), p.NBins, n)
				}
				d.Pred = [][]float64{enc.Pred}
				dfolds = []acuity.Fold{{Train: enc.Train, Test: enc.Test}}
			} else {
				d.Pred = make([][]float64, len(folds))
				for f, sets := range folds {
					u, err := RunUnit(ctx, p, ModelSpec{Name: "encoder", Cfg: cfg}, f, sets)
					if err != nil {
						return nil, fmt.Errorf("acuity: decoder model: %w", err)
					}
					d.Pred[f] = u.Curves
					say("decoder %s: encoder of fold %d of %d fitted (%d epochs)", r.Name, f+1, len(folds), u.Epochs)
				}
			}
		}
		dec := make([]int, T)
		st, err := d.Decode(dec, y, n, p.Cond, p.NBins, dfolds, nil)
		if err != nil {
			return nil, fmt.Errorf("acuity: decoder %s: %w", r.Name, err)
		}
		r.Stats = st
		if r.Summary, err = acuity.Summarize(ax, p.Cond, dec); err != nil {
			return nil, fmt.Errorf("acuity: decoder %s: %w", r.Name, err)
		}
		// Every subset of all n neurons is the whole population: its
		// result is the one just computed, so only smaller sizes are
		// decoded again (this halves the cost at full scale).
		sub := dsizes
		if sub[len(sub)-1] == n {
			sub = sub[:len(sub)-1]
		}
		drng := rand.New(rand.NewPCG(cfg.Seed, 0xac03))
		curve := &acuity.DecodeCurve{Repeats: ac.DecodeRepeats}
		if len(sub) > 0 {
			if curve, err = d.VsSize(y, n, p.Cond, ax, dfolds, sub, ac.DecodeRepeats, drng); err != nil {
				return nil, fmt.Errorf("acuity: decoder %s against population size: %w", r.Name, err)
			}
		}
		r.Curve = withFull(curve, sub, n, len(sub) < len(dsizes), r.Summary)
		res.Seconds["decoder "+r.Name] = time.Since(start).Seconds()
		say("decoder %s: accuracy %.3f, mean absolute error %.3g (%.1f s)", r.Name, r.Summary.Accuracy, r.Summary.MAE, res.Seconds["decoder "+r.Name])
		res.Decoders = append(res.Decoders, r)
		if err := ctx.Err(); err != nil {
			return nil, err
		}
	}
	return res, nil
}

// withFull returns curve (over sizes sub) with the whole population of n
// neurons appended as the last size when full is set: the same result for
// every repeat.
func withFull(curve *acuity.DecodeCurve, sub []int, n int, full bool, all acuity.DecodeSummary) *acuity.DecodeCurve {
	if !full {
		return curve
	}
	S, R := len(sub), curve.Repeats
	out := &acuity.DecodeCurve{Sizes: append(slices.Clone(sub), n), Repeats: R,
		MAE: make([]float64, R*(S+1)), Accuracy: make([]float64, R*(S+1))}
	for r := 0; r < R; r++ {
		for s := 0; s < S; s++ {
			out.MAE[r*(S+1)+s], out.Accuracy[r*(S+1)+s] = curve.MAE[r*S+s], curve.Accuracy[r*S+s]
		}
		out.MAE[r*(S+1)+S], out.Accuracy[r*(S+1)+S] = all.MAE, all.Accuracy
	}
	return out
}

func ldaText(alpha float64) string {
	if alpha == 1 {
		return "diagonal linear discriminant (shrinkage 1: per-neuron variances, no correlations), trained on each fold's training trials"
	}
	return fmt.Sprintf("linear discriminant with the pooled covariance shrunk towards its diagonal by %g, trained on each fold's training trials", alpha)
}

// PairMeans returns, for every pair, the mean and standard deviation over
// repeats of the bias-corrected information (full and trial-shuffled) at
// size index s of the curve.
func (r *AcuityResult) PairMeans(s int) (info, infoSD, shuf, shufSD []float64) {
	c := r.Curve
	S, P := len(c.Sizes), len(c.Pairs)
	info, infoSD = make([]float64, P), make([]float64, P)
	shuf, shufSD = make([]float64, P), make([]float64, P)
	for p := 0; p < P; p++ {
		a, b := make([]float64, c.Repeats), make([]float64, c.Repeats)
		for rep := 0; rep < c.Repeats; rep++ {
			a[rep] = c.Info[(rep*S+s)*P+p]
			b[rep] = c.Shuffled[(rep*S+s)*P+p]
		}
		info[p], infoSD[p] = meanSD(a)
		shuf[p], shufSD[p] = meanSD(b)
	}
	return
}

// SizeMeans returns, for every size, the mean and standard deviation over
// repeats of the pair-averaged information (full and trial-shuffled).
func (r *AcuityResult) SizeMeans() (info, infoSD, shuf, shufSD []float64) {
	c := r.Curve
	S, P := len(c.Sizes), len(c.Pairs)
	info, infoSD = make([]float64, S), make([]float64, S)
	shuf, shufSD = make([]float64, S), make([]float64, S)
	for s := 0; s < S; s++ {
		a, b := make([]float64, c.Repeats), make([]float64, c.Repeats)
		for rep := 0; rep < c.Repeats; rep++ {
			for p := 0; p < P; p++ {
				a[rep] += c.Info[(rep*S+s)*P+p] / float64(P)
				b[rep] += c.Shuffled[(rep*S+s)*P+p] / float64(P)
			}
		}
		info[s], infoSD[s] = meanSD(a)
		shuf[s], shufSD[s] = meanSD(b)
	}
	return
}

// meanSD returns the mean and the standard deviation (divisor n-1; NaN
// for fewer than 2 values).
func meanSD(v []float64) (mean, sd float64) {
	for _, x := range v {
		mean += x
	}
	mean /= float64(len(v))
	if len(v) < 2 {
		return mean, math.NaN()
	}
	for _, x := range v {
		sd += (x - mean) * (x - mean)
	}
	return mean, math.Sqrt(sd / float64(len(v)-1))
}
