// Package eval scores encoding models of a neural population: trial-level
// explained variance, condition-level noise-ceiling metrics, population
// summaries and a paired signed-rank test.
//
// Conventions (eval/methods.md §0), stated once for the whole package:
//
//   - All metrics are float64. Responses loaded from disk arrive as float32 and
//     are widened before any arithmetic.
//   - Variances and covariances taken across conditions (bins) b = 1..B use
//     1/B (ddof 0). The spread of single trials within one condition uses
//     1/(N_b-1) (ddof 1). The variance of all single trials of a neuron,
//     Var[r], uses 1/T (ddof 0).
//   - Per-neuron condition statistics are counts N_b, condition means ybar_b,
//     within-condition variances s2_b and model predictions yhat_b, one value
//     per condition, in condition order.
//   - The noise variance sigma2_noise is the pooled within-condition variance,
//     weights N_b - 1 (PooledNoiseVariance, eval/methods.md §4); the signal
//     power is the ANOVA form with the (B-1)/B factor that makes it unbiased
//     (SignalPower).
//   - A metric that is undefined for the data (zero variance, signal power
//     <= 0, too few conditions) returns NaN; nothing is clipped. Callers count
//     NaN with Summarize.
//   - Ratios by a noise ceiling (FEV, CC_norm, SPE) are only as good as the
//     ceiling: GateCeilings marks them NaN, with a reason per neuron
//     (Ceiling), where the held-out trials show no significant condition
//     effect; ReliableMask selects neurons by split-half reliability for
//     summaries, paired tests and figures.
//   - Length mismatches between slices that the caller built are programmer
//     errors and panic with a message starting "eval: ". Values that come from
//     recordings (NaN, constant responses, empty conditions) never panic.
//
// Sources are named on each function; the worked check values of eval/methods.md §9
// are tested in metrics_test.go.
package eval
