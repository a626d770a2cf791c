package mixture

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
)

// missingReferenceFile holds values computed by
// testdata/missing/make_reference.py: marginal component log-densities from
// scipy.stats.multivariate_normal / multivariate_t evaluated on the marginal
// parameters (μ_o, Σ_oo, same ν) formed with numpy indexing, mixtures with
// scipy.special.logsumexp, and scipy.optimize.linear_sum_assignment for the
// assignment cases (scipy 1.17.1, numpy 2.4.6; versions recorded in the file).
var missingReferenceFile = filepath.Join("..", "..", "testdata", "missing", "reference.json")

type missingCase struct {
	Name        string         `json:"name"`
	Family      string         `json:"family"`
	Structure   string         `json:"structure"`
	Dim         int            `json:"dim"`
	Components  []refComponent `json:"components"`
	X           []float64      `json:"x"`
	Observed    []int          `json:"observed"`
	CompLogDens []float64      `json:"component_log_density"`
	LogDensity  []float64      `json:"log_density"`
	Posterior   []float64      `json:"posterior"`
}

type assignmentCase struct {
	Rows        int       `json:"rows"`
	Cols        int       `json:"cols"`
	Cost        []float64 `json:"cost"`
	ColumnOfRow []int     `json:"column_of_row"`
	Total       float64   `json:"total"`
}

type missingDoc struct {
	Versions   map[string]string `json:"versions"`
	Cases      []missingCase     `json:"cases"`
	Assignment []assignmentCase  `json:"assignment"`
}

func loadMissingReference(t *testing.T) missingDoc {
	t.Helper()
	b, err := os.ReadFile(missingReferenceFile)
	if err != nil {
		t.Fatalf("read reference values: %v", err)
	}
	var doc missingDoc
	if err := json.Unmarshal(b, &doc); err != nil {
		t.Fatalf("decode %s: %v", missingReferenceFile, err)
	}
	if len(doc.Cases) == 0 || len(doc.Assignment) == 0 {
		t.Fatalf("%s holds no cases", missingReferenceFile)
	}
	return doc
}

func (c missingCase) model(t *testing.T) (*Model, []bool) {
	t.Helper()
	rc := refCase{Family: c.Family, Structure: c.Structure, Dim: c.Dim, Components: c.Components}
	obs := make([]bool, len(c.Observed))
	for i, v := range c.Observed {
		obs[i] = v == 1
	}
	return mustNew(t, rc.params(t)), obs
}

// TestMarginalMatchesScipy compares marginal log-densities, component
// log-densities and posteriors with scipy's multivariate_normal /
// multivariate_t evaluated on the marginal parameters (see
// missingReferenceFile), to 1e-10 (absolute up to magnitude 1, relative
// above).
func TestMarginalMatchesScipy(t *testing.T) {
	doc := loadMissingReference(t)
	t.Logf("reference generated with %v", doc.Versions)
	for _, c := range doc.Cases {
		t.Run(c.Name, func(t *testing.T) {
			m, obs := c.model(t)
			rows, k := len(c.X)/c.Dim, m.K()
			out := MarginalOutput{
				LogDensity:          make([]float64, rows),
				ComponentLogDensity: make([]float64, rows*k),
				Posteriors:          make([]float64, rows*k),
				Observed:            make([]int, rows),
			}
			if err := m.Marginal(c.X, obs, &out); err != nil {
				t.Fatal(err)
			}
			const tol = 1e-10
			compareSlices(t, "marginal log-density", out.LogDensity, c.LogDensity, tol)
			compareSlices(t, "marginal component log-density", out.ComponentLogDensity, c.CompLogDens, tol)
			compareSlices(t, "marginal posterior", out.Posteriors, c.Posterior, tol)
			for i := 0; i < rows; i++ {
				n := 0
				for _, o := range obs[i*c.Dim : (i+1)*c.Dim] {
					if o {
						n++
					}
				}
				if out.Observed[i] != n {
					t.Errorf("row %d: observed %d, mask has %d", i, out.Observed[i], n)
				}
			}
			// The convenience wrapper agrees.
			ld := make([]float64, rows)
			must(t, m.MarginalLogDensity(c.X, obs, ld))
			compareSlices(t, "MarginalLogDensity", ld, out.LogDensity, 0)
		})
	}
}

// TestMarginalFullMaskBitIdentical checks that a completely observed row
// gives exactly the unmasked results, alone, mixed with incomplete rows, and
// with a nil mask, for every family and structure.
func TestMarginalFullMaskBitIdentical(t *testing.T) {
	for _, f := range []Family{Gaussian, StudentT} {
		for _, s := range []Structure{Full, Diagonal, Spherical, Tied} {
			m := randomModel(t, f, s, 4, 3, 5)
			r := newTestRand(8)
			rows := 300
			x := make([]float64, rows*4)
			for i := range x {
				x[i] = 5 * r.NormFloat64()
			}
			obs := make([]bool, len(x))
			for i := range obs {
				obs[i] = i/4%3 == 0 || r.Float64() < 0.7 // every third row complete
			}
			k := m.K()
			wantLD, wantPost, wantLP := make([]float64, rows), make([]float64, rows*k), make([]float64, rows*k)
			wantComp, wantDist := make([]float64, rows*k), make([]float64, rows*k)
			wantLab, wantMax := make([]int, rows), make([]float64, rows)
			wantStat, wantFlag := make([]float64, rows), make([]bool, rows)
			must(t, m.Posteriors(x, wantLD, wantPost, wantLP))
			must(t, m.ComponentLogDensity(x, wantComp))
			must(t, m.Mahalanobis(x, wantDist))
			must(t, m.Assign(x, wantLab, wantMax))
			must(t, m.Outliers(x, 0.99, wantStat, wantFlag))
			for _, mask := range [][]bool{nil, obs} {
				out := MarginalOutput{
					LogDensity: make([]float64, rows), Posteriors: make([]float64, rows*k), LogPosteriors: make([]float64, rows*k),
					ComponentLogDensity: make([]float64, rows*k), Mahalanobis: make([]float64, rows*k),
					Labels: make([]int, rows), MaxPosterior: make([]float64, rows),
					OutlierStatistic: make([]float64, rows), Outlier: make([]bool, rows), OutlierLevel: 0.99,
				}
				must(t, m.Marginal(x, mask, &out))
				for i := 0; i < rows; i++ {
					complete := true
					if mask != nil {
						for _, o := range mask[i*4 : (i+1)*4] {
							complete = complete && o
						}
					}
					if !complete {
						continue
					}
					same := out.LogDensity[i] == wantLD[i] && out.Labels[i] == wantLab[i] && out.MaxPosterior[i] == wantMax[i] &&
						out.OutlierStatistic[i] == wantStat[i] && out.Outlier[i] == wantFlag[i]
					for a := i * k; a < (i+1)*k; a++ {
						same = same && out.Posteriors[a] == wantPost[a] && out.LogPosteriors[a] == wantLP[a] &&
							out.ComponentLogDensity[a] == wantComp[a] && out.Mahalanobis[a] == wantDist[a]
					}
					if !same {
						t.Fatalf("%v %v mask nil=%v: complete row %d differs from the unmasked evaluation", f, s, mask == nil, i)
					}
				}
			}
		}
	}
}

// TestMarginalProperties are table tests of properties that follow from the
// definition: a row with nothing observed has log-density 0 and posteriors
// equal to the weights; for a diagonal Gaussian the marginal log-density is
// the sum of the observed features' univariate log-densities (independence);
// the values at unobserved positions do not matter.
func TestMarginalProperties(t *testing.T) {
	for _, tc := range []struct {
		name string
		m    *Model
	}{
		{"gaussian full", randomModel(t, Gaussian, Full, 3, 3, 1)},
		{"gaussian diagonal", randomModel(t, Gaussian, Diagonal, 3, 2, 2)},
		{"t tied", randomModel(t, StudentT, Tied, 3, 4, 3)},
		{"t spherical", randomModel(t, StudentT, Spherical, 3, 2, 4)},
	} {
		t.Run(tc.name, func(t *testing.T) {
			m := tc.m
			k := m.K()
			x := []float64{1, 2, 3, 0, 0, 0, 0.5, -1, 7}
			obs := []bool{true, false, true, false, false, false, false, true, false}
			out := MarginalOutput{LogDensity: make([]float64, 3), Posteriors: make([]float64, 3*k), Labels: make([]int, 3),
				OutlierStatistic: make([]float64, 3), Outlier: make([]bool, 3), OutlierLevel: 0.5}
			must(t, m.Marginal(x, obs, &out))
			if out.LogDensity[1] != 0 {
				t.Errorf("nothing observed: log-density %v, want 0", out.LogDensity[1])
			}
			for c, comp := range m.params.Components {
				if math.Abs(out.Posteriors[k+c]-comp.Weight) > 1e-15 {
					t.Errorf("nothing observed: posterior %d = %v, weight %v", c, out.Posteriors[k+c], comp.Weight)
				}
			}
			if out.OutlierStatistic[1] != 0 || out.Outlier[1] {
				t.Errorf("nothing observed: outlier statistic %v flag %v", out.OutlierStatistic[1], out.Outlier[1])
			}
			// Changing unobserved values changes nothing.
			x2 := append([]float64(nil), x...)
			x2[1], x2[3], x2[8] = 1e6, -3, 42
			out2 := MarginalOutput{LogDensity: make([]float64, 3), Posteriors: make([]float64, 3*k)}
			must(t, m.Marginal(x2, obs, &out2))
			compareSlices(t, "log-density with other unobserved values", out2.LogDensity, out.LogDensity, 0)
			compareSlices(t, "posteriors with other unobserved values", out2.Posteriors, out.Posteriors, 0)
		})
	}
	// Diagonal Gaussian: independence (textbook; common practice).
	m := randomModel(t, Gaussian, Diagonal, 3, 1, 9)
	c := m.params.Components[0]
	x := []float64{0.3, 100, -2}
	ld := make([]float64, 1)
	must(t, m.MarginalLogDensity(x, []bool{true, false, true}, ld))
	want := 0.0
	for _, j := range []int{0, 2} {
		v := c.Cov[j*3+j]
		want += -0.5*math.Log(2*math.Pi*v) - 0.5*(x[j]-c.Mean[j])*(x[j]-c.Mean[j])/v
	}
	if !closeTo(ld[0], want, 1e-13) {
		t.Errorf("diagonal marginal %.17g, product of univariate normals %.17g", ld[0], want)
	}
}

// TestMarginalErrors checks the messages for bad shapes and values.
func TestMarginalErrors(t *testing.T) {
	m := randomModel(t, Gaussian, Full, 2, 2, 1)
	for _, tc := range []struct {
		name string
		x    []float64
		obs  []bool
		out  MarginalOutput
		want string
	}{
		{"mask length", []float64{1, 2}, []bool{true}, MarginalOutput{}, "observed has 1 flags, want 2"},
		{"ragged", []float64{1, 2, 3}, nil, MarginalOutput{}, "not a multiple of dim 2"},
		{"nan unobserved", []float64{1, math.NaN()}, []bool{true, false}, MarginalOutput{}, "row 0, column 1"},
		{"out length", []float64{1, 2}, nil, MarginalOutput{LogDensity: make([]float64, 2)}, "LogDensity has 2 values, want 1"},
		{"level", []float64{1, 2}, nil, MarginalOutput{Outlier: make([]bool, 1)}, "OutlierLevel 0"},
	} {
		err := m.Marginal(tc.x, tc.obs, &tc.out)
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: error %v, want it to mention %q", tc.name, err, tc.want)
		}
	}
}

// TestMarginalParallelBitIdentical checks that a large batch with many
// patterns gives the same bits for GOMAXPROCS 1 and 3, and that a row alone
// equals the row inside the batch.
func TestMarginalParallelBitIdentical(t *testing.T) {
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	m := randomModel(t, StudentT, Full, 6, 4, 3)
	rows := 6000
	if raceEnabled {
		rows = ParallelMinRows + 100
	}
	r := newTestRand(2)
	x := make([]float64, rows*6)
	obs := make([]bool, len(x))
	for i := range x {
		x[i] = 4 * r.NormFloat64()
		obs[i] = r.Float64() < 0.6
	}
	run := func(procs int) MarginalOutput {
		runtime.GOMAXPROCS(procs)
		out := MarginalOutput{LogDensity: make([]float64, rows), Posteriors: make([]float64, rows*4)}
		must(t, m.Marginal(x, obs, &out))
		return out
	}
	a, b := run(1), run(3)
	compareSlices(t, "log-density procs 1 vs 3", a.LogDensity, b.LogDensity, 0)
	compareSlices(t, "posteriors procs 1 vs 3", a.Posteriors, b.Posteriors, 0)
	for _, i := range []int{0, 17, rows - 1} {
		ld := make([]float64, 1)
		must(t, m.MarginalLogDensity(x[i*6:(i+1)*6], obs[i*6:(i+1)*6], ld))
		if ld[0] != a.LogDensity[i] {
			t.Errorf("row %d alone %v, in the batch %v", i, ld[0], a.LogDensity[i])
		}
	}
}

// TestGroupPatterns checks that rows are grouped by pattern in order of
// first appearance.
func TestGroupPatterns(t *testing.T) {
	obs := []bool{
		true, false, true,
		false, false, false,
		true, false, true,
		true, true, true,
	}
	pats := groupPatterns(obs, 4, 3)
	if len(pats) != 3 {
		t.Fatalf("%d patterns, want 3", len(pats))
	}
	if got := pats[0]; !equalInts(got.obs, []int{0, 2}) || !equalInts(got.unobs, []int{1}) || !equalInts(got.rows, []int{0, 2}) {
		t.Errorf("pattern 0: %+v", got)
	}
	if got := pats[1]; len(got.obs) != 0 || !equalInts(got.rows, []int{1}) {
		t.Errorf("pattern 1: %+v", got)
	}
	if got := pats[2]; !got.full(3) || !equalInts(got.rows, []int{3}) {
		t.Errorf("pattern 2: %+v", got)
	}
}

func equalInts(a, b []int) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}
