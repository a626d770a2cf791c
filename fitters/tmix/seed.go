package tmix

import (
	"math"
	"math/rand/v2"

	"github.com/mixd-dev/mixd/fitters"
)

// seedStream is the fixed second PCG word; the first is Settings.Seed. It
// has the same value as the em fitter's, and the seeding below follows the
// same steps, so the same data, K and seed give both fitters the same
// k-means++ starting partitions.
const seedStream = 0x6d697864656d3031

// startState builds the starting parameters of one restart for k components.
func (p *problem) startState(cfg *config, k int, rng *rand.Rand) (*state, error) {
	switch {
	case cfg.start != nil:
		return p.fromParams(cfg.start)
	case cfg.labels != nil:
		return p.fromLabels(cfg.labels, k)
	}
	seeds, err := p.kmeansPP(k, rng)
	if err != nil {
		return nil, err
	}
	return p.fromLabels(p.nearest(seeds), k)
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
// the first with probability proportional to the row weight, each further
// one with probability proportional to weight × squared distance to the
// nearest seed already chosen. Distances are measured on standardised
// features so that no feature dominates by its unit.
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
	first := pick(p.iwsum, p.rowWeight)
	seeds = append(seeds, first)
	for i := range dist {
		dist[i] = p.scaledDist2(i, first)
	}
	mass := func(i int) float64 { return p.rowWeight(i) * dist[i] }
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
