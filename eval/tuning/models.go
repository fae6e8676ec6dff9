package tuning

import (
	"errors"
	"fmt"
	"math"
	"sort"

	"gonum.org/v1/gonum/mat"
)

// Model is a per-neuron baseline fitted on condition statistics.
type Model interface {
	// Name returns a short identifier of the model kind.
	Name() string
	// Fit fits one neuron from counts N_b and condition means ybar_b at the
	// bin centres, both of length B. Conditions with count 0 are ignored.
	Fit(counts []int, means []float64) error
	// Predict writes the fitted curve at the stimulus values x (axis units)
	// into dst; len(dst) must equal len(x).
	Predict(dst, x []float64)
	// Params returns the fitted parameters in the order documented by the
	// constructor. The slice is owned by the model and overwritten by Fit.
	Params() []float64
}

// ErrNoData is returned (wrapped) by Fit when no condition has a trial.
var ErrNoData = errors.New("no condition has a trial")

// checkData validates one neuron's condition statistics: lengths are a
// programmer error (panic), bad values a data error. It returns the count
// weighted grand mean and the number of non-empty conditions.
func checkData(name string, nbins int, counts []int, means []float64) (grand float64, present int, err error) {
	if len(counts) != nbins || len(means) != nbins {
		panic(fmt.Sprintf("tuning: %s.Fit: got %d counts and %d means for %d bins", name, len(counts), len(means), nbins))
	}
	var tot float64
	for b, c := range counts {
		if c < 0 {
			return 0, 0, fmt.Errorf("tuning: %s: condition %d has negative count %d", name, b, c)
		}
		if c == 0 {
			continue
		}
		if math.IsNaN(means[b]) || math.IsInf(means[b], 0) {
			return 0, 0, fmt.Errorf("tuning: %s: condition %d has mean %v", name, b, means[b])
		}
		grand += float64(c) * means[b]
		tot += float64(c)
		present++
	}
	if present == 0 {
		return 0, 0, fmt.Errorf("tuning: %s: %w", name, ErrNoData)
	}
	return grand / tot, present, nil
}

// checkCenters panics unless centers is non-empty and strictly ascending.
func checkCenters(name string, centers []float64, period float64) {
	if len(centers) == 0 {
		panic("tuning: " + name + ": no bin centres")
	}
	for k := 1; k < len(centers); k++ {
		if !(centers[k] > centers[k-1]) {
			panic("tuning: " + name + ": bin centres must be strictly ascending")
		}
	}
	if period < 0 || math.IsNaN(period) {
		panic("tuning: " + name + ": negative period")
	}
}

// nearestBin returns the index of the centre nearest x (ascending centres),
// wrapping around on a periodic axis. O(log B).
func nearestBin(centers []float64, x, period float64) int {
	n := len(centers)
	if period > 0 {
		x = centers[0] + math.Mod(math.Mod(x-centers[0], period)+period, period)
	}
	k := sort.SearchFloat64s(centers, x) // centers[k-1] < x <= centers[k]
	if k == 0 {
		if period > 0 && (centers[0]-x) > (x+period-centers[n-1]) {
			return n - 1
		}
		return 0
	}
	if k == n {
		if period > 0 && (centers[0]+period-x) < (x-centers[n-1]) {
			return 0
		}
		return n - 1
	}
	if x-centers[k-1] <= centers[k]-x {
		return k - 1
	}
	return k
}

// CondMean is the lookup-table baseline: the prediction for a bin is the
// training mean of that bin; bins without training trials get the
// count-weighted grand mean. Params are the B bin values.
type CondMean struct {
	centers []float64 // nil: Predict takes bin indices
	period  float64
	w       []float64
}

// NewCondMean returns a lookup-table model over nbins bins without an axis:
// its Predict takes bin indices as float64 values (rounded to the nearest
// integer and clamped to [0, nbins-1]). Use NewCondMeanAt to predict at
// stimulus values in axis units.
func NewCondMean(nbins int) Model {
	if nbins <= 0 {
		panic("tuning: NewCondMean: nbins must be positive")
	}
	return &CondMean{w: make([]float64, nbins)}
}

// NewCondMeanAt returns a lookup-table model whose Predict maps stimulus
// values in axis units to the nearest bin centre (around the circle when
// period > 0).
func NewCondMeanAt(centers []float64, period float64) *CondMean {
	checkCenters("NewCondMeanAt", centers, period)
	return &CondMean{centers: append([]float64(nil), centers...), period: period, w: make([]float64, len(centers))}
}

// Name returns "condmean".
func (m *CondMean) Name() string { return "condmean" }

// Fit stores the condition means.
func (m *CondMean) Fit(counts []int, means []float64) error {
	grand, _, err := checkData("condmean", len(m.w), counts, means)
	if err != nil {
		for b := range m.w {
			m.w[b] = math.NaN()
		}
		return err
	}
	for b, c := range counts {
		if c > 0 {
			m.w[b] = means[b]
		} else {
			m.w[b] = grand
		}
	}
	return nil
}

// Predict writes the bin value of each x into dst.
func (m *CondMean) Predict(dst, x []float64) {
	if len(dst) != len(x) {
		panic("tuning: CondMean.Predict: len(dst) != len(x)")
	}
	for i, v := range x {
		dst[i] = m.w[m.bin(v)]
	}
}

// PredictBins writes the bin values of the bin indices bins into dst.
func (m *CondMean) PredictBins(dst []float64, bins []int) {
	if len(dst) != len(bins) {
		panic("tuning: CondMean.PredictBins: len(dst) != len(bins)")
	}
	for i, b := range bins {
		dst[i] = m.w[b]
	}
}

func (m *CondMean) bin(v float64) int {
	if m.centers != nil {
		return nearestBin(m.centers, v, m.period)
	}
	b := int(math.Round(v))
	return max(0, min(b, len(m.w)-1))
}

// Params returns the B bin values.
func (m *CondMean) Params() []float64 { return m.w }

// SmoothLinear is a linear model on the one-hot bin code with a
// second-difference smoothness penalty (generalised ridge, Tikhonov):
//
//	minimise sum_b N_b (w_b - ybar_b)^2 + lambda sum_j (w_{j-1} - 2 w_j + w_{j+1})^2,
//
// solved in closed form, (D + lambda L^T L) w = D ybar with D = diag(N_b). On a
// periodic axis the differences wrap around (j = 0..B-1, indices mod B); on a
// non-periodic axis j = 1..B-2. The penalty treats the bins as evenly spaced.
// lambda is in units of trials: lambda = N weighs the roughness of the curve
// like N trials per bin weigh its fit. Empty bins are filled in smoothly by
// the penalty. Params are the B fitted bin values w_b.
//
// The penalty leaves constants (periodic) or straight lines (non-periodic)
// unpenalised, so it needs at least one (periodic) or two (non-periodic)
// non-empty bins; with fewer, or lambda = 0, empty bins get the grand mean.
// The factorisation is reused while the counts do not change, so fitting
// many neurons with the same counts costs one B x B solve each.
type SmoothLinear struct {
	centers []float64
	period  float64
	lambda  float64
	w       []float64
	penalty *mat.SymDense // lambda L^T L
	chol    mat.Cholesky
	cached  []int // counts of the current factorisation; nil if none
	rhs     *mat.VecDense
	sol     *mat.VecDense
	a       *mat.SymDense
}

// NewSmoothLinear returns a smoothed lookup-table model; lambda >= 0.
func NewSmoothLinear(centers []float64, period float64, lambda float64) Model {
	checkCenters("NewSmoothLinear", centers, period)
	if lambda < 0 || math.IsNaN(lambda) {
		panic("tuning: NewSmoothLinear: lambda must be >= 0")
	}
	B := len(centers)
	m := &SmoothLinear{
		centers: append([]float64(nil), centers...), period: period, lambda: lambda,
		w: make([]float64, B), penalty: mat.NewSymDense(B, nil), a: mat.NewSymDense(B, nil),
		rhs: mat.NewVecDense(B, nil), sol: mat.NewVecDense(B, nil),
	}
	// Accumulate lambda L^T L row by row of L.
	addRow := func(i, j, k int) { // row with +1 at i, -2 at j, +1 at k
		idx := [3]int{i, j, k}
		coef := [3]float64{1, -2, 1}
		for p := 0; p < 3; p++ {
			for q := 0; q < 3; q++ {
				if idx[p] <= idx[q] {
					m.penalty.SetSym(idx[p], idx[q], m.penalty.At(idx[p], idx[q])+lambda*coef[p]*coef[q])
				}
			}
		}
	}
	if period > 0 && B >= 3 {
		for j := 0; j < B; j++ {
			addRow((j+B-1)%B, j, (j+1)%B)
		}
	} else if B >= 3 {
		for j := 1; j < B-1; j++ {
			addRow(j-1, j, j+1)
		}
	}
	return m
}

// Name returns "smoothlinear".
func (m *SmoothLinear) Name() string { return "smoothlinear" }

// Fit solves the penalised least-squares problem for one neuron.
func (m *SmoothLinear) Fit(counts []int, means []float64) error {
	B := len(m.w)
	grand, present, err := checkData("smoothlinear", B, counts, means)
	if err != nil {
		for b := range m.w {
			m.w[b] = math.NaN()
		}
		return err
	}
	need := 2
	if m.period > 0 {
		need = 1
	}
	if m.lambda == 0 || present < need || B < 3 {
		for b, c := range counts {
			if c > 0 {
				m.w[b] = means[b]
			} else {
				m.w[b] = grand
			}
		}
		return nil
	}
	if !sameCounts(m.cached, counts) {
		m.a.CopySym(m.penalty)
		for b, c := range counts {
			m.a.SetSym(b, b, m.a.At(b, b)+float64(c))
		}
		if ok := m.chol.Factorize(m.a); !ok {
			m.cached = nil
			for b := range m.w {
				m.w[b] = math.NaN()
			}
			return fmt.Errorf("tuning: smoothlinear: penalised normal equations are singular")
		}
		m.cached = append(m.cached[:0], counts...)
	}
	for b, c := range counts {
		v := 0.0
		if c > 0 {
			v = float64(c) * means[b]
		}
		m.rhs.SetVec(b, v)
	}
	if err := m.chol.SolveVecTo(m.sol, m.rhs); err != nil {
		// A near-singular warning from gonum: the solution is still usable.
		var cond mat.Condition
		if !errors.As(err, &cond) {
			return fmt.Errorf("tuning: smoothlinear: %v", err)
		}
	}
	for b := range m.w {
		m.w[b] = m.sol.AtVec(b)
	}
	return nil
}

func sameCounts(a, b []int) bool {
	if a == nil || len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// Predict writes the value of the bin nearest each x into dst.
func (m *SmoothLinear) Predict(dst, x []float64) {
	if len(dst) != len(x) {
		panic("tuning: SmoothLinear.Predict: len(dst) != len(x)")
	}
	for i, v := range x {
		dst[i] = m.w[nearestBin(m.centers, v, m.period)]
	}
}

// Params returns the B fitted bin values.
func (m *SmoothLinear) Params() []float64 { return m.w }
