// Package prep holds the input checks and data summaries that the em, tmix
// and vb fitters share: the shape, finiteness and magnitude of the data
// matrix, the row weights, the weighted mean and covariance, the per-feature
// scales used for seeding distances, and the count of distinct rows.
//
// The fitters differ on purpose in their limits (vb and em accept smaller
// magnitudes than tmix; only em bounds a single weight) and in how they scale
// the weights (em and tmix divide them by their maximum, vb keeps them as
// given); those choices are parameters here, never defaults. Error messages
// name the row, column or field and are the ones the fitters have always
// returned.
package prep

import (
	"math"

	"github.com/mixd-dev/mixd/fitters"
)

// Rows is a row-major data matrix with optional row weights. It is only
// read, never written.
type Rows struct {
	// N rows of D values each, in X.
	N, D int
	X    []float64
	// W holds the weight of each row as used in weighted sums; nil means
	// every row has weight 1.
	W []float64
}

// Row returns row i as a slice into X.
func (r *Rows) Row(i int) []float64 { return r.X[i*r.D : (i+1)*r.D] }

// Weight returns the weight of row i.
func (r *Rows) Weight(i int) float64 {
	if r.W == nil {
		return 1
	}
	return r.W[i]
}

// Tri is the length of a packed lower triangle of a d×d matrix.
func Tri(d int) int { return d * (d + 1) / 2 }

// CheckValues checks that data holds Rows×Cols values (at least one of
// each), all finite and at most maxAbs in magnitude. The error is an
// InvalidArgument naming the first offending row and column.
func CheckValues(data fitters.Data, maxAbs float64) error {
	switch {
	case data.Rows < 1:
		return fitters.Errorf(fitters.InvalidArgument, "data: no rows (rows is %d)", data.Rows)
	case data.Cols < 1:
		return fitters.Errorf(fitters.InvalidArgument, "data: no columns (cols is %d)", data.Cols)
	case data.Rows > math.MaxInt/data.Cols || len(data.Values) != data.Rows*data.Cols:
		return fitters.Errorf(fitters.InvalidArgument, "data: %d values for %d rows x %d columns", len(data.Values), data.Rows, data.Cols)
	}
	d := data.Cols
	for i, v := range data.Values {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fitters.Errorf(fitters.InvalidArgument, "data: row %d column %d is %v (values must be finite)", i/d, i%d, v)
		}
		if math.Abs(v) > maxAbs {
			return fitters.Errorf(fitters.InvalidArgument, "data: row %d column %d is %g, beyond the supported magnitude %g", i/d, i%d, v, maxAbs)
		}
	}
	return nil
}

// Weights summarises a validated weight vector.
type Weights struct {
	// Sum is Σ w (the row count for unit weights), Max the largest weight
	// (1 for unit weights) and Positive the number of positive weights.
	Sum      float64
	Max      float64
	Positive int
}

// CheckWeights validates the weights of rows rows: nil (unit weights), or
// one finite non-negative weight per row, not all zero, with a finite sum.
// A positive maxWeight also bounds each weight; zero means no bound beyond
// finiteness. The error is an InvalidArgument naming the first offending row.
func CheckWeights(w []float64, rows int, maxWeight float64) (Weights, error) {
	if w == nil {
		return Weights{Sum: float64(rows), Max: 1, Positive: rows}, nil
	}
	if len(w) != rows {
		return Weights{}, fitters.Errorf(fitters.InvalidArgument, "weights: %d weights for %d rows", len(w), rows)
	}
	var s Weights
	for i, v := range w {
		if math.IsNaN(v) || math.IsInf(v, 0) || v < 0 {
			return Weights{}, fitters.Errorf(fitters.InvalidArgument, "weights: row %d has weight %v (weights must be finite and non-negative)", i, v)
		}
		if maxWeight > 0 && v > maxWeight {
			return Weights{}, fitters.Errorf(fitters.InvalidArgument, "weights: row %d has weight %g, beyond the supported maximum %g", i, v, maxWeight)
		}
		s.Max = math.Max(s.Max, v)
		s.Sum += v
		if v > 0 {
			s.Positive++
		}
	}
	if s.Positive == 0 {
		return Weights{}, fitters.Errorf(fitters.InvalidArgument, "weights: every weight is zero")
	}
	if math.IsInf(s.Sum, 0) {
		return Weights{}, fitters.Errorf(fitters.InvalidArgument, "weights: their sum overflows")
	}
	return s, nil
}

// Relative returns w divided by its maximum wmax, so that no weighted sum
// of the relative weights can overflow, with their sum and the number of
// them that are positive (a tiny weight can underflow to zero here).
func Relative(w []float64, wmax float64) (rel []float64, sum float64, positive int) {
	rel = make([]float64, len(w))
	for i, v := range w {
		rel[i] = v / wmax
		sum += rel[i]
		if rel[i] > 0 {
			positive++
		}
	}
	return rel, sum, positive
}

// Moments returns the weighted mean of the rows, Σ w x / meanDiv, and their
// centred weighted co-moments Σ w (x−mean)(x−mean)ᵀ / covDiv as a packed
// lower triangle (Tri(D) values, row by row). Rows of zero weight are
// skipped. Two passes, for accuracy.
func (r *Rows) Moments(meanDiv, covDiv float64) (mean, cov []float64) {
	n, d := r.N, r.D
	mean = make([]float64, d)
	for i := 0; i < n; i++ {
		wi := r.Weight(i)
		if wi == 0 {
			continue
		}
		for j, v := range r.Row(i) {
			mean[j] += wi * v
		}
	}
	for j := range mean {
		mean[j] /= meanDiv
	}
	cov = make([]float64, Tri(d))
	dev := make([]float64, d)
	for i := 0; i < n; i++ {
		wi := r.Weight(i)
		if wi == 0 {
			continue
		}
		for j, v := range r.Row(i) {
			dev[j] = v - mean[j]
		}
		AddOuter(cov, dev, wi)
	}
	for i := range cov {
		cov[i] /= covDiv
	}
	return mean, cov
}

// AddOuter adds w·dev devᵀ to the packed lower triangle s (row j gets
// (w·dev_j)·dev_l for l ≤ j).
func AddOuter(s, dev []float64, w float64) {
	off := 0
	for j := range dev {
		wd := w * dev[j]
		for l := 0; l <= j; l++ {
			s[off+l] += wd * dev[l]
		}
		off += j + 1
	}
}

// Diagonal returns the diagonal of a packed lower triangle of a d×d matrix.
func Diagonal(packed []float64, d int) []float64 {
	out := make([]float64, d)
	for j := range out {
		out[j] = packed[Tri(j)+j]
	}
	return out
}

// Scales returns 1/sd for every feature, sd being the square root of
// variance[j], for distances on standardised features. A feature whose
// variance is not clearly positive, or whose sd is negligible next to its
// largest magnitude over the rows of positive weight, is constant for every
// practical purpose: the error is a FailedPrecondition naming the first such
// column.
func (r *Rows) Scales(variance []float64) ([]float64, error) {
	scale := make([]float64, r.D)
	for j, v := range variance {
		var maxAbs float64
		for i := 0; i < r.N; i++ {
			if r.Weight(i) > 0 {
				maxAbs = math.Max(maxAbs, math.Abs(r.X[i*r.D+j]))
			}
		}
		sd := math.Sqrt(v)
		if !(v > 1e-280) || sd <= 1e-12*maxAbs {
			return nil, fitters.Errorf(fitters.FailedPrecondition, "data: column %d is constant (standard deviation %g over rows with positive weight); drop it", j, sd)
		}
		scale[j] = 1 / sd
	}
	return scale, nil
}

// DistinctAtLeast returns min(limit, number of distinct rows of positive
// weight), stopping as soon as limit distinct rows are found. −0 and +0
// count as the same value.
func (r *Rows) DistinctAtLeast(limit int) int {
	seen := make(map[string]struct{}, min(limit, r.N))
	key := make([]byte, 8*r.D)
	for i := 0; i < r.N && len(seen) < limit; i++ {
		if r.Weight(i) == 0 {
			continue
		}
		for j, v := range r.Row(i) {
			b := math.Float64bits(v + 0) // +0 folds -0 into 0
			for t := 0; t < 8; t++ {
				key[8*j+t] = byte(b >> (8 * t))
			}
		}
		seen[string(key)] = struct{}{}
	}
	return len(seen)
}

// RequireDistinct fails with a FailedPrecondition when fewer than k rows of
// positive weight are distinct: k components cannot be told apart then.
func (r *Rows) RequireDistinct(k int) error {
	if got := r.DistinctAtLeast(k); got < k {
		return fitters.Errorf(fitters.FailedPrecondition, "%d components requested but the data has only %d distinct rows with positive weight", k, got)
	}
	return nil
}

// Limits are a fitter's bounds on its input.
type Limits struct {
	// MaxAbsValue is the largest accepted magnitude of a data value.
	MaxAbsValue float64
	// MaxWeight, when positive, is the largest accepted row weight.
	MaxWeight float64
}

// Summary is validated training data with relative weights and the
// weighted statistics the em and tmix fitters start from.
type Summary struct {
	// Rows holds the caller's values; Rows.W the relative weights w/max(w)
	// (nil when unweighted), so that no weighted sum can overflow.
	Rows
	// Given is the caller's weights (nil for unit weights).
	Given []float64
	// WScale is max(w): a caller-scale sum is WScale times the relative one.
	WScale float64
	// WSum is Σ w on the caller's scale (N when unweighted); RelSum is Σ of
	// the relative weights; Positive counts rows of positive relative weight.
	WSum     float64
	RelSum   float64
	Positive int

	// Mean, Var and Cov are the weighted mean, (maximum-likelihood) variance
	// and covariance (packed lower triangle) of every feature; Scale is
	// 1/sd per feature, for seeding distances.
	Mean, Var, Cov, Scale []float64
}

// Summarise validates data against lim and computes its Summary.
func Summarise(data fitters.Data, lim Limits) (*Summary, error) {
	if err := CheckValues(data, lim.MaxAbsValue); err != nil {
		return nil, err
	}
	w, err := CheckWeights(data.Weights, data.Rows, lim.MaxWeight)
	if err != nil {
		return nil, err
	}
	s := &Summary{
		Rows:   Rows{N: data.Rows, D: data.Cols, X: data.Values},
		Given:  data.Weights,
		WScale: 1,
		WSum:   w.Sum,
		RelSum: w.Sum,
	}
	s.Positive = w.Positive
	if data.Weights != nil {
		s.WScale = w.Max
		s.W, s.RelSum, s.Positive = Relative(data.Weights, w.Max)
	}
	s.Mean, s.Cov = s.Moments(s.RelSum, s.RelSum)
	s.Var = Diagonal(s.Cov, s.D)
	if s.Scale, err = s.Scales(s.Var); err != nil {
		return nil, err
	}
	return s, nil
}
