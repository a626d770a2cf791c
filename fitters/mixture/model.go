package mixture

import (
	"fmt"
	"math"
	"sync"
)

// LargeDFThreshold is the number of degrees of freedom from which the
// Student-t normalising constant is computed from the asymptotic (Stirling)
// series of the log-gamma ratio instead of two math.Lgamma calls; see the
// package documentation.
const LargeDFThreshold = 32

// Model is a validated mixture with its per-component factorisations
// precomputed. It is immutable and safe for concurrent use. Build one with New.
type Model struct {
	params    Params
	dim, k    int
	family    Family
	structure Structure

	logW     []float64 // log weights (−Inf for a zero weight)
	cumW     []float64 // cumulative weights, for sampling
	means    []float64 // k×dim, row-major
	lower    []float64 // distinct lower Cholesky factors, each packed (lowerPacked)
	lowerOff []int     // offset of component k's factor in lower
	invDiag  []float64 // k×dim: 1/L_ii
	dense    []bool    // factor k has non-zero entries below the diagonal
	logNorm  []float64 // log normalising constant of each component, −½ log|Σ| included

	// Student-t only, per component.
	df     []float64
	halfVP []float64 // (ν+D)/2
	invDF  []float64 // 1/ν
	logDF  []float64 // log ν
	smallC []float64 // (ν+D)/(2ν)

	// Rows so far from every component that each component density underflows
	// get these posteriors (uniform over components of positive weight).
	farLogPost []float64
	farLabel   int

	pool sync.Pool // *workspace
}

// New validates p (see Params.Validate) and builds a Model: it factorises
// every covariance once (once in all for a tied structure) and precomputes the
// log-normalising constants. p is deep-copied; later changes to p do not
// affect the model. The error names the offending component and field.
func New(p Params) (*Model, error) {
	chols, err := validate(p)
	if err != nil {
		return nil, fmt.Errorf("mixture: invalid parameters: %w", err)
	}
	d, k := p.Dim, len(p.Components)
	m := &Model{
		params:    p.Clone(),
		dim:       d,
		k:         k,
		family:    p.Family,
		structure: p.Structure,
		logW:      make([]float64, k),
		cumW:      make([]float64, k),
		means:     make([]float64, 0, k*d),
		lowerOff:  make([]int, k),
		invDiag:   make([]float64, k*d),
		dense:     make([]bool, k),
		logNorm:   make([]float64, k),
		farLabel:  -1,
	}
	cum := 0.0
	npos := 0
	for i, c := range p.Components {
		m.logW[i] = math.Log(c.Weight)
		cum += c.Weight
		m.cumW[i] = cum
		m.means = append(m.means, c.Mean...)
		if c.Weight > 0 {
			npos++
			if m.farLabel < 0 {
				m.farLabel = i
			}
		}
	}
	m.farLogPost = make([]float64, k)
	for i, c := range p.Components {
		if c.Weight > 0 {
			m.farLogPost[i] = -math.Log(float64(npos))
		} else {
			m.farLogPost[i] = math.Inf(-1)
		}
	}
	if p.Family == StudentT {
		m.df = make([]float64, k)
		m.halfVP = make([]float64, k)
		m.invDF = make([]float64, k)
		m.logDF = make([]float64, k)
		m.smallC = make([]float64, k)
	}
	for i, c := range p.Components {
		if i == 0 || chols[i] != chols[i-1] {
			m.lowerOff[i] = len(m.lower)
			m.lower = append(m.lower, lowerPacked(chols[i], d)...)
		} else {
			m.lowerOff[i] = m.lowerOff[i-1]
		}
		l := m.factor(i)
		for a := 0; a < d; a++ {
			m.invDiag[i*d+a] = 1 / l[packedRow(a)+a]
			for b := 0; b < a; b++ {
				if l[packedRow(a)+b] != 0 {
					m.dense[i] = true
				}
			}
		}
		m.logNorm[i] = LogNormalizer(p.Family, d, c.DF, chols[i].LogDet())
		if p.Family == StudentT {
			v := c.DF
			m.df[i] = v
			m.halfVP[i] = 0.5 * (v + float64(d))
			m.invDF[i] = 1 / v
			m.logDF[i] = math.Log(v)
			m.smallC[i] = 0.5 * (1 + float64(d)/v)
		}
	}
	m.pool.New = func() any { return m.newWorkspace() }
	return m, nil
}

// factor returns component c's lower Cholesky factor, packed (lowerPacked).
func (m *Model) factor(c int) []float64 {
	return m.lower[m.lowerOff[c] : m.lowerOff[c]+packedRow(m.dim)]
}

// Params returns a deep copy of the model's parameters.
func (m *Model) Params() Params { return m.params.Clone() }

// Dim returns the number of features of a row.
func (m *Model) Dim() int { return m.dim }

// K returns the number of components.
func (m *Model) K() int { return m.k }

// Family returns the component family.
func (m *Model) Family() Family { return m.family }

// Structure returns the covariance structure.
func (m *Model) Structure() Structure { return m.structure }

// LogNormalizer returns the logarithm of the normalising constant of one
// component density of the given family and dimension whose covariance (or
// scale) matrix has log-determinant logDet:
//
//	Gaussian:  −(D/2) log(2π) − ½ logDet
//	Student-t: log Γ((ν+D)/2) − log Γ(ν/2) − (D/2) log(νπ) − ½ logDet
//
// For ν ≥ LargeDFThreshold the Student-t value comes from the asymptotic
// series of the log-gamma ratio, accurate to a few ulp for every finite ν
// (see the package documentation). df is ignored for Gaussian.
func LogNormalizer(f Family, dim int, df, logDet float64) float64 {
	if f == StudentT {
		return studentTLogConst(df, dim) - 0.5*logDet
	}
	return -0.5*float64(dim)*math.Log(2*math.Pi) - 0.5*logDet
}

// studentTLogConst returns log Γ((ν+D)/2) − log Γ(ν/2) − (D/2) log(νπ).
func studentTLogConst(df float64, dim int) float64 {
	a, b := 0.5*df, 0.5*float64(dim)
	if df < LargeDFThreshold {
		lab, _ := math.Lgamma(a + b)
		la, _ := math.Lgamma(a)
		if a < 1e-300 {
			// Γ(a) = 1/a·(1 + O(a)); ν/2 may even underflow to 0.
			la = math.Ln2 - math.Log(df)
		}
		return lab - la - b*math.Log(df*math.Pi)
	}
	// log Γ(a+b) − log Γ(a) − b log a, with Stirling's series
	// log Γ(z) = (z−½) log z − z + ½ log 2π + S(z): the large terms cancel
	// analytically, leaving (a+b−½) log1p(b/a) − b + S(a+b) − S(a).
	r := (a+b-0.5)*math.Log1p(b/a) - b + stirlingTail(a+b) - stirlingTail(a)
	// b log a − (D/2) log(νπ) = b log(ν/2) − b log(νπ) = −b log(2π).
	return r - b*math.Log(2*math.Pi)
}

// stirlingTail returns S(z) = Σ_{n=1..5} B₂ₙ / (2n(2n−1) z^(2n−1)), the
// correction term of Stirling's series for log Γ(z); the first omitted term
// is below 1.1e-16 for z ≥ 16.
func stirlingTail(z float64) float64 {
	w := 1 / z
	w2 := w * w
	return w * (1.0/12 + w2*(-1.0/360+w2*(1.0/1260+w2*(-1.0/1680+w2*(1.0/1188)))))
}
