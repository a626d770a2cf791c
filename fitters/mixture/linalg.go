package mixture

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// MaxCondition is the largest accepted condition number of a covariance
// matrix's correlation matrix R = D^-½ Σ D^-½ (D the diagonal of Σ). The
// correlation matrix is used rather than Σ itself because the accuracy of a
// Cholesky factorisation does not depend on the scaling of the variables:
// features measured in very different units (say flow in m³/h next to
// vibration in m/s²) must not be rejected for that alone. Beyond 1e14 fewer
// than two significant digits of a Mahalanobis distance can be trusted.
const MaxCondition = 1e14

// symmetricTolerance is the relative asymmetry accepted in a covariance:
// |Σ_ij − Σ_ji| ≤ symmetricTolerance · sqrt(Σ_ii Σ_jj).
const symmetricTolerance = 1e-10

// CholeskyOf factorises the dim×dim row-major matrix cov as a gonum Cholesky
// decomposition. The matrix is symmetrised as (cov + covᵀ)/2 first (callers
// check symmetry themselves, see CheckCovariance). It returns an error when
// the length is not dim×dim, a value is not finite, or the matrix is not
// positive definite. It does not check the condition number.
func CholeskyOf(cov []float64, dim int) (*mat.Cholesky, error) {
	if dim < 1 {
		return nil, fmt.Errorf("cholesky: dim %d must be at least 1", dim)
	}
	if len(cov) != dim*dim {
		return nil, fmt.Errorf("cholesky: matrix has %d values, want %d (dim %d squared)", len(cov), dim*dim, dim)
	}
	for i, v := range cov {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("cholesky: cov[%d][%d] = %v is not finite", i/dim, i%dim, v)
		}
	}
	sym := mat.NewSymDense(dim, nil)
	for i := 0; i < dim; i++ {
		for j := i; j < dim; j++ {
			sym.SetSym(i, j, 0.5*(cov[i*dim+j]+cov[j*dim+i]))
		}
	}
	var ch mat.Cholesky
	if !ch.Factorize(sym) {
		return nil, fmt.Errorf("cholesky: matrix is not positive definite")
	}
	return &ch, nil
}

// CheckCovariance applies to one dim×dim row-major matrix the checks New
// applies to every covariance: finite values, symmetry within a relative
// 1e-10 (|Σ_ij − Σ_ji| ≤ 1e-10·sqrt(Σ_ii Σ_jj)), positive definiteness and a
// correlation-matrix condition number at most MaxCondition. Fitters use it to
// decide whether a covariance needs more ridge before building a model.
func CheckCovariance(cov []float64, dim int) error {
	_, err := checkCovariance(cov, dim)
	return err
}

// checkCovariance is CheckCovariance returning the factorisation.
func checkCovariance(cov []float64, dim int) (*mat.Cholesky, error) {
	if dim < 1 {
		return nil, fmt.Errorf("dim %d must be at least 1", dim)
	}
	if len(cov) != dim*dim {
		return nil, fmt.Errorf("covariance has %d values, want %d (dim %d squared)", len(cov), dim*dim, dim)
	}
	for i, v := range cov {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("covariance cov[%d][%d] = %v is not finite", i/dim, i%dim, v)
		}
	}
	for i := 0; i < dim; i++ {
		if d := cov[i*dim+i]; !(d > 0) {
			return nil, fmt.Errorf("covariance is not positive definite: diagonal cov[%d][%d] = %v is not positive", i, i, d)
		}
	}
	for i := 0; i < dim; i++ {
		for j := i + 1; j < dim; j++ {
			a, b := cov[i*dim+j], cov[j*dim+i]
			scale := math.Sqrt(cov[i*dim+i]) * math.Sqrt(cov[j*dim+j])
			if math.Abs(a-b) > symmetricTolerance*scale {
				return nil, fmt.Errorf("covariance is not symmetric: cov[%d][%d] = %v but cov[%d][%d] = %v", i, j, a, j, i, b)
			}
		}
	}
	ch, err := CholeskyOf(cov, dim)
	if err != nil {
		return nil, fmt.Errorf("covariance is not positive definite")
	}
	// Condition number of the correlation matrix (scale-free).
	sd := make([]float64, dim)
	for i := range sd {
		sd[i] = math.Sqrt(cov[i*dim+i])
	}
	corr := mat.NewSymDense(dim, nil)
	for i := 0; i < dim; i++ {
		for j := i; j < dim; j++ {
			corr.SetSym(i, j, 0.5*(cov[i*dim+j]+cov[j*dim+i])/sd[i]/sd[j])
		}
	}
	var cc mat.Cholesky
	if !cc.Factorize(corr) {
		return nil, fmt.Errorf("covariance is not positive definite (its correlation matrix is singular)")
	}
	if c := cc.Cond(); !(c <= MaxCondition) {
		return nil, fmt.Errorf("covariance is too ill-conditioned: correlation-matrix condition number %.3g exceeds limit %.0e", c, MaxCondition)
	}
	if ld := ch.LogDet(); math.IsNaN(ld) || math.IsInf(ld, 0) {
		return nil, fmt.Errorf("covariance log-determinant %v is not finite", ld)
	}
	return ch, nil
}

// lowerPacked copies the lower Cholesky factor L (Σ = L Lᵀ) of ch into a
// packed slice of dim(dim+1)/2 values: row i of L, entries 0..i, starts at
// packedRow(i).
func lowerPacked(ch *mat.Cholesky, dim int) []float64 {
	var l mat.TriDense
	ch.LTo(&l)
	out := make([]float64, dim*(dim+1)/2)
	for i := 0; i < dim; i++ {
		for j := 0; j <= i; j++ {
			out[packedRow(i)+j] = l.At(i, j)
		}
	}
	return out
}

// packedRow is the offset of row i in a packed lower-triangular matrix.
func packedRow(i int) int { return i * (i + 1) / 2 }
