package mixture

import (
	"math"
	"slices"
	"testing"
)

// pumpModel is a three-regime pumping-station model (flow in m³/h, motor
// current in A) used by the sampling tests.
func pumpModel(t testing.TB, f Family, df float64) *Model {
	t.Helper()
	if f == Gaussian {
		df = 0
	}
	return mustNew(t, Params{Dim: 2, Family: f, Structure: Full, Features: []string{"flow", "current"},
		Components: []Component{
			{Weight: 0.5, Mean: []float64{120, 31}, Cov: []float64{25, 6, 6, 4}, DF: df},
			{Weight: 0.3, Mean: []float64{60, 18}, Cov: []float64{16, -2, -2, 1}, DF: df},
			{Weight: 0.2, Mean: []float64{5, 2}, Cov: []float64{1, 0, 0, 0.25}, DF: df},
		}})
}

// TestSampleMoments draws 200 000 rows and checks the empirical weights,
// means and covariances against the model within 5 standard errors. The
// standard errors are the usual large-sample ones (common practice):
// weight sqrt(w(1−w)/n); mean sqrt(Σ_ii/n_k); covariance entry
// sqrt((E[x_i² x_j²] − C_ij²)/n_k) with, for the Gaussian,
// E[x_i² x_j²] = Σ_ii Σ_jj + 2Σ_ij² (Isserlis) and, for the Student-t with
// ν > 4, C = ν/(ν−2)·Σ and E[x_i² x_j²] = ν²/((ν−2)(ν−4))·(Σ_ii Σ_jj + 2Σ_ij²)
// (textbook moments of the multivariate t, from memory).
func TestSampleMoments(t *testing.T) {
	const n = 200000
	for _, tc := range []struct {
		f  Family
		df float64
	}{{Gaussian, 0}, {StudentT, 8}} {
		m := pumpModel(t, tc.f, tc.df)
		x, labels := m.Sample(n, 20260611)
		d, k := m.Dim(), m.K()
		counts := make([]float64, k)
		sums := make([][]float64, k)
		for a := range sums {
			sums[a] = make([]float64, d)
		}
		for i, l := range labels {
			counts[l]++
			for j := 0; j < d; j++ {
				sums[l][j] += x[i*d+j]
			}
		}
		for a, c := range m.params.Components {
			w := counts[a] / n
			se := math.Sqrt(c.Weight * (1 - c.Weight) / n)
			if math.Abs(w-c.Weight) > 5*se {
				t.Errorf("%v component %d: empirical weight %.5f, want %.2f ± %.5f", tc.f, a, w, c.Weight, 5*se)
			}
			nk := counts[a]
			scale := 1.0
			fourth := 1.0
			if tc.f == StudentT {
				v := tc.df
				scale = v / (v - 2)
				fourth = v * v / ((v - 2) * (v - 4))
			}
			mean := make([]float64, d)
			for j := 0; j < d; j++ {
				mean[j] = sums[a][j] / nk
				se := math.Sqrt(scale * c.Cov[j*d+j] / nk)
				if math.Abs(mean[j]-c.Mean[j]) > 5*se {
					t.Errorf("%v component %d: mean[%d] %.4f, want %.4f ± %.4f", tc.f, a, j, mean[j], c.Mean[j], 5*se)
				}
			}
			cov := make([]float64, d*d)
			for i, l := range labels {
				if l != a {
					continue
				}
				for p := 0; p < d; p++ {
					for q := 0; q < d; q++ {
						cov[p*d+q] += (x[i*d+p] - c.Mean[p]) * (x[i*d+q] - c.Mean[q])
					}
				}
			}
			for p := 0; p < d; p++ {
				for q := 0; q < d; q++ {
					got := cov[p*d+q] / nk
					want := scale * c.Cov[p*d+q]
					s := c.Cov
					e4 := fourth * (s[p*d+p]*s[q*d+q] + 2*s[p*d+q]*s[p*d+q])
					se := math.Sqrt((e4 - want*want) / nk)
					if math.Abs(got-want) > 5*se {
						t.Errorf("%v component %d: cov[%d][%d] %.4f, want %.4f ± %.4f", tc.f, a, p, q, got, want, 5*se)
					}
				}
			}
		}
	}
}

// TestSampleHeavyTails checks the χ² scaling for small degrees of freedom:
// a standard t with ν = 1 is the Cauchy distribution, P(|X| < 1) = 1/2
// (closed form), and with ν = 0.5 the median of |X| is the 0.75 quantile of
// t_0.5: scipy.stats.t(0.5).ppf(0.75) = 1.5537739740300383 (scipy 1.17.1).
func TestSampleHeavyTails(t *testing.T) {
	const n = 200000
	for _, tc := range []struct {
		df, q float64
	}{{1, 1}, {0.5, 1.5537739740300383}} {
		m := mustNew(t, single(StudentT, 1, []float64{0}, []float64{1}, tc.df))
		x, _ := m.Sample(n, 7)
		inside := 0
		for _, v := range x {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				t.Fatalf("df %g: non-finite sample %v", tc.df, v)
			}
			if math.Abs(v) < tc.q {
				inside++
			}
		}
		frac := float64(inside) / n
		if se := math.Sqrt(0.25 / n); math.Abs(frac-0.5) > 5*se {
			t.Errorf("df %g: P(|X| < %g) = %.4f, want 0.5 ± %.4f", tc.df, tc.q, frac, 5*se)
		}
	}
}

func TestSamplerChunkingAndSeeds(t *testing.T) {
	for _, f := range []Family{Gaussian, StudentT} {
		m := randomModel(t, f, Full, 3, 4, 8)
		whole, wl := m.Sample(30, 42)
		s := m.Sampler(42)
		x1, l1 := make([]float64, 30), make([]int, 10)
		x2, l2 := make([]float64, 60), make([]int, 20)
		s.Next(x1, l1)
		s.Next(x2, l2)
		if !slices.Equal(append(x1, x2...), whole) || !slices.Equal(append(l1, l2...), wl) {
			t.Errorf("%v: 10 then 20 rows differ from 30 at once", f)
		}
		again, al := m.Sample(30, 42)
		if !slices.Equal(again, whole) || !slices.Equal(al, wl) {
			t.Errorf("%v: same seed gave different rows", f)
		}
		other, _ := m.Sample(30, 43)
		if slices.Equal(other, whole) {
			t.Errorf("%v: different seeds gave the same rows", f)
		}
		// Zero rows is fine.
		s.Next(nil, nil)
	}
}

func TestSamplerZeroWeightNeverDrawn(t *testing.T) {
	m := mustNew(t, Params{Dim: 1, Family: Gaussian, Structure: Spherical, Components: []Component{
		{Weight: 0, Mean: []float64{0}, Cov: []float64{1}},
		{Weight: 1, Mean: []float64{5}, Cov: []float64{1}},
		{Weight: 0, Mean: []float64{9}, Cov: []float64{1}},
	}})
	_, labels := m.Sample(10000, 3)
	for i, l := range labels {
		if l != 1 {
			t.Fatalf("row %d drawn from zero-weight component %d", i, l)
		}
	}
}

func TestSamplerPanicsOnBadLengths(t *testing.T) {
	m := randomModel(t, Gaussian, Full, 2, 2, 1)
	defer func() {
		if recover() == nil {
			t.Errorf("Next with mismatched lengths did not panic")
		}
	}()
	m.Sampler(1).Next(make([]float64, 3), make([]int, 2))
}
