package mixture

import (
	"math"
	"strings"
	"testing"
)

// validParams returns a valid 2-D, 2-component model of the given family and
// structure (pumping-station scenario: flow and motor current, scaled).
func validParams(f Family, s Structure) Params {
	p := Params{Dim: 2, Family: f, Structure: s, Features: []string{"flow", "current"}}
	covs := [][]float64{{2, 0.6, 0.6, 1}, {0.5, -0.1, -0.1, 0.8}}
	switch s {
	case Diagonal:
		covs = [][]float64{{2, 0, 0, 1}, {0.5, 0, 0, 0.8}}
	case Spherical:
		covs = [][]float64{{2, 0, 0, 2}, {0.5, 0, 0, 0.5}}
	case Tied:
		covs = [][]float64{{2, 0.6, 0.6, 1}, {2, 0.6, 0.6, 1}}
	}
	df := []float64{0, 0}
	if f == StudentT {
		df = []float64{4, 9}
	}
	p.Components = []Component{
		{Weight: 0.3, Mean: []float64{0, 0}, Cov: covs[0], DF: df[0]},
		{Weight: 0.7, Mean: []float64{3, -1}, Cov: covs[1], DF: df[1]},
	}
	return p
}

func TestValidateAcceptsEveryFamilyAndStructure(t *testing.T) {
	for _, f := range []Family{Gaussian, StudentT} {
		for _, s := range []Structure{Full, Diagonal, Spherical, Tied} {
			p := validParams(f, s)
			if err := p.Validate(); err != nil {
				t.Errorf("%v/%v: %v", f, s, err)
			}
			m, err := New(p)
			if err != nil {
				t.Fatalf("%v/%v: New: %v", f, s, err)
			}
			if m.Family() != f || m.Structure() != s || m.Dim() != 2 || m.K() != 2 {
				t.Errorf("%v/%v: accessors give %v %v %d %d", f, s, m.Family(), m.Structure(), m.Dim(), m.K())
			}
		}
	}
}

func TestValidateErrors(t *testing.T) {
	type edit func(p *Params)
	cases := []struct {
		name   string
		base   Structure
		family Family
		edit   edit
		want   string
	}{
		{"dim zero", Full, Gaussian, func(p *Params) { p.Dim = 0 }, "dim 0 must be at least 1"},
		{"no components", Full, Gaussian, func(p *Params) { p.Components = nil }, "at least one component"},
		{"unknown family", Full, Gaussian, func(p *Params) { p.Family = 9 }, "family: unknown family(9)"},
		{"zero family", Full, Gaussian, func(p *Params) { p.Family = 0 }, "family: unknown"},
		{"unknown structure", Full, Gaussian, func(p *Params) { p.Structure = 7 }, "structure: unknown structure(7)"},
		{"features count", Full, Gaussian, func(p *Params) { p.Features = []string{"flow"} }, "features: 1 names given, want 0 or dim 2"},
		{"features empty name", Full, Gaussian, func(p *Params) { p.Features = []string{"flow", ""} }, "features[1]: name is empty"},
		{"features duplicate", Full, Gaussian, func(p *Params) { p.Features = []string{"flow", "flow"} }, `features[1]: duplicate name "flow"`},
		{"negative weight", Full, Gaussian, func(p *Params) { p.Components[0].Weight = -0.3; p.Components[1].Weight = 1.3 }, "component 0: weight -0.3 is outside [0, 1]"},
		{"weight above one", Full, Gaussian, func(p *Params) { p.Components[1].Weight = 1.5 }, "component 1: weight 1.5 is outside [0, 1]"},
		{"weight NaN", Full, Gaussian, func(p *Params) { p.Components[1].Weight = math.NaN() }, "component 1: weight NaN is outside [0, 1]"},
		{"weights sum", Full, Gaussian, func(p *Params) { p.Components[1].Weight = 0.6 }, "weights: sum to 0.9"},
		{"weights sum just outside tolerance", Full, Gaussian, func(p *Params) { p.Components[1].Weight = 0.7 + 2e-9 }, "weights: sum to"},
		{"mean length", Full, Gaussian, func(p *Params) { p.Components[1].Mean = []float64{1} }, "component 1: mean has 1 values, want dim 2"},
		{"mean NaN", Full, Gaussian, func(p *Params) { p.Components[0].Mean[1] = math.NaN() }, "component 0: mean[1] = NaN is not finite"},
		{"mean Inf", Full, Gaussian, func(p *Params) { p.Components[1].Mean[0] = math.Inf(-1) }, "component 1: mean[0] = -Inf is not finite"},
		{"cov length", Full, Gaussian, func(p *Params) { p.Components[1].Cov = []float64{1, 0, 1} }, "component 1: covariance has 3 values, want 4 (dim 2 squared)"},
		{"cov NaN", Full, Gaussian, func(p *Params) { p.Components[0].Cov[1] = math.NaN() }, "component 0: covariance cov[0][1] = NaN is not finite"},
		{"cov Inf", Full, Gaussian, func(p *Params) { p.Components[1].Cov[3] = math.Inf(1) }, "component 1: covariance cov[1][1] = +Inf is not finite"},
		{"cov asymmetric", Full, Gaussian, func(p *Params) { p.Components[0].Cov[1] = 0.5 }, "component 0: covariance is not symmetric: cov[0][1] = 0.5 but cov[1][0] = 0.6"},
		{"cov asymmetric beyond 1e-10", Full, Gaussian, func(p *Params) { p.Components[0].Cov[1] = 0.6 + 3e-10 }, "component 0: covariance is not symmetric"},
		{"cov not PD", Full, Gaussian, func(p *Params) { p.Components[1].Cov = []float64{1, 2, 2, 1} }, "component 1: covariance is not positive definite"},
		{"cov zero diagonal", Full, Gaussian, func(p *Params) { p.Components[1].Cov = []float64{0, 0, 0, 1} }, "component 1: covariance is not positive definite"},
		{"cov negative diagonal", Diagonal, Gaussian, func(p *Params) { p.Components[0].Cov = []float64{-1, 0, 0, 1} }, "component 0: covariance is not positive definite"},
		{"cov singular", Full, Gaussian, func(p *Params) { p.Components[0].Cov = []float64{1, 1, 1, 1} }, "component 0: covariance is not positive definite"},
		{"cov ill-conditioned", Full, Gaussian, func(p *Params) { p.Components[0].Cov = []float64{1, 1 - 1e-15, 1 - 1e-15, 1} }, "component 0: covariance is too ill-conditioned"},
		{"diagonal off-diagonal", Diagonal, Gaussian, func(p *Params) { p.Components[1].Cov = []float64{0.5, 0.1, 0.1, 0.8} }, "component 1: diagonal structure needs zero off-diagonal entries, cov[0][1] = 0.1"},
		{"spherical off-diagonal", Spherical, Gaussian, func(p *Params) { p.Components[0].Cov = []float64{2, 0.1, 0.1, 2} }, "component 0: spherical structure needs zero off-diagonal entries"},
		{"spherical unequal diagonal", Spherical, Gaussian, func(p *Params) { p.Components[1].Cov = []float64{0.5, 0, 0, 0.6} }, "component 1: spherical structure needs equal diagonal entries, cov[1][1] = 0.6 but cov[0][0] = 0.5"},
		{"tied differs", Tied, Gaussian, func(p *Params) { p.Components[1].Cov = []float64{2, 0.6, 0.6, 1.1} }, "component 1: tied structure needs every covariance equal to component 0's, cov[1][1] = 1.1"},
		{"gaussian with df", Full, Gaussian, func(p *Params) { p.Components[1].DF = 3 }, "component 1: degrees of freedom 3 must be 0 for a gaussian component"},
		{"student zero df", Full, StudentT, func(p *Params) { p.Components[0].DF = 0 }, "component 0: degrees of freedom 0 must be positive and finite"},
		{"student negative df", Full, StudentT, func(p *Params) { p.Components[1].DF = -2 }, "component 1: degrees of freedom -2 must be positive and finite"},
		{"student Inf df", Full, StudentT, func(p *Params) { p.Components[1].DF = math.Inf(1) }, "component 1: degrees of freedom +Inf must be positive and finite"},
		{"student NaN df", Full, StudentT, func(p *Params) { p.Components[0].DF = math.NaN() }, "component 0: degrees of freedom NaN must be positive and finite"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			p := validParams(tc.family, tc.base)
			tc.edit(&p)
			before := p.Clone()
			err := p.Validate()
			if err == nil {
				t.Fatalf("Validate accepted invalid parameters, want error containing %q", tc.want)
			}
			if !strings.Contains(err.Error(), tc.want) {
				t.Errorf("Validate error %q does not contain %q", err, tc.want)
			}
			m, err := New(p)
			if err == nil || m != nil {
				t.Fatalf("New accepted invalid parameters")
			}
			if !strings.Contains(err.Error(), tc.want) {
				t.Errorf("New error %q does not contain %q", err, tc.want)
			}
			if !paramsEqualNaN(p, before) {
				t.Errorf("validation changed its input")
			}
		})
	}
}

// paramsEqualNaN compares two Params treating NaN as equal to NaN.
func paramsEqualNaN(a, b Params) bool {
	eq := func(x, y float64) bool { return x == y || (x != x && y != y) }
	if a.Dim != b.Dim || a.Family != b.Family || a.Structure != b.Structure ||
		len(a.Features) != len(b.Features) || len(a.Components) != len(b.Components) {
		return false
	}
	for i := range a.Features {
		if a.Features[i] != b.Features[i] {
			return false
		}
	}
	for k := range a.Components {
		ca, cb := a.Components[k], b.Components[k]
		if !eq(ca.Weight, cb.Weight) || !eq(ca.DF, cb.DF) || len(ca.Mean) != len(cb.Mean) || len(ca.Cov) != len(cb.Cov) {
			return false
		}
		for i := range ca.Mean {
			if !eq(ca.Mean[i], cb.Mean[i]) {
				return false
			}
		}
		for i := range ca.Cov {
			if !eq(ca.Cov[i], cb.Cov[i]) {
				return false
			}
		}
	}
	return true
}

func TestValidateTolerances(t *testing.T) {
	// Weights within 1e-9 of summing to 1 and covariances symmetric within a
	// relative 1e-10 are accepted.
	p := validParams(Gaussian, Full)
	p.Components[1].Weight = 0.7 + 5e-10
	p.Components[0].Cov[1] = 0.6 + 1e-11
	if err := p.Validate(); err != nil {
		t.Errorf("within tolerances: %v", err)
	}
	// Very different feature scales are not ill-conditioning: the check is
	// on the correlation matrix.
	p = validParams(Gaussian, Diagonal)
	p.Components[0].Cov = []float64{1e10, 0, 0, 1e-10}
	if err := p.Validate(); err != nil {
		t.Errorf("scaled diagonal covariance (plain condition number 1e20) rejected: %v", err)
	}
	// A zero-weight component is allowed.
	p = validParams(StudentT, Full)
	p.Components[0].Weight, p.Components[1].Weight = 0, 1
	if err := p.Validate(); err != nil {
		t.Errorf("zero weight: %v", err)
	}
}

func TestNewCopiesParams(t *testing.T) {
	p := validParams(StudentT, Full)
	m, err := New(p)
	if err != nil {
		t.Fatal(err)
	}
	x := []float64{0.5, 0.2}
	before := make([]float64, 1)
	if err := m.LogDensity(x, before); err != nil {
		t.Fatal(err)
	}
	p.Components[0].Mean[0] = 100
	p.Components[0].Cov[0] = 50
	p.Features[0] = "changed"
	after := make([]float64, 1)
	if err := m.LogDensity(x, after); err != nil {
		t.Fatal(err)
	}
	if before[0] != after[0] {
		t.Errorf("changing the caller's Params changed the model: %v -> %v", before[0], after[0])
	}
	q := m.Params()
	if q.Components[0].Mean[0] != 0 || q.Features[0] != "flow" {
		t.Errorf("Params() = %+v, want the original parameters", q)
	}
	q.Components[1].Cov[0] = 99
	if m.Params().Components[1].Cov[0] == 99 {
		t.Errorf("Params() is not a deep copy")
	}
}

func TestCholeskyOf(t *testing.T) {
	ch, err := CholeskyOf([]float64{4, 2, 2, 3}, 2)
	if err != nil {
		t.Fatal(err)
	}
	// det [[4,2],[2,3]] = 8 (hand computation).
	if got := ch.LogDet(); math.Abs(got-math.Log(8)) > 1e-15 {
		t.Errorf("LogDet = %v, want ln 8", got)
	}
	for _, tc := range []struct {
		cov  []float64
		dim  int
		want string
	}{
		{[]float64{1, 2, 2, 1}, 2, "not positive definite"},
		{[]float64{1, 0, 1}, 2, "3 values, want 4"},
		{[]float64{1}, 0, "dim 0"},
		{[]float64{1, math.NaN(), 0, 1}, 2, "cov[0][1] = NaN is not finite"},
	} {
		if _, err := CholeskyOf(tc.cov, tc.dim); err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("CholeskyOf(%v, %d) error %v, want %q", tc.cov, tc.dim, err, tc.want)
		}
	}
	if err := CheckCovariance([]float64{1, 1 - 1e-15, 1 - 1e-15, 1}, 2); err == nil || !strings.Contains(err.Error(), "ill-conditioned") {
		t.Errorf("CheckCovariance near-singular: %v", err)
	}
	if err := CheckCovariance([]float64{1, 0.5, 0.5, 1}, 2); err != nil {
		t.Errorf("CheckCovariance valid: %v", err)
	}
}
