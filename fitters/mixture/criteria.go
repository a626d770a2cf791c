package mixture

import "math"

// FreeParameters returns the number of estimated parameters p used by BIC and
// AIC: (K−1) weights, K·D means, the covariance parameters of the structure
// (full K·D(D+1)/2, diagonal K·D, spherical K, tied D(D+1)/2) and, for
// Student-t components, K degrees of freedom. The degrees of freedom are
// always counted as estimated, even when a fitter held them fixed.
func (m *Model) FreeParameters() int {
	k, d := m.k, m.dim
	p := (k - 1) + k*d
	switch m.structure {
	case Full:
		p += k * d * (d + 1) / 2
	case Diagonal:
		p += k * d
	case Spherical:
		p += k
	case Tied:
		p += d * (d + 1) / 2
	}
	if m.family == StudentT {
		p += k
	}
	return p
}

// BIC returns the Bayesian information criterion −2·logLik + p·ln(n) for a
// total log-likelihood logLik over n rows (n is a float so weighted row counts
// can be used), p = FreeParameters(). Lower is better.
func (m *Model) BIC(logLik float64, n float64) float64 {
	return -2*logLik + float64(m.FreeParameters())*math.Log(n)
}

// AIC returns Akaike's information criterion −2·logLik + 2p,
// p = FreeParameters(). Lower is better.
func (m *Model) AIC(logLik float64) float64 {
	return -2*logLik + 2*float64(m.FreeParameters())
}
