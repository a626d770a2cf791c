package mixture

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"

	"gonum.org/v1/gonum/stat/distuv"
)

// ErrNoMoment reports that a conditional mean or covariance asked for does
// not exist: a Student-t component with posterior weight above zero has too
// few degrees of freedom (the mean needs more than 1, the covariance more
// than 2).
var ErrNoMoment = errors.New("moment does not exist")

// MaxDrawsPerRow bounds ConditionalOptions.Draws.
const MaxDrawsPerRow = 1 << 20

// imputeStream is mixed into the seed of every row's draw stream.
const imputeStream = 0x6d69786472617773 // "mixdraws"

// ConditionalOptions choose the optional outputs of Model.Conditional.
type ConditionalOptions struct {
	// StdDev asks for the standard deviation of every feature under the
	// conditional mixture (0 for observed features).
	StdDev bool
	// Covariance asks for the conditional mixture's covariance matrix of
	// every row (zero rows and columns for observed features).
	Covariance bool
	// Components asks for the per-component parts: the conditional
	// components' means and degrees of freedom (Student-t).
	Components bool
	// ComponentScales asks for the conditional components' covariance
	// (Gaussian) or scale (Student-t) matrices, which exist whatever the
	// degrees of freedom.
	ComponentScales bool
	// Draws is the number of completed rows drawn from each row's
	// conditional distribution (multiple imputation); 0 draws none.
	Draws int
	// Seed and FirstRow fix the draws: row i's draws come from a stream
	// seeded by (Seed, FirstRow+i), so a batch split over several calls
	// gives the same draws when each call passes the index of its first row.
	Seed     uint64
	FirstRow int64
}

// Conditional is the distribution of the unobserved features of each row
// given its observed ones: a mixture whose weights are the posteriors under
// the marginal of the observed features (Posteriors), whose components are
// the conditionals of the model's components. Matrices are row-major with
// one block per row.
type Conditional struct {
	// Rows, Dim and K give the shapes.
	Rows, Dim, K int
	// Mean (rows × Dim) is the row with its unobserved features replaced by
	// their conditional mean; observed features are copied from the input.
	Mean []float64
	// StdDev (rows × Dim) holds the conditional standard deviations; 0 for
	// observed features. Nil unless asked for.
	StdDev []float64
	// Cov (rows × Dim × Dim) holds each row's conditional covariance, by the
	// law of total covariance Σ_k π_k (C_k + (m_k − m)(m_k − m)ᵀ); rows and
	// columns of observed features are 0. Nil unless asked for.
	Cov []float64
	// LogDensity (one per row) is the log-density of the observed features
	// under the marginal mixture (0 when nothing is observed).
	LogDensity []float64
	// Posteriors (rows × K) are the weights π_k of the conditional mixture.
	Posteriors []float64
	// ComponentMeans (rows × K × Dim): each component's conditional mean,
	// μ_u + Σ_uo Σ_oo⁻¹ (x_o − μ_o), observed features copied. Nil unless
	// Components.
	ComponentMeans []float64
	// ComponentDF (rows × K): each Student-t component's conditional degrees
	// of freedom ν + p_o (p_o the number of observed features). Nil for
	// Gaussian models or unless Components.
	ComponentDF []float64
	// ComponentScales (rows × K × Dim × Dim): each component's conditional
	// covariance (Gaussian) or scale matrix (Student-t; its covariance is
	// DF/(DF−2) times the scale when DF > 2), zero in the rows and columns of
	// observed features. Nil unless asked for.
	ComponentScales []float64
	// Draws (rows × Draws × Dim): completed rows drawn from the conditional
	// distribution, observed features copied; row i's draws are rows
	// i·Draws … (i+1)·Draws−1. Nil unless Draws > 0.
	Draws []float64
}

// Conditional returns, for every row of x (row-major, Dim columns) with the
// observation mask observed (see Marginal; nil means every value is
// observed), the conditional distribution of its unobserved features given
// its observed ones.
//
// For a Gaussian component N(μ, Σ) the conditional of the unobserved
// features u given the observed o is N(μ_u + Σ_uo Σ_oo⁻¹ (x_o − μ_o),
// Σ_uu − Σ_uo Σ_oo⁻¹ Σ_ou) (the Schur complement; Bishop, Pattern
// Recognition and Machine Learning, 2006, section 2.3.1). For a Student-t
// component with ν degrees of freedom, location μ and scale Σ it is
// Student-t with ν + p_o degrees of freedom, the same location formula and
// scale ((ν + δ_o)/(ν + p_o)) (Σ_uu − Σ_uo Σ_oo⁻¹ Σ_ou), where δ_o is the
// squared Mahalanobis distance of x_o from the component's marginal (Kotz &
// Nadarajah, Multivariate t Distributions and Their Applications, 2004;
// Roth, On the Multivariate t Distribution, 2012, section 3; common result).
// The mixture's conditional weights are the posteriors under the marginal of
// the observed features.
//
// Both the regression term and the Schur complement come from one Cholesky
// factorisation of Σ with its observed features ordered first, per distinct
// observation pattern of the batch; the complement is then positive definite
// by construction. A row with nothing observed gets the model's own mean,
// covariance and weights; a completely observed row is returned unchanged
// with zero spread.
//
// The mean of a Student-t conditional exists only for ν + p_o > 1 and its
// covariance for ν + p_o > 2. When a component with a positive conditional
// weight lacks a moment that was asked for, Conditional returns an error
// wrapping ErrNoMoment that names the row and component. An error names the
// row also when a row lies so far from every component that its moments
// overflow.
func (m *Model) Conditional(x []float64, observed []bool, opts ConditionalOptions) (*Conditional, error) {
	const what = "conditional"
	rows, err := m.checkMask(what, x, observed)
	if err != nil {
		return nil, err
	}
	if opts.Draws < 0 || opts.Draws > MaxDrawsPerRow {
		return nil, fmt.Errorf("%s: draws %d must be between 0 and %d", what, opts.Draws, MaxDrawsPerRow)
	}
	d, k := m.dim, m.k
	res := &Conditional{
		Rows: rows, Dim: d, K: k,
		Mean:       make([]float64, rows*d),
		LogDensity: make([]float64, rows),
		Posteriors: make([]float64, rows*k),
	}
	if opts.StdDev {
		res.StdDev = make([]float64, rows*d)
	}
	if opts.Covariance {
		res.Cov = make([]float64, rows*d*d)
	}
	if opts.Components {
		res.ComponentMeans = make([]float64, rows*k*d)
		if m.family == StudentT {
			res.ComponentDF = make([]float64, rows*k)
		}
	}
	if opts.ComponentScales {
		res.ComponentScales = make([]float64, rows*k*d*d)
	}
	if opts.Draws > 0 {
		res.Draws = make([]float64, rows*opts.Draws*d)
	}
	if rows == 0 {
		return res, nil
	}
	withSchur := opts.StdDev || opts.Covariance || opts.ComponentScales
	pats := groupPatterns(observed, rows, d)
	err = m.forPatternGroups(pats, rows, true, withSchur, func(pt *pattern, f []*subFactor, lo, hi int) *rowError {
		return m.conditionalTask(x, pt, f, lo, hi, &opts, res)
	})
	if err != nil {
		return nil, fmt.Errorf("%s: %w", what, err)
	}
	return res, nil
}

// conditionalTask computes rows [lo, hi) of pattern pt.
func (m *Model) conditionalTask(x []float64, pt *pattern, f []*subFactor, lo, hi int, opts *ConditionalOptions, res *Conditional) *rowError {
	d, k := m.dim, m.k
	p, q := len(pt.obs), len(pt.unobs)
	n := p + q
	robust := m.family == StudentT
	wantSpread := opts.StdDev || opts.Covariance

	logNorm := make([]float64, k)
	for c := 0; c < k; c++ {
		logNorm[c] = LogNormalizer(m.family, p, m.params.Components[c].DF, f[c].logDet)
	}
	y := make([]float64, max(p, 1))
	comp := make([]float64, k)
	post := make([]float64, k)
	delta := make([]float64, k)
	cm := make([]float64, k*q) // conditional means of the unobserved features
	mean := make([]float64, q)
	var z []float64
	var cum []float64
	if opts.Draws > 0 {
		z = make([]float64, q)
		cum = make([]float64, k)
	}

	for _, i := range pt.rows[lo:hi] {
		row := x[i*d : (i+1)*d]
		// Marginal log-densities, distances and conditional means.
		for c := 0; c < k; c++ {
			mu := m.means[c*d : (c+1)*d]
			v := 0.0
			if p > 0 {
				v = f[c].whitenRow(row, mu, pt.obs, y)
			}
			delta[c] = v
			if robust {
				nu := m.params.Components[c].DF
				comp[c] = logNorm[c] - studentKernel(v, 0.5*(nu+float64(p)), 1/nu, math.Log(nu), 0.5*(1+float64(p)/nu))
			} else {
				comp[c] = logNorm[c] - 0.5*v
			}
			l := f[c].l
			for a, u := range pt.unobs {
				s := mu[u]
				la := l[(p+a)*n : (p+a)*n+p]
				for j, lv := range la {
					s += lv * y[j]
				}
				cm[c*q+a] = s
			}
		}
		for a, lw := range m.logW {
			comp[a] += lw
		}
		mx, logS := logSumExpParts(comp)
		if p == 0 {
			mx, logS = 0, 0
		}
		far := math.IsInf(mx, -1)
		res.LogDensity[i] = logS + mx
		for c, v := range comp {
			lp := (v - mx) - logS
			if far {
				lp = m.farLogPost[c]
			}
			post[c] = math.Exp(lp)
			res.Posteriors[i*k+c] = post[c]
		}

		// Moments exist?
		for c := 0; c < k; c++ {
			if !robust || post[c] == 0 {
				continue
			}
			nu2 := m.params.Components[c].DF + float64(p)
			if !(nu2 > 1) {
				return &rowError{i, fmt.Errorf("row %d: component %d: the conditional has %v degrees of freedom, so its mean does not exist: %w", i, c, nu2, ErrNoMoment)}
			}
			if wantSpread && !(nu2 > 2) {
				return &rowError{i, fmt.Errorf("row %d: component %d: the conditional has %v degrees of freedom, so its covariance does not exist (ask for the mean only): %w", i, c, nu2, ErrNoMoment)}
			}
		}

		// Mixture mean.
		clear(mean)
		for c := 0; c < k; c++ {
			if post[c] == 0 {
				continue
			}
			for a := range mean {
				mean[a] += post[c] * cm[c*q+a]
			}
		}
		out := res.Mean[i*d : (i+1)*d]
		copy(out, row)
		for a, u := range pt.unobs {
			out[u] = mean[a]
		}

		// Spread: Σ_c π_c (g_c S_c + (m_c − m)(m_c − m)ᵀ).
		if wantSpread && q > 0 {
			var cov []float64
			if res.Cov != nil {
				cov = res.Cov[i*d*d : (i+1)*d*d]
			}
			var sd []float64
			if res.StdDev != nil {
				sd = res.StdDev[i*d : (i+1)*d]
			}
			for c := 0; c < k; c++ {
				if post[c] == 0 {
					continue
				}
				g := m.scaleFactor(c, p, delta[c])
				if robust {
					nu2 := m.params.Components[c].DF + float64(p)
					g *= nu2 / (nu2 - 2)
				}
				s := f[c].cond
				dev := cm[c*q : (c+1)*q]
				for a, ua := range pt.unobs {
					ea := dev[a] - mean[a]
					if sd != nil {
						sd[ua] += post[c] * (g*s[a*q+a] + ea*ea)
					}
					if cov != nil {
						for b, ub := range pt.unobs[:a+1] {
							eb := dev[b] - mean[b]
							cov[ua*d+ub] += post[c] * (g*s[a*q+b] + ea*eb)
						}
					}
				}
			}
			if cov != nil {
				for a, ua := range pt.unobs {
					for _, ub := range pt.unobs[:a] {
						cov[ub*d+ua] = cov[ua*d+ub]
					}
				}
			}
			if sd != nil {
				for _, u := range pt.unobs {
					sd[u] = math.Sqrt(sd[u])
				}
			}
		}

		// Per-component parts.
		if res.ComponentMeans != nil {
			for c := 0; c < k; c++ {
				o := res.ComponentMeans[(i*k+c)*d : (i*k+c+1)*d]
				copy(o, row)
				for a, u := range pt.unobs {
					o[u] = cm[c*q+a]
				}
				if res.ComponentDF != nil {
					res.ComponentDF[i*k+c] = m.params.Components[c].DF + float64(p)
				}
			}
		}
		if res.ComponentScales != nil && q > 0 {
			for c := 0; c < k; c++ {
				g := m.scaleFactor(c, p, delta[c])
				sc := res.ComponentScales[(i*k+c)*d*d : (i*k+c+1)*d*d]
				s := f[c].cond
				for a, ua := range pt.unobs {
					for b, ub := range pt.unobs {
						sc[ua*d+ub] = g * s[a*q+b]
					}
				}
			}
		}

		if err := m.checkFiniteRow(res, i); err != nil {
			return &rowError{i, err}
		}

		// Draws.
		if opts.Draws > 0 {
			m.drawConditional(row, pt, f, post, cm, delta, z, cum, opts, i, res.Draws[i*opts.Draws*d:(i+1)*opts.Draws*d])
		}
	}
	return nil
}

// scaleFactor is the factor of the Schur complement in component c's
// conditional scale: 1 for Gaussian, (ν + δ_o)/(ν + p_o) for Student-t.
func (m *Model) scaleFactor(c, p int, delta float64) float64 {
	if m.family != StudentT {
		return 1
	}
	nu := m.params.Components[c].DF
	return (nu + delta) / (nu + float64(p))
}

// checkFiniteRow rejects a row whose conditional outputs overflowed.
func (m *Model) checkFiniteRow(res *Conditional, i int) error {
	d, k := m.dim, m.k
	for _, s := range [][]float64{
		res.Mean[i*d : (i+1)*d],
		sliceOrNil(res.StdDev, i*d, (i+1)*d),
		sliceOrNil(res.Cov, i*d*d, (i+1)*d*d),
		sliceOrNil(res.ComponentMeans, i*k*d, (i+1)*k*d),
		sliceOrNil(res.ComponentScales, i*k*d*d, (i+1)*k*d*d),
	} {
		if !finiteRow(s) {
			return fmt.Errorf("row %d: the conditional moments are not finite in float64 (the observed values lie extremely far from every component)", i)
		}
	}
	return nil
}

func sliceOrNil(s []float64, lo, hi int) []float64 {
	if s == nil {
		return nil
	}
	return s[lo:hi]
}

// rowStream returns the second PCG seed word of row r's draw stream
// (a splitmix64 finaliser of r, so neighbouring rows get unrelated streams).
func rowStream(r int64) uint64 {
	z := uint64(r) ^ imputeStream
	z += 0x9e3779b97f4a7c15
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}

// drawConditional writes opts.Draws completed rows for row i into out
// (Draws × Dim). Each draw takes one uniform (the component, by the
// conditional weights), q standard normals and, for Student-t, one χ²
// variate; a draw that overflows is redrawn up to 64 times and then clamped,
// as Sampler.Next does.
func (m *Model) drawConditional(row []float64, pt *pattern, f []*subFactor, post, cm, delta, z, cum []float64, opts *ConditionalOptions, i int, out []float64) {
	d := m.dim
	p, q := len(pt.obs), len(pt.unobs)
	n := p + q
	for a := 0; a < opts.Draws; a++ {
		copy(out[a*d:(a+1)*d], row)
	}
	if q == 0 {
		return
	}
	rng := rand.New(rand.NewPCG(opts.Seed, rowStream(opts.FirstRow+int64(i))))
	total := 0.0
	last := -1
	for c, w := range post {
		total += w
		cum[c] = total
		if w > 0 {
			last = c
		}
	}
	for a := 0; a < opts.Draws; a++ {
		dst := out[a*d : (a+1)*d]
		u := rng.Float64() * total
		c := last
		for j, cw := range cum {
			if u < cw && post[j] > 0 {
				c = j
				break
			}
		}
		l := f[c].l
		for attempt := 0; ; attempt++ {
			for b := range z {
				z[b] = rng.NormFloat64()
			}
			scale := 1.0
			if m.family == StudentT {
				nu2 := m.params.Components[c].DF + float64(p)
				w := 0.0
				if nu2/2 > 0 {
					w = distuv.ChiSquared{K: nu2, Src: rng}.Rand()
				}
				scale = math.Sqrt(m.scaleFactor(c, p, delta[c]) * nu2 / w)
			}
			ok := true
			for b, ub := range pt.unobs {
				acc := 0.0
				lb := l[(p+b)*n+p : (p+b)*n+p+b+1]
				for t, v := range lb {
					acc += v * z[t]
				}
				v := cm[c*q+b] + scale*acc
				if v-v != 0 {
					ok = false
				}
				dst[ub] = v
			}
			if ok {
				break
			}
			if attempt == maxRedraws {
				for b, ub := range pt.unobs {
					if v := dst[ub]; v != v {
						dst[ub] = cm[c*q+b]
					} else {
						dst[ub] = math.Max(-math.MaxFloat64, math.Min(math.MaxFloat64, v))
					}
				}
				break
			}
		}
	}
}
