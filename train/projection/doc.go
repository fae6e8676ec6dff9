// Package projection holds stria's projected solvers: fits of the
// shared-filter encoder on one-hot input in which, for fixed filters, every
// neuron's readout is solved exactly on the condition rows and only the
// filters are trained, on the resulting (projected) loss.
//
//   - MSE with an identity output: the readout is a weighted ridge solution
//     in closed form (variable projection, eval/methods.md §8), so an epoch
//     costs O(B^2 F + B^3) whatever the number of neurons; the penalty can
//     be chosen from the data at the final filters, for all neurons or per
//     neuron (eval/methods.md §12).
//   - Poisson with a softplus or exp output (the Poisson fast path): each
//     neuron's readout by Newton's method in the span of the condition rows
//     (eval/methods.md §13), the penalty chosen on the validation trials
//     at the final filters. Two ways to train the filters: Poisson (Adam;
//     one inexact Newton step per neuron and epoch from the previous
//     readout, conjugate gradients, O(N B^2) per epoch) and PoissonQN
//     (L-BFGS with a line search, each readout solved tightly at every
//     trial point; train's default: about 18 iterations where Adam takes
//     about 900 epochs). Readouts are solved exactly at the end.
//
// A solver reads a Problem (per-condition statistics of the training and
// validation trials, the z-scoring, the penalty) and a net whose conv
// layers it trains. Its methods Name, Trainable, Begin, Epoch, Validate and
// Random are driven by train's epoch loop, which owns early stopping,
// checkpoints and divergence; Readout (and AutoReadout) write the final
// readout into the net and return the per-bin predictions (B x N, in the
// units of the Problem: z-scored when Problem.Norm is set).
//
// The MSE solver's sums over neurons (S, cvt and the within sums; mse.go)
// are taken over blocks of SumBlock neurons and added in block order
// (sums.go), so that ranges of neurons starting at block boundaries give
// the same sums bit for bit: BlockSumsOf gives a range's, AddBlocks adds
// them into Sums, and a Problem of Sums alone trains the filters of a fit
// whose neurons' statistics are never in one place (stria's array tasks);
// a Problem of a range's statistics and the Sums of all solves that
// range's readouts as the fit of all neurons does.
//
// Letters: B bins (conditions), Bt and Bv those with training and with
// validation trials, F features of the last conv layer, N neurons, W and
// Wv the numbers of training and validation trials. Matrices are row-major
// flat slices. Results do not depend on the number of goroutines.
//
// The products over all neurons (z, the per-bin predictions, the readout
// weights, the validation R^2) and the per-neuron C_p risks run, on amd64
// with AVX2, on two small assembly kernels (kernel_amd64.s: a 4 x 8 tile
// of a matrix product, and a sum of squared scaled values over 8
// neurons), which multiply, then add, in the order gonum's Dgemm and the
// plain Go loops take: every number is the same bit for bit
// (TestMulIntoMatchesDgemm, TestSq8MatchesLoop, TestReadoutWeightsMatchFormer,
// TestValR2MatchesFormer). Elsewhere the same code runs on gonum.
package projection
