package vb

import "math"

// digamma returns ψ(x) = d/dx log Γ(x) for x > 0. It shifts x up to at least
// 10 with the recurrence ψ(x) = ψ(x+1) − 1/x and then sums the asymptotic
// series ψ(x) ~ ln x − 1/(2x) − Σ B₂ₙ/(2n x²ⁿ) through n = 7 (Abramowitz and
// Stegun 6.3.5 and 6.3.18); the first omitted term is below 5e-17 at x = 10.
// For x ≤ 0 it returns NaN (the callers never pass such values).
func digamma(x float64) float64 {
	if !(x > 0) || math.IsInf(x, 1) {
		if math.IsInf(x, 1) {
			return x
		}
		return math.NaN()
	}
	var shift float64
	for x < 10 {
		shift -= 1 / x
		x++
	}
	w := 1 / (x * x)
	// B₂ₙ/(2n) for n = 1..7: 1/12, −1/120, 1/252, −1/240, 1/132, −691/32760, 1/12.
	series := w * (1.0/12 - w*(1.0/120-w*(1.0/252-w*(1.0/240-w*(1.0/132-w*(691.0/32760-w*(1.0/12)))))))
	return shift + math.Log(x) - 0.5/x - series
}

// lgamma returns log Γ(x) for x > 0.
func lgamma(x float64) float64 {
	v, _ := math.Lgamma(x)
	return v
}

// logMultiGamma returns log Γ_D(a) = (D(D−1)/4) log π + Σ_{i=1..D} log Γ(a + (1−i)/2),
// the logarithm of the multivariate gamma function.
func logMultiGamma(a float64, d int) float64 {
	s := float64(d*(d-1)) / 4 * math.Log(math.Pi)
	for i := 1; i <= d; i++ {
		s += lgamma(a + 0.5*float64(1-i))
	}
	return s
}

// logWishartB returns log B(W, ν), the logarithm of the Wishart normalising
// constant (Bishop 2006, eq. B.79), given logDetW = log|W|:
//
//	log B(W, ν) = −(ν/2) log|W| − (νD/2) log 2 − log Γ_D(ν/2).
func logWishartB(logDetW, nu float64, d int) float64 {
	return -0.5*nu*logDetW - 0.5*nu*float64(d)*math.Ln2 - logMultiGamma(0.5*nu, d)
}

// expectLogDetWishart returns E[log|Λ|] for Λ ~ Wishart(W, ν) (Bishop 2006,
// eq. 10.65): Σ_{i=1..D} ψ((ν+1−i)/2) + D log 2 + log|W|.
func expectLogDetWishart(logDetW, nu float64, d int) float64 {
	s := float64(d)*math.Ln2 + logDetW
	for i := 1; i <= d; i++ {
		s += digamma(0.5 * (nu + float64(1-i)))
	}
	return s
}
