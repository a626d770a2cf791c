package vb

import (
	"math/rand/v2"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/internal/prep"
	"github.com/mixd-dev/mixd/fitters/internal/seed"
)

// MaxAbsValue is the largest accepted magnitude of a data value. The
// posterior inverse scale matrices hold sums of squared deviations over all
// rows, so the limit is lower than the em fitter's: 1e100 leaves room for
// 1e100 rows before anything could overflow.
const MaxAbsValue = 1e100

// problem is the validated training matrix and its summary statistics. The
// row weights are the caller's frequency weights, used as given.
type problem struct {
	prep.Rows
	wsum float64 // Σ w (n when unweighted)
	nPos int     // rows with positive weight

	mean []float64 // weighted mean per feature
	// cov is the weighted sample covariance, D×D row-major, with divisor
	// wsum−1 (wsum when wsum ≤ 1): the default inverse scale of the Wishart.
	cov   []float64
	scale []float64 // 1/sd per feature, for seeding distances
}

// newProblem validates data and computes its mean and covariance. Errors name
// the row, column or field.
func newProblem(data fitters.Data) (*problem, error) {
	if err := prep.CheckValues(data, MaxAbsValue); err != nil {
		return nil, err
	}
	w, err := prep.CheckWeights(data.Weights, data.Rows, 0)
	if err != nil {
		return nil, err
	}
	d := data.Cols
	p := &problem{
		Rows: prep.Rows{N: data.Rows, D: d, X: data.Values, W: data.Weights},
		wsum: w.Sum,
		nPos: w.Positive,
	}
	div := p.wsum - 1
	if div <= 0 {
		div = p.wsum
	}
	var packed []float64
	p.mean, packed = p.Moments(p.wsum, div)
	p.cov = make([]float64, d*d)
	for a := 0; a < d; a++ {
		for b := 0; b <= a; b++ {
			p.cov[a*d+b] = packed[prep.Tri(a)+b]
			p.cov[b*d+a] = p.cov[a*d+b]
		}
	}
	if p.scale, err = p.Scales(prep.Diagonal(packed, d)); err != nil {
		return nil, err
	}
	return p, nil
}

// kmeansPP picks k seed rows by k-means++ on standardised features (see
// seed.KMeansPP), with the caller's weights.
func (p *problem) kmeansPP(k int, rng *rand.Rand) ([]int, error) {
	seeds, ok := seed.KMeansPP(&p.Rows, p.scale, k, rng)
	if !ok {
		return nil, fitters.Errorf(fitters.FailedPrecondition, "seeding: fewer than %d distinct rows with positive weight", k)
	}
	return seeds, nil
}

// nearest labels every row with the index of its nearest seed (standardised
// distance; ties go to the lower index).
func (p *problem) nearest(seeds []int) []int { return seed.Nearest(&p.Rows, p.scale, seeds) }
