// Package tuning fits per-neuron tuning-curve baselines to condition
// statistics and computes tuning descriptors (eval/methods.md §7).
//
// Conventions:
//
//   - The stimulus axis is in axis units (degrees, cm, Hz, ...). centers are
//     the bin centres in ascending order. A periodic axis has period P > 0
//     (360 for direction or heading, 180 for orientation); period 0 marks a
//     non-periodic axis. On a periodic axis the angle of a value x is
//     phi = 2 pi x / P, so cos(2 pi (x - mu) / 180) on an orientation axis is
//     the orientation form cos(2 (theta - theta_p)) of eval/methods.md §7.
//   - A model is fitted to one neuron at a time from counts N_b and condition
//     means ybar_b. Weighted least squares on the condition means with weights
//     N_b has the same minimiser as least squares on the single trials
//     (eval/methods.md §8), so the fitted curve is the trial-level least-squares
//     fit. Conditions with N_b = 0 are ignored.
//   - Constructors panic on programmer errors (bad centres, negative lambda);
//     Fit returns an error for bad data (negative count, NaN or infinite mean
//     of a non-empty condition, no non-empty condition) and never panics on
//     data. After a failed Fit, Predict writes NaN.
//   - Nonlinear fits are deterministic for the *rand.Rand given to the
//     constructor: the same seed and the same sequence of Fit calls give the
//     same parameters.
package tuning
