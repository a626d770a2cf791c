package em

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

// truth is a known Gaussian mixture used to generate test data, in the
// pumping-station scenario: flow (m³/h), motor current (A), vibration (mm/s).
type truth struct {
	weights []float64
	means   [][]float64
	covs    [][]float64 // d×d row-major
}

// pumpTruth returns a three-regime pumping-station model with d features
// (d ≤ 3 uses the first d of flow, current, vibration; larger d appends
// independent unit-variance features with regime-dependent means).
func pumpTruth(d int) truth {
	base := [][]float64{
		{40, 12, 1.5},  // light load
		{120, 31, 2.8}, // normal duty
		{165, 44, 6.5}, // overload, worn bearing
	}
	sd := [][]float64{{6, 1.5, 0.3}, {10, 2.5, 0.4}, {8, 3, 1.1}}
	corr := 0.6 // flow and current move together
	tr := truth{weights: []float64{0.3, 0.5, 0.2}}
	for k := 0; k < 3; k++ {
		mu := make([]float64, d)
		cov := make([]float64, d*d)
		for j := 0; j < d; j++ {
			if j < 3 {
				mu[j] = base[k][j]
				cov[j*d+j] = sd[k][j] * sd[k][j]
			} else {
				mu[j] = float64(k) * 2.5
				cov[j*d+j] = 1
			}
		}
		if d >= 2 {
			c := corr * sd[k][0] * sd[k][1]
			cov[0*d+1], cov[1*d+0] = c, c
		}
		tr.means = append(tr.means, mu)
		tr.covs = append(tr.covs, cov)
	}
	return tr
}

// params converts tr into model parameters.
func (tr truth) params(s mixture.Structure) mixture.Params {
	d := len(tr.means[0])
	p := mixture.Params{Dim: d, Family: mixture.Gaussian, Structure: s}
	for k := range tr.weights {
		p.Components = append(p.Components, mixture.Component{
			Weight: tr.weights[k],
			Mean:   append([]float64(nil), tr.means[k]...),
			Cov:    append([]float64(nil), tr.covs[k]...),
		})
	}
	return p
}

// sample draws n rows from tr with its own seeded PCG (independent of the
// code under test): component by weight, then μ + L z with L the Cholesky
// factor computed here.
func (tr truth) sample(n int, seed uint64) (fitters.Data, []int) {
	d := len(tr.means[0])
	rng := rand.New(rand.NewPCG(seed, 99))
	chol := make([][]float64, len(tr.weights))
	for k, c := range tr.covs {
		chol[k] = naiveCholesky(c, d)
	}
	vals := make([]float64, 0, n*d)
	labels := make([]int, n)
	z := make([]float64, d)
	for i := 0; i < n; i++ {
		u := rng.Float64()
		k := 0
		for acc := tr.weights[0]; u >= acc && k < len(tr.weights)-1; {
			k++
			acc += tr.weights[k]
		}
		labels[i] = k
		for j := range z {
			z[j] = rng.NormFloat64()
		}
		for j := 0; j < d; j++ {
			v := tr.means[k][j]
			for l := 0; l <= j; l++ {
				v += chol[k][j*d+l] * z[l]
			}
			vals = append(vals, v)
		}
	}
	return fitters.Data{Rows: n, Cols: d, Values: vals}, labels
}

// naiveCholesky is a textbook Cholesky used only by test generators.
func naiveCholesky(a []float64, d int) []float64 {
	l := make([]float64, d*d)
	for j := 0; j < d; j++ {
		s := a[j*d+j]
		for k := 0; k < j; k++ {
			s -= l[j*d+k] * l[j*d+k]
		}
		l[j*d+j] = math.Sqrt(s)
		for i := j + 1; i < d; i++ {
			s := a[i*d+j]
			for k := 0; k < j; k++ {
				s -= l[i*d+k] * l[j*d+k]
			}
			l[i*d+j] = s / l[j*d+j]
		}
	}
	return l
}

// bestMatch returns the permutation perm (fitted component perm[k] matches
// true component k) minimising the summed cost, by brute force over all
// permutations (small K only).
func bestMatch(k int, cost func(trueK, fitK int) float64) []int {
	perm := make([]int, k)
	for i := range perm {
		perm[i] = i
	}
	best := append([]int(nil), perm...)
	bestCost := math.Inf(1)
	var rec func(i int)
	rec = func(i int) {
		if i == k {
			var c float64
			for t, f := range perm {
				c += cost(t, f)
			}
			if c < bestCost {
				bestCost = c
				copy(best, perm)
			}
			return
		}
		for j := i; j < k; j++ {
			perm[i], perm[j] = perm[j], perm[i]
			rec(i + 1)
			perm[i], perm[j] = perm[j], perm[i]
		}
	}
	rec(0)
	return best
}

// sampleCov is the unbiased (n−1) sample covariance of data, row-major.
func sampleCov(data fitters.Data) []float64 {
	n, d := data.Rows, data.Cols
	mu := make([]float64, d)
	for i := 0; i < n; i++ {
		for j := 0; j < d; j++ {
			mu[j] += data.Values[i*d+j]
		}
	}
	for j := range mu {
		mu[j] /= float64(n)
	}
	cov := make([]float64, d*d)
	for i := 0; i < n; i++ {
		for a := 0; a < d; a++ {
			for b := 0; b < d; b++ {
				cov[a*d+b] += (data.Values[i*d+a] - mu[a]) * (data.Values[i*d+b] - mu[b])
			}
		}
	}
	for t := range cov {
		cov[t] /= float64(n - 1)
	}
	return cov
}

// checkFinite fails if any parameter is not finite or the model rejects them.
func checkParams(t testing.TB, p mixture.Params) *mixture.Model {
	t.Helper()
	for k, c := range p.Components {
		vals := append(append([]float64{c.Weight}, c.Mean...), c.Cov...)
		for _, v := range vals {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				t.Fatalf("component %d has a non-finite value: %+v", k, c)
			}
		}
	}
	m, err := mixture.New(p)
	if err != nil {
		t.Fatalf("fitted parameters rejected by mixture.New: %v", err)
	}
	return m
}
