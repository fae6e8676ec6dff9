package projection

import (
	"fmt"

	"github.com/strialab/stria/data/condstats"
	"github.com/strialab/stria/eval"
)

// Problem is a one-hot, full-batch fit reduced to what the projected
// solvers read: the per-condition statistics of the training and the
// validation trials and how the responses are scaled.
type Problem struct {
	// Train and Val are the per-condition statistics (B conditions, N
	// neurons) of the training and validation trials, in the recording's
	// units; Val may be nil or hold no trials (no validation).
	Train, Val *condstats.Stats
	// TrainParts and ValParts, when TrainParts is not nil, take the place
	// of Train and Val: the statistics of one pass over a recording
	// (condstats.AccumulateParts; ValParts may be nil or hold no trials).
	// The solver keeps its centred condition means in their Sum arrays,
	// which it overwrites: at a million neurons that saves a B x N copy
	// of each.
	TrainParts, ValParts *condstats.PartStats
	// Sums, when not nil, are the sums over all the neurons that the
	// filters depend on (AddBlocks of the BlockSums of every range of
	// neurons). Alone (Train and TrainParts nil) they are a problem with
	// no neuron's data: the filters can be trained on it but no readout
	// solved (a fit's reduce step). With TrainParts of a range of the
	// neurons they take the place of that range's own sums: the readouts
	// of the range are those of a fit of all the neurons.
	Sums *Sums
	// Norm z-scores the responses (nil: none); the solvers work in the
	// z-scored units and return predictions in them.
	Norm *condstats.Normalizer
	// Penalty is model.readout_l2, the ridge penalty the filters train
	// with (> 0).
	Penalty float64
	// Excluded are neurons that take no part in training (constant ones:
	// train's Report.Constant), in increasing order; the Poisson fast path
	// gives them a zero readout at their mean rate and leaves them out of
	// its losses, as the adam path does. The MSE solver does not read it.
	Excluded []int
	// NeuronName and BinLabel name a neuron and a condition in errors
	// (nil: by index).
	NeuronName func(n int) string
	BinLabel   func(b int) string
}

func (pr *Problem) hasVal() bool {
	if pr.TrainParts == nil && pr.Train == nil {
		return pr.Sums != nil && countSum(pr.Sums.ValCount) > 0
	}
	if pr.TrainParts != nil {
		return pr.ValParts != nil && pr.ValParts.Trials > 0
	}
	return pr.Val != nil && trials(pr.Val) > 0
}

// dims returns the numbers of conditions and neurons and the training
// trials per condition.
func (pr *Problem) dims() (B, N int, count []int) {
	if pr.TrainParts != nil {
		return pr.TrainParts.B, pr.TrainParts.N, pr.TrainParts.Count
	}
	if pr.Train == nil && pr.Sums != nil {
		return len(pr.Sums.TrainCount), 0, pr.Sums.TrainCount
	}
	return pr.Train.B, pr.Train.N, pr.Train.Count
}

func (pr *Problem) neuronName(n int) string {
	if pr.NeuronName != nil {
		return pr.NeuronName(n)
	}
	return fmt.Sprintf("neuron %d", n)
}

func (pr *Problem) binLabel(b int) string {
	if pr.BinLabel != nil {
		return pr.BinLabel(b)
	}
	return fmt.Sprintf("bin %d", b)
}

// trials is the number of trials behind st.
func trials(st *condstats.Stats) int {
	n := 0
	for _, k := range st.Count {
		n += k
	}
	return n
}

// median returns the median of x (x is reordered); NaN if empty.
func median(x []float64) float64 { return eval.Median(x) }
