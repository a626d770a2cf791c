package mixture

import (
	"math"
	"testing"
)

// shapeModel builds a valid model of the given shape (all components the same
// spherical-compatible identity covariance, so every structure accepts it).
func shapeModel(t *testing.T, f Family, s Structure, dim, k int) *Model {
	t.Helper()
	p := Params{Dim: dim, Family: f, Structure: s}
	for c := 0; c < k; c++ {
		cov := make([]float64, dim*dim)
		for i := 0; i < dim; i++ {
			cov[i*dim+i] = 1
		}
		df := 0.0
		if f == StudentT {
			df = 5
		}
		p.Components = append(p.Components, Component{Weight: 1 / float64(k), Mean: make([]float64, dim), Cov: cov, DF: df})
	}
	if k == 3 {
		p.Components[2].Weight = 1 - 2.0/3
	}
	return mustNew(t, p)
}

// TestFreeParameters checks the counts (K−1) + K·D + covariance terms
// (+ K for Student-t), hand-computed per structure (common practice).
func TestFreeParameters(t *testing.T) {
	cases := []struct {
		f    Family
		s    Structure
		d, k int
		want int
	}{
		{Gaussian, Full, 1, 1, 2},
		{Gaussian, Diagonal, 1, 1, 2},
		{Gaussian, Spherical, 1, 1, 2},
		{Gaussian, Tied, 1, 1, 2},
		{StudentT, Full, 1, 1, 3},
		{StudentT, Tied, 1, 1, 3},
		// K=3, D=4: weights 2, means 12.
		{Gaussian, Full, 4, 3, 2 + 12 + 30},     // 3·4·5/2
		{Gaussian, Diagonal, 4, 3, 2 + 12 + 12}, // 3·4
		{Gaussian, Spherical, 4, 3, 2 + 12 + 3},
		{Gaussian, Tied, 4, 3, 2 + 12 + 10}, // 4·5/2
		{StudentT, Full, 4, 3, 2 + 12 + 30 + 3},
		{StudentT, Spherical, 4, 3, 2 + 12 + 3 + 3},
		{Gaussian, Full, 2, 2, 1 + 4 + 6},
	}
	for _, tc := range cases {
		m := shapeModel(t, tc.f, tc.s, tc.d, tc.k)
		if got := m.FreeParameters(); got != tc.want {
			t.Errorf("%v/%v D=%d K=%d: %d free parameters, want %d", tc.f, tc.s, tc.d, tc.k, got, tc.want)
		}
	}
}

func TestInformationCriteria(t *testing.T) {
	m := shapeModel(t, Gaussian, Full, 2, 2) // p = 11
	if got, want := m.BIC(-100, 50), 200+11*math.Log(50); got != want {
		t.Errorf("BIC = %v, want %v", got, want)
	}
	if got, want := m.AIC(-100), 200.0+22; got != want {
		t.Errorf("AIC = %v, want %v", got, want)
	}
	// Lower is better: a higher log-likelihood gives a lower criterion.
	if m.BIC(-90, 50) >= m.BIC(-100, 50) || m.AIC(-90) >= m.AIC(-100) {
		t.Errorf("criteria do not decrease as the log-likelihood grows")
	}
	// For the same fit, more parameters give a higher (worse) criterion.
	big := shapeModel(t, Gaussian, Full, 2, 3)
	if big.BIC(-100, 50) <= m.BIC(-100, 50) || big.AIC(-100) <= m.AIC(-100) {
		t.Errorf("criteria do not penalise parameters")
	}
}
