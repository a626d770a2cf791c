// Package seed picks the starting partitions of the em, tmix and vb fitters:
// k-means++ seed rows (Arthur and Vassilvitskii, 2007) on standardised
// features, and the assignment of every row to its nearest seed.
//
// The random draws are part of each fitter's determinism contract: KMeansPP
// takes exactly one rng.Float64() per seed, in seed order, and nothing else.
package seed

import (
	"math"
	"math/rand/v2"

	"github.com/mixd-dev/mixd/fitters/internal/prep"
)

// Stream is the fixed second PCG word of the em and tmix fitters (the first
// is Settings.Seed): with the same value and the same seeding steps, the same
// data, K and seed give both fitters the same k-means++ starting partitions.
const Stream = 0x6d697864656d3031 // "mixdem01"

// Dist2 is the squared Euclidean distance between rows a and b of r after
// multiplying feature j by scale[j] (typically 1/sd, see prep.Rows.Scales).
func Dist2(r *prep.Rows, scale []float64, a, b int) float64 {
	xa, xb := r.Row(a), r.Row(b)
	var s float64
	for j, v := range xa {
		t := (v - xb[j]) * scale[j]
		s += t * t
	}
	return s
}

// KMeansPP picks k seed rows: the first with probability proportional to
// the row weight, each further one with probability proportional to
// weight × squared scaled distance to the nearest seed already chosen. It
// draws one rng.Float64() per seed. ok is false when a further seed cannot
// be drawn because every remaining row of positive weight coincides with a
// seed (at the resolution of double precision); seeds then holds the seeds
// chosen so far, and the caller reports the failure in its own words.
func KMeansPP(r *prep.Rows, scale []float64, k int, rng *rand.Rand) (seeds []int, ok bool) {
	seeds = make([]int, 0, k)
	dist := make([]float64, r.N)
	pick := func(total float64, mass func(i int) float64) int {
		u := rng.Float64() * total
		last := -1
		var cum float64
		for i := 0; i < r.N; i++ {
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
	var wsum float64
	for i := 0; i < r.N; i++ {
		wsum += r.Weight(i)
	}
	first := pick(wsum, r.Weight)
	seeds = append(seeds, first)
	for i := range dist {
		dist[i] = Dist2(r, scale, i, first)
	}
	mass := func(i int) float64 { return r.Weight(i) * dist[i] }
	for len(seeds) < k {
		var total float64
		for i := 0; i < r.N; i++ {
			total += mass(i)
		}
		if !(total > 0) || math.IsInf(total, 0) {
			return seeds, false
		}
		s := pick(total, mass)
		if s < 0 {
			return seeds, false
		}
		seeds = append(seeds, s)
		for i := range dist {
			if v := Dist2(r, scale, i, s); v < dist[i] {
				dist[i] = v
			}
		}
	}
	return seeds, true
}

// Nearest labels every row with the index (into seeds) of its nearest seed
// by scaled distance; ties go to the lower index.
func Nearest(r *prep.Rows, scale []float64, seeds []int) []int {
	labels := make([]int, r.N)
	for i := 0; i < r.N; i++ {
		best, bd := 0, math.Inf(1)
		for c, s := range seeds {
			if v := Dist2(r, scale, i, s); v < bd {
				best, bd = c, v
			}
		}
		labels[i] = best
	}
	return labels
}
