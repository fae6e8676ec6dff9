// Package nn is the layer library of stria's convolutional encoding model:
// one-dimensional convolutions shared by the whole population, ReLU, a
// linear readout to every neuron, an output nonlinearity, two losses and the
// Adam optimiser. Every layer is an explicit forward and backward pair; there
// is no tensor type, no graph and no automatic differentiation.
//
// # Conventions
//
// Dimension letters, used in every shape comment:
//
//	R  rows in a batch (stimulus conditions or trials)
//	C  input channels of a convolution, O output channels
//	L  input length along the stimulus axis, M output length (Conv1D.OutLen)
//	K  kernel size, S stride
//	F  features of the readout (channels times length of the last conv layer)
//	N  neurons (readout outputs)
//
// All numbers are float64 in flat row-major slices. A shape written
// [R][C][L] means element (r, c, i) sits at index (r*C+c)*L+i. Flattening a
// convolution output for the readout is channel-major: feature index c*M+i,
// the order of torch's x.flatten(1) on an (R, C, M) tensor.
//
// Functions that write into a caller's buffer take it first (dst, or the
// gradient buffers dx, dw, db). Forward functions overwrite their dst.
// Backward functions of layers with parameters ADD into the parameter
// gradients and into dx, so that zeroing is a separate call (Net.ZeroGrad);
// element-wise backward functions (ReLUBackward, Activation.Backward) and the
// losses overwrite their dst. Scratch space lives in a Work sized by
// Net.NewWork; the forward and backward passes allocate nothing.
//
// Wrong shapes and lengths are programmer errors: they panic with a message
// that starts "nn: ". The package reads no files, no clock and no global
// random source; Net.Init takes a seeded *rand.Rand.
//
// The readout, which dominates the cost, runs on gonum's blas64.Gemv in
// cache blocks of 64 neurons, split into at most 8 neuron partitions that
// worker goroutines of the Work process in parallel. Results are bit-for-bit
// deterministic for given inputs and shape: the partitions depend only on
// the neuron count (not on the number of cores), no two goroutines write the
// same value, and the partial input gradients are summed in partition order.
//
// The reference for every layer is torch 1.13 in float64, through the
// fixtures written by testdata/nn/gen_nn.py, and central finite differences.
package nn
