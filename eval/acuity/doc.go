// Package acuity measures how well a recorded population encodes a 1-D
// stimulus: bias-corrected linear Fisher information between neighbouring
// conditions, its growth with population size and saturation, and
// cross-validated decoding of the condition of held-out trials.
//
// # Conventions
//
//   - Responses y are trials x neurons, row-major float32 (as loaded from
//     disk); all arithmetic is float64. cond[t] in 0..B-1 is the condition
//     (bin) of trial t. Neuron subsets are lists of column indices of y.
//   - The stimulus axis is given as Conditions: Values[b] is the stimulus of condition b
//     in axis units, strictly increasing; Period > 0 marks a periodic axis
//     (all values within one period), 0 a bounded one.
//   - Neighbouring pairs are (b, b+1), plus on a periodic axis the wrap pair
//     (B-1, 0) with step Values[0] + Period - Values[B-1]. Information of a
//     pair is reported at its midpoint, in 1/(axis unit)^2; thresholds and
//     decoding errors are in axis units. On a periodic axis a decoding error
//     is the shortest signed difference, in [-Period/2, Period/2).
//   - Bad data (condition out of range, non-finite response, too few trials
//     for the number of neurons, singular covariances, bad folds) returns an
//     error naming the trial, neuron, pair or fold; nothing is dropped
//     silently (what is left out by rule is counted: PairInfo.N,
//     DecodeStats). Inconsistent slice lengths built by the caller panic with
//     a message starting "acuity: ".
//   - Random subsets come from the *rand.Rand passed in, drawn before any
//     goroutine starts; results do not depend on GOMAXPROCS. The order of a
//     given subset changes results only by rounding.
//
// # Linear Fisher information and its bias correction
//
// For a pair of conditions A, B with TA, TB trials and stimulus step ds:
// f' = (m_B - m_A)/ds from the condition means, S the pooled within-condition
// covariance (sum of both scatter matrices over nu = TA + TB - 2), and the
// naive estimate I_naive = f'^T S^-1 f'. Derivation of the correction,
// assuming Gaussian responses whose covariance Sigma is the same in both
// conditions:
//
//	d = m_B - m_A ~ N(delta, c Sigma),  c = 1/TA + 1/TB,
//	W = nu S ~ Wishart_N(Sigma, nu), independent of d,
//	E[W^-1] = Sigma^-1 / (nu - N - 1)   for nu > N + 1   [pub: Wishart moment, textbook],
//	E[I_naive] = nu/(nu - N - 1) tr(Sigma^-1 E[d d^T]) / ds^2
//	           = nu/(nu - N - 1) (I + N c / ds^2),
//
// so that
//
//	I_bc = I_naive (nu - N - 1)/nu - N (1/TA + 1/TB)/ds^2
//
// is unbiased for I = f'^T Sigma^-1 f' with any TA, TB; it is defined
// for N < nu - 1. With TA = TB = T it reads I_naive (2T - N - 3)/(2T - 2) -
// 2N/(T ds^2), the form of Kanitscheider, Coen-Cagli, Kohn & Pouget (2015,
// PLoS Comput Biol 11:e1004218) [mem: their equal-T form, derived here
// independently]. Its variance follows from d^T W^-1 d = c X/Y with X a
// noncentral chi-square (N degrees of freedom, noncentrality I ds^2/c) and Y
// an independent chi-square with nu - N + 1 degrees of freedom (the Hotelling
// T^2 construction [pub: textbook]):
//
//	Var[I_bc] = 2 [I^2 + 2 k (nu-1) I + k^2 N (nu-1)] / (nu - N - 3),  k = c/ds^2.
//
// The trial-shuffled (diagonal) estimate uses only the variances: each
// s_n^2 nu / sigma_n^2 is chi-square with nu degrees of freedom, so
// E[1/s_n^2] = nu/((nu-2) sigma_n^2) and I_bc = I_naive (nu-2)/nu -
// N c/ds^2 estimates f'^T diag(Sigma)^-1 f' without bias whatever the
// correlations. Information against population size and the saturation fit
// are described on InfoVsSize and Saturation (Moreno-Bote et al. 2014, Nat
// Neurosci 17:1410 [mem]).
//
// All of this is checked by simulation in sim_test.go and saturation_test.go:
// a Gaussian population with covariance Sigma0 + eps f' f'^T, whose truth is
// I0/(1 + eps I0) by Sherman-Morrison. For non-Gaussian noise (spike counts)
// the correction is an approximation.
//
// # Decoding
//
// A Decoder classifies each test trial of each fold. LinearDiscriminant is
// shrinkage LDA with the pooled within-condition covariance shrunk towards its
// diagonal; at Shrinkage 1 (diagonal LDA) the cost is linear in the number of
// neurons, which is what makes 24,000 neurons cheap (one pass over the
// training trials and (test trials) x B x N multiply-adds per fold); below 1
// the full N x N covariance is used up to Decoder.MaxFull neurons. It equals
// scikit-learn's LinearDiscriminantAnalysis(solver="lsqr", shrinkage=alpha)
// on responses scaled by their within-condition sd (ref_test.go).
// GaussianModel and PoissonModel are maximum-likelihood decoders from an
// encoding model's predicted condition means; with the true tuning they reach
// the Cramer-Rao bound (decode_test.go). Summarize gives the confusion
// matrix, errors in axis units, mean absolute error and its s.e.m.
//
// The Caution strings below belong beside any reported number.
package acuity

// Cautions to print beside the numbers this package computes.
const (
	// CautionTrials goes with every Fisher information estimate.
	CautionTrials = "Linear Fisher information estimates need many more trials than neurons: the bias correction is exact only for Gaussian noise whose covariance is the same in neighbouring conditions, it is defined only for fewer than TA+TB-3 neurons, and its standard error grows steeply as that limit nears."
	// CautionExtrapolation goes with the information of an infinite population.
	CautionExtrapolation = "The information of an infinite population (1/eps) is an extrapolation of the saturation model I(N) = a N/(1 + eps a N) far beyond the largest subset measured: another saturation model can give a different value, and the bootstrap interval covers only which neurons were sampled, not the trial noise they share."
	// CautionDecoder goes with every decoding accuracy or error.
	CautionDecoder = "Decoding accuracy depends on the decoder: another decoder (another noise model, regularisation or a nonlinear one) can do better or worse on the same trials; a decoder's error bounds the population's information only from one side."
)
