package daemon

import (
	"math"
	"slices"
	"sort"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// QuantileLevels is the fixed grid of probability levels at which a fit
// records the quantiles of its training rows' log-densities: finer in the
// lower tail, where rare rows are told apart. 110 levels:
// 0, 0.0001, 0.0002, 0.0005, 0.001, 0.002, 0.005, 0.01, 0.015, then 0.02 to
// 0.99 in steps of 0.01, then 0.995, 0.999, 1.
var QuantileLevels = func() []float64 {
	l := []float64{0, 0.0001, 0.0002, 0.0005, 0.001, 0.002, 0.005, 0.01, 0.015}
	for i := 2; i <= 99; i++ {
		l = append(l, float64(i)/100)
	}
	return append(l, 0.995, 0.999, 1)
}()

// trainingQuantiles returns the log-density quantiles of the training rows
// at QuantileLevels. logDens holds one log-density per training row; rows
// whose weight is zero (weights non-nil) are left out, and row weights are
// otherwise not applied. Each quantile is the "linear" empirical quantile of
// the sorted values: at level p, position h = (n−1)p between the order
// statistics x[⌊h⌋] and x[⌊h⌋+1] (common practice; numpy's default method).
// A log-density of −Inf (a training row whose density underflows) is
// recorded as −math.MaxFloat64 so that the quantiles stay finite.
func trainingQuantiles(logDens, weights []float64) *mixdv1.DensityQuantiles {
	x := make([]float64, 0, len(logDens))
	for i, v := range logDens {
		if weights != nil && weights[i] == 0 {
			continue
		}
		x = append(x, max(v, -math.MaxFloat64))
	}
	if len(x) == 0 {
		return nil
	}
	slices.Sort(x)
	q := &mixdv1.DensityQuantiles{
		Levels:       slices.Clone(QuantileLevels),
		LogDensities: make([]float64, len(QuantileLevels)),
	}
	n := len(x)
	for j, p := range QuantileLevels {
		h := float64(n-1) * p
		lo := int(math.Floor(h))
		if lo >= n-1 {
			q.LogDensities[j] = x[n-1]
			continue
		}
		f := h - float64(lo)
		v := x[lo] + f*(x[lo+1]-x[lo])
		if math.IsInf(v, 0) || math.IsNaN(v) { // spans of ±MaxFloat64
			v = x[lo]
		}
		q.LogDensities[j] = v
	}
	// Rounding in the interpolation must not break monotonicity.
	for j := 1; j < len(q.LogDensities); j++ {
		q.LogDensities[j] = max(q.LogDensities[j], q.LogDensities[j-1])
	}
	return q
}

// percentile turns a log-density into a percentile in [0, 100]: p means that
// about p% of the training rows had a lower log-density. It interpolates
// linearly between the stored quantiles; a log-density below the lowest
// training value gives 0 and one above the highest gives 100. With no
// quantiles (an imported model without a fit report) it returns NaN.
func percentile(q *mixdv1.DensityQuantiles, ld float64) float64 {
	levels, vals := q.GetLevels(), q.GetLogDensities()
	n := len(vals)
	if n == 0 || len(levels) != n {
		return math.NaN()
	}
	if math.IsNaN(ld) {
		return math.NaN()
	}
	// First index with vals[i] >= ld.
	i := sort.SearchFloat64s(vals, ld)
	switch {
	case i == 0:
		if ld < vals[0] {
			return 0
		}
		return 100 * levels[0]
	case i == n:
		return 100
	}
	lo, hi := vals[i-1], vals[i] // lo < ld <= hi
	f := (ld - lo) / (hi - lo)
	if !(f >= 0 && f <= 1) { // overflow of hi-lo for extreme values
		f = 0.5
	}
	p := levels[i-1] + f*(levels[i]-levels[i-1])
	return min(100, max(0, 100*p))
}
