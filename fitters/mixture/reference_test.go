package mixture

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"testing"
)

// referenceFile holds values computed by testdata/mixture/make_reference.py
// with scipy.stats.multivariate_normal / multivariate_t,
// scipy.spatial.distance.mahalanobis and scipy.special.logsumexp (scipy 1.17.1,
// numpy 2.4.6), and 50-digit mpmath 1.3.0 where scipy loses digits
// (Student-t with df >= 1e6). Regenerate with
// `python3 testdata/mixture/make_reference.py` from the repository root.
var referenceFile = filepath.Join("..", "..", "testdata", "mixture", "reference.json")

type refComponent struct {
	Weight float64   `json:"weight"`
	Mean   []float64 `json:"mean"`
	Cov    []float64 `json:"cov"`
	DF     float64   `json:"df"`
}

type refCase struct {
	Name         string         `json:"name"`
	Family       string         `json:"family"`
	Structure    string         `json:"structure"`
	Dim          int            `json:"dim"`
	Source       string         `json:"source"`
	Components   []refComponent `json:"components"`
	X            []float64      `json:"x"`
	CompLogDens  []float64      `json:"component_log_density"`
	Mahalanobis  []float64      `json:"mahalanobis"`
	LogDensity   []float64      `json:"log_density"`
	LogPosterior []float64      `json:"log_posterior"`
	Posterior    []float64      `json:"posterior"`
}

type refNormalizer struct {
	DF    float64 `json:"df"`
	Dim   int     `json:"dim"`
	Value float64 `json:"value"`
}

type refDoc struct {
	Versions   map[string]string `json:"versions"`
	Cases      []refCase         `json:"cases"`
	Normalizer []refNormalizer   `json:"student_t_normalizer"`
}

func loadReference(t *testing.T) refDoc {
	t.Helper()
	b, err := os.ReadFile(referenceFile)
	if err != nil {
		t.Fatalf("read reference values: %v", err)
	}
	var doc refDoc
	if err := json.Unmarshal(b, &doc); err != nil {
		t.Fatalf("decode %s: %v", referenceFile, err)
	}
	if len(doc.Cases) == 0 || len(doc.Normalizer) == 0 {
		t.Fatalf("%s holds no cases", referenceFile)
	}
	return doc
}

func (c refCase) params(t *testing.T) Params {
	t.Helper()
	fam, err := ParseFamily(c.Family)
	if err != nil {
		t.Fatal(err)
	}
	st, err := ParseStructure(c.Structure)
	if err != nil {
		t.Fatal(err)
	}
	p := Params{Dim: c.Dim, Family: fam, Structure: st}
	for _, rc := range c.Components {
		p.Components = append(p.Components, Component{Weight: rc.Weight, Mean: rc.Mean, Cov: rc.Cov, DF: rc.DF})
	}
	return p
}

// closeTo is the comparison used against reference values: absolute 1e-10
// for |want| <= 1, relative 1e-10 beyond.
func closeTo(got, want, tol float64) bool {
	if math.IsInf(want, 0) || math.IsNaN(want) {
		return got == want
	}
	return math.Abs(got-want) <= tol*math.Max(1, math.Abs(want))
}

func compareSlices(t *testing.T, what string, got, want []float64, tol float64) {
	t.Helper()
	if len(got) != len(want) {
		t.Fatalf("%s: %d values, reference has %d", what, len(got), len(want))
	}
	for i := range want {
		if !closeTo(got[i], want[i], tol) {
			t.Errorf("%s[%d] = %.17g, reference %.17g (diff %.3g)", what, i, got[i], want[i], got[i]-want[i])
		}
	}
}

// TestReferenceValues compares every evaluation against scipy/mpmath values
// (see referenceFile) to 1e-10, absolute for values of magnitude <= 1 and
// relative above.
func TestReferenceValues(t *testing.T) {
	doc := loadReference(t)
	t.Logf("reference generated with %v", doc.Versions)
	for _, c := range doc.Cases {
		t.Run(c.Name, func(t *testing.T) {
			m, err := New(c.params(t))
			if err != nil {
				t.Fatalf("New: %v", err)
			}
			rows, k := len(c.X)/c.Dim, m.K()
			const tol = 1e-10

			ld := make([]float64, rows)
			if err := m.LogDensity(c.X, ld); err != nil {
				t.Fatal(err)
			}
			compareSlices(t, "log-density", ld, c.LogDensity, tol)

			cl := make([]float64, rows*k)
			if err := m.ComponentLogDensity(c.X, cl); err != nil {
				t.Fatal(err)
			}
			compareSlices(t, "component log-density", cl, c.CompLogDens, tol)

			md := make([]float64, rows*k)
			if err := m.Mahalanobis(c.X, md); err != nil {
				t.Fatal(err)
			}
			compareSlices(t, "mahalanobis", md, c.Mahalanobis, tol)

			pld, post, lpost := make([]float64, rows), make([]float64, rows*k), make([]float64, rows*k)
			if err := m.Posteriors(c.X, pld, post, lpost); err != nil {
				t.Fatal(err)
			}
			compareSlices(t, "posterior log-density", pld, c.LogDensity, tol)
			compareSlices(t, "log-posterior", lpost, c.LogPosterior, tol)
			compareSlices(t, "posterior", post, c.Posterior, tol)

			labels, maxPost := make([]int, rows), make([]float64, rows)
			if err := m.Assign(c.X, labels, maxPost); err != nil {
				t.Fatal(err)
			}
			for i := 0; i < rows; i++ {
				best := 0
				for a := 1; a < k; a++ {
					if c.LogPosterior[i*k+a] > c.LogPosterior[i*k+best] {
						best = a
					}
				}
				// Skip rows where the reference itself is a near tie.
				if math.Abs(c.Posterior[i*k+best]-c.Posterior[i*k+labels[i]]) > 1e-12 && labels[i] != best {
					t.Errorf("row %d: label %d, reference argmax %d", i, labels[i], best)
				}
				if !closeTo(maxPost[i], c.Posterior[i*k+best], tol) {
					t.Errorf("row %d: max posterior %.17g, reference %.17g", i, maxPost[i], c.Posterior[i*k+best])
				}
			}

			ll, err := m.LogLikelihood(c.X, nil)
			if err != nil {
				t.Fatal(err)
			}
			want := 0.0
			for _, v := range c.LogDensity {
				want += v
			}
			if !closeTo(ll, want, tol) {
				t.Errorf("log-likelihood %.17g, reference sum %.17g", ll, want)
			}
		})
	}
}

// TestStudentTNormalizer checks log Γ((ν+D)/2) − log Γ(ν/2) − (D/2) log(νπ)
// against 50-digit mpmath values for ν from 0.5 to 1e15, on both sides of
// LargeDFThreshold. The tolerance is 1e-13 relative to max(1, |value|).
func TestStudentTNormalizer(t *testing.T) {
	doc := loadReference(t)
	for _, r := range doc.Normalizer {
		got := studentTLogConst(r.DF, r.Dim)
		if !closeTo(got, r.Value, 1e-13) {
			t.Errorf("df %g dim %d: %.17g, mpmath %.17g (diff %.3g)", r.DF, r.Dim, got, r.Value, got-r.Value)
		}
		// LogNormalizer adds −½ log|Σ|.
		if g := LogNormalizer(StudentT, r.Dim, r.DF, 2); !closeTo(g, r.Value-1, 1e-13) {
			t.Errorf("LogNormalizer(df %g, dim %d, logDet 2) = %.17g, want %.17g", r.DF, r.Dim, g, r.Value-1)
		}
	}
}
