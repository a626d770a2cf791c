package conformance

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

// dataSeed seeds the suite's data generator.
const dataSeed = 20261201

// truth is the two-regime pumping-station model the suite's data come from:
// columns are flow (m³/h), motor current (A) and vibration (mm/s). The values
// are invented for the test; the regimes are about six standard deviations
// apart in flow, so any working estimator separates them.
type truth struct {
	weights []float64
	means   [][]float64
	sds     [][]float64
	corr    []float64 // correlation of flow and current per regime
}

var pumpTruth = truth{
	weights: []float64{0.65, 0.35},
	means:   [][]float64{{120, 31, 2.8}, {60, 18, 5.5}},
	sds:     [][]float64{{10, 2.5, 0.4}, {8, 2, 0.8}},
	corr:    []float64{0.6, 0.5},
}

// cov returns regime k's 3×3 covariance matrix, row-major.
func (tr truth) cov(k int) []float64 {
	s, r := tr.sds[k], tr.corr[k]
	return []float64{
		s[0] * s[0], r * s[0] * s[1], 0,
		r * s[0] * s[1], s[1] * s[1], 0,
		0, 0, s[2] * s[2],
	}
}

// generate draws n rows from pumpTruth with a PCG generator seeded by seed.
func generate(seed uint64, n int) (fitters.Data, truth) {
	tr := pumpTruth
	rng := rand.New(rand.NewPCG(seed, 0x636f6e666f726d)) // "conform"
	d := fitters.Data{Rows: n, Cols: 3, Values: make([]float64, 0, 3*n)}
	for i := 0; i < n; i++ {
		k := 0
		if rng.Float64() >= tr.weights[0] {
			k = 1
		}
		m, s, r := tr.means[k], tr.sds[k], tr.corr[k]
		z0, z1, z2 := rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64()
		// Cholesky factor of the flow/current block: [1 0; r √(1−r²)].
		d.Values = append(d.Values,
			m[0]+s[0]*z0,
			m[1]+s[1]*(r*z0+math.Sqrt(1-r*r)*z1),
			m[2]+s[2]*z2,
		)
	}
	return d, tr
}

// checkRecovery matches each true regime to the nearest fitted component and
// checks weight and mean; with fullCov it also checks the covariance.
// Tolerances allow for the sampling error of a few hundred rows per regime:
// weight ±0.07, mean ±0.3 standard deviations, variance within a factor 1.6,
// flow/current correlation ±0.2.
func checkRecovery(t *testing.T, p mixture.Params, tr truth, fullCov bool) {
	t.Helper()
	used := map[int]bool{}
	for k := range tr.weights {
		best, bestDist := -1, math.Inf(1)
		for j, c := range p.Components {
			var dist float64
			for f := range c.Mean {
				z := (c.Mean[f] - tr.means[k][f]) / tr.sds[k][f]
				dist += z * z
			}
			if dist < bestDist {
				best, bestDist = j, dist
			}
		}
		if best < 0 || used[best] {
			t.Errorf("regime %d (mean %v): no fitted component of its own among %+v", k, tr.means[k], p.Components)
			continue
		}
		used[best] = true
		c := p.Components[best]
		if math.Abs(c.Weight-tr.weights[k]) > 0.07 {
			t.Errorf("regime %d: weight %.4f, true %.2f", k, c.Weight, tr.weights[k])
		}
		for f := range c.Mean {
			if math.Abs(c.Mean[f]-tr.means[k][f]) > 0.3*tr.sds[k][f] {
				t.Errorf("regime %d: mean[%d] = %.4g, true %.4g (sd %.3g)", k, f, c.Mean[f], tr.means[k][f], tr.sds[k][f])
			}
		}
		if !fullCov {
			continue
		}
		want := tr.cov(k)
		for f := 0; f < 3; f++ {
			got := c.Cov[f*3+f]
			if ratio := got / want[f*3+f]; ratio < 1/1.6 || ratio > 1.6 {
				t.Errorf("regime %d: variance[%d] = %.4g, true %.4g", k, f, got, want[f*3+f])
			}
		}
		corr := c.Cov[1] / math.Sqrt(c.Cov[0]*c.Cov[4])
		if math.Abs(corr-tr.corr[k]) > 0.2 {
			t.Errorf("regime %d: flow/current correlation %.3f, true %.2f", k, corr, tr.corr[k])
		}
	}
}
