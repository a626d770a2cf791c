package vb

import (
	"math"
	"math/rand/v2"

	"github.com/mixd-dev/mixd/fitters"
)

// MaxAbsValue is the largest accepted magnitude of a data value. The
// posterior inverse scale matrices hold sums of squared deviations over all
// rows, so the limit is lower than the em fitter's: 1e100 leaves room for
// 1e100 rows before anything could overflow.
const MaxAbsValue = 1e100

// problem is the validated training matrix and its summary statistics.
type problem struct {
	n, d int
	x    []float64 // row-major, the caller's slice (never written)
	w    []float64 // caller's frequency weights, nil for unit weights
	wsum float64   // Σ w (n when unweighted)
	nPos int       // rows with positive weight

	mean []float64 // weighted mean per feature
	// cov is the weighted sample covariance, D×D row-major, with divisor
	// wsum−1 (wsum when wsum ≤ 1): the default inverse scale of the Wishart.
	cov   []float64
	scale []float64 // 1/sd per feature, for seeding distances
}

// weight returns the weight of row i.
func (p *problem) weight(i int) float64 {
	if p.w == nil {
		return 1
	}
	return p.w[i]
}

func (p *problem) row(i int) []float64 { return p.x[i*p.d : (i+1)*p.d] }

// newProblem validates data and computes its mean and covariance. Errors name
// the row, column or field.
func newProblem(data fitters.Data) (*problem, error) {
	switch {
	case data.Rows < 1:
		return nil, fitters.Errorf(fitters.InvalidArgument, "data: no rows (rows is %d)", data.Rows)
	case data.Cols < 1:
		return nil, fitters.Errorf(fitters.InvalidArgument, "data: no columns (cols is %d)", data.Cols)
	case data.Rows > math.MaxInt/data.Cols || len(data.Values) != data.Rows*data.Cols:
		return nil, fitters.Errorf(fitters.InvalidArgument, "data: %d values for %d rows x %d columns", len(data.Values), data.Rows, data.Cols)
	}
	n, d := data.Rows, data.Cols
	for i, v := range data.Values {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fitters.Errorf(fitters.InvalidArgument, "data: row %d column %d is %v (values must be finite)", i/d, i%d, v)
		}
		if math.Abs(v) > MaxAbsValue {
			return nil, fitters.Errorf(fitters.InvalidArgument, "data: row %d column %d is %g, beyond the supported magnitude %g", i/d, i%d, v, MaxAbsValue)
		}
	}
	p := &problem{n: n, d: d, x: data.Values}
	if data.Weights != nil {
		if len(data.Weights) != n {
			return nil, fitters.Errorf(fitters.InvalidArgument, "weights: %d weights for %d rows", len(data.Weights), n)
		}
		for i, v := range data.Weights {
			if math.IsNaN(v) || math.IsInf(v, 0) || v < 0 {
				return nil, fitters.Errorf(fitters.InvalidArgument, "weights: row %d has weight %v (weights must be finite and non-negative)", i, v)
			}
			p.wsum += v
			if v > 0 {
				p.nPos++
			}
		}
		if p.nPos == 0 {
			return nil, fitters.Errorf(fitters.InvalidArgument, "weights: every weight is zero")
		}
		if math.IsInf(p.wsum, 0) {
			return nil, fitters.Errorf(fitters.InvalidArgument, "weights: their sum overflows")
		}
		p.w = data.Weights
	} else {
		p.wsum = float64(n)
		p.nPos = n
	}

	// Weighted mean, then the centred covariance (two passes for accuracy).
	p.mean = make([]float64, d)
	for i := 0; i < n; i++ {
		wi := p.weight(i)
		if wi == 0 {
			continue
		}
		for j, v := range p.row(i) {
			p.mean[j] += wi * v
		}
	}
	for j := range p.mean {
		p.mean[j] /= p.wsum
	}
	p.cov = make([]float64, d*d)
	dev := make([]float64, d)
	for i := 0; i < n; i++ {
		wi := p.weight(i)
		if wi == 0 {
			continue
		}
		for j, v := range p.row(i) {
			dev[j] = v - p.mean[j]
		}
		for a := 0; a < d; a++ {
			wa := wi * dev[a]
			for b := 0; b <= a; b++ {
				p.cov[a*d+b] += wa * dev[b]
			}
		}
	}
	div := p.wsum - 1
	if div <= 0 {
		div = p.wsum
	}
	for a := 0; a < d; a++ {
		for b := 0; b <= a; b++ {
			p.cov[a*d+b] /= div
			p.cov[b*d+a] = p.cov[a*d+b]
		}
	}
	p.scale = make([]float64, d)
	for j := 0; j < d; j++ {
		v := p.cov[j*d+j]
		var maxAbs float64
		for i := 0; i < n; i++ {
			if p.weight(i) > 0 {
				maxAbs = math.Max(maxAbs, math.Abs(p.x[i*d+j]))
			}
		}
		sd := math.Sqrt(v)
		if !(v > 1e-280) || sd <= 1e-12*maxAbs {
			return nil, fitters.Errorf(fitters.FailedPrecondition, "data: column %d is constant (standard deviation %g over rows with positive weight); drop it", j, sd)
		}
		p.scale[j] = 1 / sd
	}
	return p, nil
}

// distinctAtLeast returns min(limit, number of distinct rows with positive
// weight), stopping as soon as limit distinct rows are found.
func (p *problem) distinctAtLeast(limit int) int {
	seen := make(map[string]struct{}, min(limit, p.n))
	key := make([]byte, 8*p.d)
	for i := 0; i < p.n && len(seen) < limit; i++ {
		if p.weight(i) == 0 {
			continue
		}
		for j, v := range p.row(i) {
			b := math.Float64bits(v + 0) // +0 folds −0 into 0
			for t := 0; t < 8; t++ {
				key[8*j+t] = byte(b >> (8 * t))
			}
		}
		seen[string(key)] = struct{}{}
	}
	return len(seen)
}

// scaledDist2 is the squared Euclidean distance between rows a and b after
// dividing each feature by its standard deviation in the data.
func (p *problem) scaledDist2(a, b int) float64 {
	xa, xb := p.row(a), p.row(b)
	var s float64
	for j, v := range xa {
		t := (v - xb[j]) * p.scale[j]
		s += t * t
	}
	return s
}

// kmeansPP picks k seed rows by k-means++ (Arthur and Vassilvitskii, 2007):
// the first with probability proportional to the row weight, each further one
// with probability proportional to weight × squared standardised distance to
// the nearest seed already chosen. It follows the em fitter's convention.
func (p *problem) kmeansPP(k int, rng *rand.Rand) ([]int, error) {
	seeds := make([]int, 0, k)
	dist := make([]float64, p.n)
	pick := func(total float64, mass func(i int) float64) int {
		u := rng.Float64() * total
		last := -1
		var cum float64
		for i := 0; i < p.n; i++ {
			m := mass(i)
			if m <= 0 {
				continue
			}
			last = i
			cum += m
			if cum > u {
				return i
			}
		}
		return last // rounding left u at the very end
	}
	first := pick(p.wsum, p.weight)
	seeds = append(seeds, first)
	for i := range dist {
		dist[i] = p.scaledDist2(i, first)
	}
	mass := func(i int) float64 { return p.weight(i) * dist[i] }
	for len(seeds) < k {
		var total float64
		for i := 0; i < p.n; i++ {
			total += mass(i)
		}
		if !(total > 0) || math.IsInf(total, 0) {
			return nil, fitters.Errorf(fitters.FailedPrecondition, "seeding: fewer than %d distinct rows with positive weight", k)
		}
		s := pick(total, mass)
		if s < 0 {
			return nil, fitters.Errorf(fitters.FailedPrecondition, "seeding: fewer than %d distinct rows with positive weight", k)
		}
		seeds = append(seeds, s)
		for i := range dist {
			if v := p.scaledDist2(i, s); v < dist[i] {
				dist[i] = v
			}
		}
	}
	return seeds, nil
}

// nearest labels every row with the index of its nearest seed (standardised
// distance; ties go to the lower index).
func (p *problem) nearest(seeds []int) []int {
	labels := make([]int, p.n)
	for i := 0; i < p.n; i++ {
		best, bd := 0, math.Inf(1)
		for c, s := range seeds {
			if v := p.scaledDist2(i, s); v < bd {
				best, bd = c, v
			}
		}
		labels[i] = best
	}
	return labels
}
