package projection

import (
	"fmt"
	"slices"
)

// The sums over neurons of the MSE projector (see the comment at the top
// of mse.go) in a fixed grouping, so that a fit spread over ranges of
// neurons (array tasks) gets them bit for bit as a fit of all the neurons
// in one process: the neurons are cut into blocks of SumBlock (block k is
// neurons [k SumBlock, (k+1) SumBlock)), every sum is taken over each
// block alone, in neuron order within it (Gemm over the block for S and
// cvt), and the blocks' sums are added in block order (AddBlocks). The
// grouping depends only on the number of neurons, not on the number of
// cores or of ranges; a range of neurons that starts at a block boundary
// has the BlockSums of its blocks.

// SumBlock is the number of neurons of a block of the sums over neurons.
const SumBlock = neuronBlock

// BlockSums are the sums over the neurons of one block, in the trainer's
// (z-scored) units, before the sqrt(N_b) scaling: with yc_n the centred
// training means of neuron n at the Bt training bins and dv_n its
// validation means minus its training mean at the Bv validation bins,
//
//	S       = sum_n yc_n yc_n^T                Bt x Bt
//	Cvt     = sum_n dv_n yc_n^T                Bv x Bt
//	Yyv     = sum_n dv_n .^ 2                  Bv
//	Within  = sum_n (training within-condition sum of squares of n)
//	WithinV = sum_n (validation within-condition sum of squares of n)
//
// (Cvt and Yyv empty without validation trials).
type BlockSums struct {
	S, Cvt, Yyv     []float64
	Within, WithinV float64
}

// Sums are the sums over all neurons that the filters of a projected MSE
// fit depend on: the blocks' BlockSums added in block order, with the
// trials per condition (B each) of the training and validation trials and
// the number of neurons.
type Sums struct {
	TrainCount, ValCount []int
	Neurons              int
	BlockSums
}

// AddBlocks adds the sums of the blocks of all neurons (in block order)
// into a Sums: the first block's sums, then each next block's added, the
// order of the one-process fit. All blocks must have the shapes of
// trainCount and valCount (it panics otherwise).
func AddBlocks(trainCount, valCount []int, neurons int, blocks []BlockSums) *Sums {
	Bt, Bv := countRows(trainCount), countRows(valCount)
	s := &Sums{TrainCount: slices.Clone(trainCount), ValCount: slices.Clone(valCount), Neurons: neurons}
	s.S = make([]float64, Bt*Bt)
	if Bv > 0 {
		s.Cvt, s.Yyv = make([]float64, Bv*Bt), make([]float64, Bv)
	}
	for k, b := range blocks {
		if len(b.S) != Bt*Bt || len(b.Cvt) != len(s.Cvt) || len(b.Yyv) != len(s.Yyv) {
			panic(fmt.Sprintf("projection: AddBlocks: block %d has %d, %d and %d sums, want %d, %d and %d", k, len(b.S), len(b.Cvt), len(b.Yyv), Bt*Bt, len(s.Cvt), len(s.Yyv)))
		}
		if k == 0 {
			copy(s.S, b.S)
			copy(s.Cvt, b.Cvt)
			copy(s.Yyv, b.Yyv)
			s.Within, s.WithinV = b.Within, b.WithinV
			continue
		}
		addTo(s.S, b.S)
		addTo(s.Cvt, b.Cvt)
		addTo(s.Yyv, b.Yyv)
		s.Within += b.Within
		s.WithinV += b.WithinV
	}
	return s
}

func addTo(dst, v []float64) {
	for i, x := range v {
		dst[i] += x
	}
}

// countRows is the number of conditions with trials.
func countRows(count []int) int {
	r := 0
	for _, c := range count {
		if c > 0 {
			r++
		}
	}
	return r
}

func countSum(count []int) int {
	s := 0
	for _, c := range count {
		s += c
	}
	return s
}

// BlockSumsOf returns the BlockSums of the neurons of a problem of
// PartStats (TrainParts; Sums nil), block by block from its first neuron:
// what an array task of a fit, whose range starts at a block boundary,
// contributes to the sums. It overwrites the Sum arrays of TrainParts and
// ValParts as the solver does (write them elsewhere first).
func BlockSumsOf(pr Problem) ([]BlockSums, error) {
	if pr.TrainParts == nil || pr.Sums != nil {
		panic("projection: BlockSumsOf needs a Problem of PartStats without Sums")
	}
	pj, err := projectorData(&pr, 0, true)
	if err != nil {
		return nil, err
	}
	return pj.blocks, nil
}

// blockSums computes the BlockSums of the projector's neurons (yc, dv,
// withinN, withN of a problem of PartStats), the blocks in parallel.
func (pj *projector) blockSums() []BlockSums {
	Bt, Bv, N := pj.Bt, pj.Bv, pj.N
	out := make([]BlockSums, (N+SumBlock-1)/SumBlock)
	parallelBlocks(N, func(n0, n1 int) {
		b := &out[n0/SumBlock]
		nb := n1 - n0
		// The block's yc transposed (nb x Bt), so that both products
		// are mulInto's x a: each sum over the block's neurons in
		// ascending order, products rounded before they are added.
		// Its rows are padded with zeros to a multiple of 8 (B8) so that
		// the products are whole tiles of the kernel (the same sums: the
		// padding columns are computed and dropped).
		B8 := (Bt + 7) &^ 7
		yt := make([]float64, nb*B8)
		for r := 0; r < Bt; r++ {
			for j, v := range pj.yc[r*N+n0 : r*N+n1] {
				yt[j*B8+r] = v
			}
		}
		sp := make([]float64, max(Bt, Bv)*B8)
		mulSymInto(sp, B8, pj.yc[n0:], N, yt, B8, Bt, nb, B8)
		b.S = make([]float64, Bt*Bt)
		for r := range Bt {
			copy(b.S[r*Bt:(r+1)*Bt], sp[r*B8:])
		}
		for _, w := range pj.withinN[n0:n1] {
			b.Within += w
		}
		if Bv == 0 {
			return
		}
		b.Cvt = make([]float64, Bv*Bt)
		mulInto(sp, B8, pj.dv[n0:], N, yt, B8, Bv, nb, B8)
		for r := range Bv {
			copy(b.Cvt[r*Bt:(r+1)*Bt], sp[r*B8:])
		}
		b.Yyv = make([]float64, Bv)
		for r := range b.Yyv {
			var s float64
			for _, v := range pj.dv[r*N+n0 : r*N+n1] {
				s += v * v
			}
			b.Yyv[r] = s
		}
		for _, w := range pj.withN[n0:n1] {
			b.WithinV += w
		}
	})
	return out
}

// addBlocks sets the projector's sums over neurons from its blocks.
func (pj *projector) addBlocks(blocks []BlockSums) {
	vc := make([]int, pj.B)
	if pj.Bv > 0 {
		for r, b := range pj.vrows {
			vc[b] = int(pj.nv[r])
		}
	}
	s := AddBlocks(pj.count, vc, pj.N, blocks)
	pj.S, pj.cvt, pj.yyv, pj.within, pj.withinV = s.S, s.Cvt, s.Yyv, s.Within, s.WithinV
}

// setSums takes the sums over neurons from s (copied: the projector
// scales its own), checking them against the problem's conditions.
func (pj *projector) setSums(s *Sums, local int, hasLocal bool) error {
	Bt, Bv := pj.Bt, pj.Bv
	switch {
	case len(s.TrainCount) != pj.B || !slices.Equal(s.TrainCount, pj.count):
		return fmt.Errorf("train: the sums over neurons are of other training trials per condition than the neurons' statistics")
	case len(s.ValCount) != pj.B || countRows(s.ValCount) != Bv:
		return fmt.Errorf("train: the sums over neurons are of other validation trials per condition than the neurons' statistics")
	case len(s.S) != Bt*Bt || len(s.Cvt) != Bv*Bt || len(s.Yyv) != Bv:
		return fmt.Errorf("train: the sums over neurons have %d, %d and %d values, want %d, %d and %d", len(s.S), len(s.Cvt), len(s.Yyv), Bt*Bt, Bv*Bt, Bv)
	case hasLocal && local > s.Neurons:
		return fmt.Errorf("train: sums over %d neurons, but %d neurons' statistics", s.Neurons, local)
	}
	for r, b := range pj.vrows {
		if s.ValCount[b] != int(pj.nv[r]) {
			return fmt.Errorf("train: the sums over neurons are of other validation trials per condition than the neurons' statistics")
		}
	}
	pj.S, pj.cvt, pj.yyv = slices.Clone(s.S), slices.Clone(s.Cvt), slices.Clone(s.Yyv)
	pj.within, pj.withinV = s.Within, s.WithinV
	pj.Ntot = float64(s.Neurons)
	return nil
}

// valFromCounts sets the validation rows of a problem of Sums alone.
func (pj *projector) valFromCounts(count []int) {
	for b, c := range count {
		if c > 0 {
			pj.vrows = append(pj.vrows, b)
			pj.nv = append(pj.nv, float64(c))
		}
	}
	pj.Bv = len(pj.vrows)
	pj.Wv = float64(countSum(count))
}
