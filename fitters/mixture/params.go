package mixture

import "fmt"

// Family names the distribution of every component of a model.
type Family int

const (
	// Gaussian components: multivariate normal densities.
	Gaussian Family = iota + 1
	// StudentT components: multivariate Student-t densities, each with its own
	// degrees of freedom (Component.DF).
	StudentT
)

// String returns the family's lower-case name as used in documents and flags.
func (f Family) String() string {
	switch f {
	case Gaussian:
		return "gaussian"
	case StudentT:
		return "student_t"
	}
	return fmt.Sprintf("family(%d)", int(f))
}

// ParseFamily is the inverse of Family.String.
func ParseFamily(s string) (Family, error) {
	switch s {
	case "gaussian":
		return Gaussian, nil
	case "student_t":
		return StudentT, nil
	}
	return 0, fmt.Errorf("unknown family %q (want gaussian or student_t)", s)
}

// Structure names the constraint placed on the components' covariance (or,
// for Student-t components, scale) matrices.
type Structure int

const (
	// Full: each component has its own unrestricted symmetric positive-definite matrix.
	Full Structure = iota + 1
	// Diagonal: each component has its own diagonal matrix.
	Diagonal
	// Spherical: each component has its own multiple of the identity.
	Spherical
	// Tied: all components share one unrestricted matrix.
	Tied
)

// String returns the structure's lower-case name as used in documents and flags.
func (s Structure) String() string {
	switch s {
	case Full:
		return "full"
	case Diagonal:
		return "diagonal"
	case Spherical:
		return "spherical"
	case Tied:
		return "tied"
	}
	return fmt.Sprintf("structure(%d)", int(s))
}

// ParseStructure is the inverse of Structure.String.
func ParseStructure(s string) (Structure, error) {
	switch s {
	case "full":
		return Full, nil
	case "diagonal":
		return Diagonal, nil
	case "spherical":
		return Spherical, nil
	case "tied":
		return Tied, nil
	}
	return 0, fmt.Errorf("unknown covariance structure %q (want full, diagonal, spherical or tied)", s)
}

// Component is one term of a mixture.
type Component struct {
	// Weight is the mixing proportion, in [0, 1]; the weights of a model sum to 1.
	Weight float64
	// Mean is the location vector, of length Dim.
	Mean []float64
	// Cov is the covariance matrix (Gaussian) or scale matrix (Student-t),
	// Dim×Dim, row-major, always stored in full whatever the Structure
	// (a diagonal structure stores zeros off the diagonal).
	Cov []float64
	// DF is the degrees of freedom of a Student-t component (> 0); it is zero
	// for Gaussian components.
	DF float64
}

// Params are the plain parameters of a mixture: what a fitter estimates and
// what a model document stores. They are validated and factorised by New.
type Params struct {
	// Dim is the number of features (columns) of a row.
	Dim int
	// Features optionally names the columns; empty, or Dim unique non-empty names.
	Features []string
	// Family of every component.
	Family Family
	// Structure of the covariance matrices.
	Structure Structure
	// Components of the mixture, at least one.
	Components []Component
}

// Clone returns a deep copy of p.
func (p Params) Clone() Params {
	q := p
	q.Features = append([]string(nil), p.Features...)
	q.Components = make([]Component, len(p.Components))
	for i, c := range p.Components {
		q.Components[i] = Component{
			Weight: c.Weight,
			Mean:   append([]float64(nil), c.Mean...),
			Cov:    append([]float64(nil), c.Cov...),
			DF:     c.DF,
		}
	}
	return q
}
