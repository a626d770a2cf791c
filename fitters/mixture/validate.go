package mixture

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// weightSumTolerance is how far the weights may sum from 1.
const weightSumTolerance = 1e-9

// Validate reports the first problem that makes p unusable, or nil. The rules:
//
//   - Dim ≥ 1 and at least one component; Family and Structure are known values.
//   - Features is empty or holds Dim unique, non-empty names.
//   - Every weight is in [0, 1] and the weights sum to 1 within 1e-9.
//   - Every Mean has Dim finite values; every Cov has Dim×Dim finite values,
//     is symmetric within a relative 1e-10 (|Σ_ij − Σ_ji| ≤ 1e-10·sqrt(Σ_ii Σ_jj)),
//     positive definite (a Cholesky factorisation succeeds) and its correlation
//     matrix has a condition number at most MaxCondition (1e14).
//   - Diagonal structure: every off-diagonal entry is exactly zero. Spherical:
//     additionally all diagonal entries are exactly equal. Tied: every Cov is
//     exactly equal to component 0's.
//   - Student-t components have a finite DF > 0; Gaussian components have DF 0.
//
// Errors name the component (0-based) and field, e.g.
// "component 2: covariance is not positive definite".
func (p Params) Validate() error {
	_, err := validate(p)
	return err
}

// validate checks p and returns one Cholesky factorisation per component
// (the same pointer for every component of a tied model).
func validate(p Params) ([]*mat.Cholesky, error) {
	if p.Dim < 1 {
		return nil, fmt.Errorf("dim %d must be at least 1", p.Dim)
	}
	if len(p.Components) < 1 {
		return nil, fmt.Errorf("components: a model needs at least one component")
	}
	if p.Family != Gaussian && p.Family != StudentT {
		return nil, fmt.Errorf("family: unknown %v (want gaussian or student_t)", p.Family)
	}
	switch p.Structure {
	case Full, Diagonal, Spherical, Tied:
	default:
		return nil, fmt.Errorf("structure: unknown %v (want full, diagonal, spherical or tied)", p.Structure)
	}
	if len(p.Features) != 0 {
		if len(p.Features) != p.Dim {
			return nil, fmt.Errorf("features: %d names given, want 0 or dim %d", len(p.Features), p.Dim)
		}
		seen := make(map[string]int, len(p.Features))
		for i, f := range p.Features {
			if f == "" {
				return nil, fmt.Errorf("features[%d]: name is empty", i)
			}
			if j, ok := seen[f]; ok {
				return nil, fmt.Errorf("features[%d]: duplicate name %q (also features[%d])", i, f, j)
			}
			seen[f] = i
		}
	}
	d := p.Dim
	sum := 0.0
	for k, c := range p.Components {
		if math.IsNaN(c.Weight) || c.Weight < 0 || c.Weight > 1 {
			return nil, fmt.Errorf("component %d: weight %v is outside [0, 1]", k, c.Weight)
		}
		sum += c.Weight
		if len(c.Mean) != d {
			return nil, fmt.Errorf("component %d: mean has %d values, want dim %d", k, len(c.Mean), d)
		}
		for i, v := range c.Mean {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, fmt.Errorf("component %d: mean[%d] = %v is not finite", k, i, v)
			}
		}
		if len(c.Cov) != d*d {
			return nil, fmt.Errorf("component %d: covariance has %d values, want %d (dim %d squared)", k, len(c.Cov), d*d, d)
		}
		switch p.Family {
		case Gaussian:
			if c.DF != 0 {
				return nil, fmt.Errorf("component %d: degrees of freedom %v must be 0 for a gaussian component", k, c.DF)
			}
		case StudentT:
			if !(c.DF > 0) || math.IsInf(c.DF, 0) {
				return nil, fmt.Errorf("component %d: degrees of freedom %v must be positive and finite for a student_t component", k, c.DF)
			}
		}
	}
	if math.Abs(sum-1) > weightSumTolerance {
		return nil, fmt.Errorf("weights: sum to %.12g, want 1 within %g", sum, weightSumTolerance)
	}
	chols := make([]*mat.Cholesky, len(p.Components))
	for k, c := range p.Components {
		if err := checkStructure(p.Structure, c.Cov, d, p.Components[0].Cov, k); err != nil {
			return nil, fmt.Errorf("component %d: %w", k, err)
		}
		if p.Structure == Tied && k > 0 {
			chols[k] = chols[0]
			continue
		}
		ch, err := checkCovariance(c.Cov, d)
		if err != nil {
			return nil, fmt.Errorf("component %d: %w", k, err)
		}
		chols[k] = ch
	}
	for k, c := range p.Components {
		if ln := LogNormalizer(p.Family, d, c.DF, chols[k].LogDet()); math.IsNaN(ln) || math.IsInf(ln, 0) {
			return nil, fmt.Errorf("component %d: log normalising constant %v is not finite (degrees of freedom %v, dim %d)", k, ln, c.DF, d)
		}
	}
	return chols, nil
}

// checkStructure checks the structural constraint on one covariance; first is
// component 0's covariance (for Tied).
func checkStructure(s Structure, cov []float64, d int, first []float64, k int) error {
	for i, v := range cov {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("covariance cov[%d][%d] = %v is not finite", i/d, i%d, v)
		}
	}
	switch s {
	case Diagonal, Spherical:
		for i := 0; i < d; i++ {
			for j := 0; j < d; j++ {
				if i != j && cov[i*d+j] != 0 {
					return fmt.Errorf("%v structure needs zero off-diagonal entries, cov[%d][%d] = %v", s, i, j, cov[i*d+j])
				}
			}
		}
		if s == Spherical {
			for i := 1; i < d; i++ {
				if cov[i*d+i] != cov[0] {
					return fmt.Errorf("spherical structure needs equal diagonal entries, cov[%d][%d] = %v but cov[0][0] = %v", i, i, cov[i*d+i], cov[0])
				}
			}
		}
	case Tied:
		if k > 0 {
			for i, v := range cov {
				if v != first[i] {
					return fmt.Errorf("tied structure needs every covariance equal to component 0's, cov[%d][%d] = %v but component 0 has %v", i/d, i%d, v, first[i])
				}
			}
		}
	}
	return nil
}
