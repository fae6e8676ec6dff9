// Package state models the part of a neuron's trial-to-trial variability
// that follows the animal's state (running, arousal, a shared population
// gain) as a gain and an offset on the stimulus tuning curve, instead of
// counting it as noise.
//
// # Model
//
// For trial t, neuron n, K per-trial covariates c_tk (running speed, pupil
// area, ...) standardised to z_tk, and the stimulus tuning f_n(s) of the
// condition shown on trial t:
//
//	y_tn = (1 + sum_k a_nk z_tk) f_n(s_t) + sum_k o_nk z_tk + b_n + noise.
//
// a_nk is a gain (fractional change of the stimulus-driven response per
// standard deviation of covariate k), o_nk an offset (response units per
// standard deviation), b_n a bias. This is the affine model of shared
// variability: Lin IC, Okun M, Carandini M, Harris KD (2015) The nature of
// shared cortical variability. Neuron 87:644-656 [mem]; Arandia-Romero I,
// Tanabe S, Drugowitsch J, Kohn A, Moreno-Bote R (2016) Multiplicative and
// additive modulation of neuronal tuning with population activity affects
// encoded information. Neuron 89:1305-1316 [mem]. Running multiplies visual
// responses in mouse V1 (Niell CM, Stryker MP 2010, Neuron 65:472-479
// [mem]).
//
// # What the package does
//
//   - FitAffine: the state terms of every neuron with the tuning held fixed
//     (condition means, a von Mises fit or the encoder's prediction):
//     per-neuron least squares of y - f on [z f, z, 1], closed form, with an
//     optional scale-free ridge.
//   - FitFree: tuning and state terms together, for a free per-condition
//     tuning; ConditionTargets gives the weighted per-condition targets and
//     weights through which the shared encoder can fit its stimulus part.
//   - PopulationState, CrossGain: a shared gain (and offset) per trial read
//     from the population itself when there is no covariate file, scored so
//     that no neuron's own test response informs its prediction.
//   - NewCovariates, NewStandardizer, ConditionShare, StimulusLinked: checks
//     of the covariates, their standardisation, and the warning for a
//     covariate tied to the stimulus.
//   - Simulate: a population with planted speed effects and a planted
//     latent gain, with the variance shares a fit should recover.
//
// # Shapes and conventions
//
//   - Responses y are T x N row-major float32, as loaded (y[t*N+n]); every
//     sum is taken in float64. Trials, neurons and conditions are numbered
//     from 0 and messages say "(0-based)". cond[t] in [0, B) is the
//     condition of row t; train and test list rows.
//   - Tuning f is B x N (f[b*N+n]), covariates c and z-scores z are T x K
//     (c[t*K+k]); per-neuron coefficients are N x K (Gain[n*K+k]).
//   - Everything is fitted on the training trials only; the standardisation
//     too (Standardizer: mean and ddof-0 standard deviation of the training
//     trials, eval/methods.md §0). Standardised coefficients map back to the
//     covariates' units with Standardizer.Raw.
//   - The fits work from condition sums (Stats): one pass over the training
//     trials, then O(B K^2) per neuron, the same idea as eval/methods.md §8.
//     Responses enter centred within their condition, so objectives keep
//     their precision.
//   - Neurons are fitted independently, so results do not depend on the
//     number of cores or on the column order of the neurons; the split into
//     halves (SplitHalves) follows neuron ids, not columns.
//   - Programmer errors (shapes) panic with "state: ...". Bad data (NaN or
//     infinite responses or covariates, wrong lengths, constant covariates,
//     a trial whose condition is out of range) return errors naming the
//     covariate, trial or neuron. A neuron whose gain and offset cannot be
//     told apart gets status Confounded and NaN coefficients, never a silent
//     number.
//
// # Fixed tuning (FitAffine) [derived]
//
// With f held fixed the model is linear in (a, o, b): the target is
// r_t = y_t - f(s_t), the regressors x_t = (z_t f(s_t), z_t, 1). The normal
// equations X^T X beta = X^T r come from the condition sums S1_b = sum z_t,
// S2_b = sum z_t z_t^T, the condition means and Cross_b = sum (y_t - ybar_b)
// z_t. The ridge adds ridge times the diagonal of X^T X to the gain and
// offset rows (not the bias): ridge regression on regressors scaled to unit
// root mean square, so it does not depend on units.
//
// Fixing the tuning at the training condition means shrinks the state terms:
// the means have absorbed each condition's average state, so the part of a
// covariate that varies between conditions (present by chance even for an
// independent covariate, NullShare) carries no signal, and the fitted gains
// shrink by about the covariate's condition share or more (on the
// simulation: to 0.93 of the planted gains). FitFree, which fits tuning and
// state terms together, has no such shrinkage (1.00); prefer it when the
// gains themselves are reported. For held-out prediction the difference is
// small.
//
// # Free tuning (FitFree, ConditionTargets) [derived]
//
// For fixed state terms the best tuning of condition b is
// f_b = sum_{t in b} g_t (y_t - h_t) / sum_{t in b} g_t^2 with g_t = 1 + a.z_t
// and h_t = o.z_t + b: a weighted condition mean. The objective is
// sum_b W_b (T_b - f_b)^2 plus a constant, so an encoder fits the state
// model's stimulus part by weighted least squares on B rows with per-neuron
// weights W_b = sum g_t^2 and targets T_b (ConditionTargets). A free tuning
// absorbs the bias (f + d, o + d a, b - d fit equally well), so FitFree has
// none. Alternating the two exact block minimisations lowers the objective
// monotonically but crawls along the valley where gain and offset trade off
// (neurons with flat tuning); the default joint Gauss-Newton step with
// backtracking reaches the same optimum in fewer rounds (9 against 15 on the
// package's simulation with two covariates).
//
// # Shared state from the population (PopulationState, CrossGain)
//
// Without covariates, trial t's shared gain is read from a group of neurons
// by weighted least squares of y_tn - f_n(s_t) on f_n(s_t) (gain only) or on
// (f_n(s_t), 1) (gain and offset). Rate weights 1/f suit Poisson-like
// noise; the gain-only estimate is then sum_n (y_tn - f_n) / sum_n f_n, the
// Poisson maximum-likelihood gain [derived]. On the simulation of this
// package rate weights recover the planted gain best (inverse noise variance
// weights, which count the shared gain's own variance as noise, are worse).
// CrossGain splits the neurons in two halves and predicts each half from the
// other half's per-trial terms, used as standardised covariates of
// FitAffine; the couplings are fitted on training trials.
//
// # Scores and the noise ceiling
//
// ScoreHeldOut reports, per neuron, the held-out R^2 (eval/methods.md §5) of
// the stimulus-only prediction f and of the state model, and their
// difference. A state model can score above the stimulus-only noise
// ceiling (the explainable fraction of eval/methods.md §4): the ceiling is
// built from the within-condition variance, which counts state-driven
// variance as noise, and the state model predicts part of that variance.
// Its FEV can therefore exceed 1 without anything being wrong; report its
// R^2 and the gain over the stimulus-only R^2, and keep FEV, CC_norm and SPE
// for stimulus models.
//
// # Caution: a covariate tied to the stimulus steals stimulus variance
//
// If a covariate differs between conditions (the animal runs more during
// some stimuli, the pupil follows luminance), its state terms are fitted
// partly on differences between conditions, which the tuning should
// explain: with a fixed tuning the covariate is credited with, or
// distorted by, part of the tuning; with a free tuning the two trade off and
// the split is arbitrary. ConditionShare measures each covariate's share of
// variance explained by the condition (eta squared); StimulusLinked lists
// the covariates above a threshold (DefaultShareThreshold, 0.1) so the
// caller can warn, naming them. An unrelated covariate has a share near
// (B - 1)/(T - 1) (NullShare).
//
// # The simulation (Simulate) [derived]
//
// With running speed independent of the stimulus and standardised by its
// population moments (E z = 0, E z^2 = 1), a latent gain l_t of variance
// sigma_l^2 independent of both, and noise variance Fano f,
//
//	Var(y_n) = Var_s(f) + E_s[(a f + o)^2] + beta^2 sigma_l^2 E_s[f^2] + Fano E_s[f],
//
// because every cross term has mean zero. Knowing speed removes the second
// term from the residual: the held-out R^2 rises by E_s[(a f + o)^2] /
// Var(y_n) (Sim.Predict), less about 3 (1 - R^2) / W for the three fitted
// parameters. The tests check this within 0.025, three standard deviations
// of the seed-to-seed spread. Measured numbers are in the tests' logs.
package state
