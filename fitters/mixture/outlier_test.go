package mixture_test

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/mixd-dev/mixd/fitters/mixture"
)

// outlierReference is the part of testdata/tmix/reference.json (written by
// testdata/tmix/make_reference.py) that the outlier rule is checked against.
type outlierReference struct {
	Versions map[string]string `json:"versions"`
	FCDF     []struct {
		P     int     `json:"p"`
		DF    float64 `json:"df"`
		S     float64 `json:"s"`
		Scipy float64 `json:"scipy"`
		Exact float64 `json:"exact"`
	} `json:"f_cdf"`
	Chi2CDF []struct {
		P     int     `json:"p"`
		S     float64 `json:"s"`
		Scipy float64 `json:"scipy"`
	} `json:"chi2_cdf"`
	Outliers []struct {
		Family  string      `json:"family"`
		Level   float64     `json:"level"`
		Dim     int         `json:"dim"`
		Weights []float64   `json:"weights"`
		Means   [][]float64 `json:"means"`
		Covs    [][]float64 `json:"covs"`
		DFs     []float64   `json:"dfs"`
		Rows    [][]float64 `json:"rows"`
		Labels  []int       `json:"labels"`
		Stat    []float64   `json:"stat"`
		CDF     []float64   `json:"cdf"`
		Flags   []bool      `json:"flags"`
	} `json:"outliers"`
}

func loadOutlierReference(t *testing.T) *outlierReference {
	t.Helper()
	b, err := os.ReadFile(filepath.Join("..", "..", "testdata", "tmix", "reference.json"))
	if err != nil {
		t.Fatalf("reading reference values: %v", err)
	}
	var ref outlierReference
	if err := json.Unmarshal(b, &ref); err != nil {
		t.Fatalf("decoding reference values: %v", err)
	}
	if len(ref.FCDF) == 0 || len(ref.Chi2CDF) == 0 || len(ref.Outliers) == 0 {
		t.Fatal("reference file holds no outlier cases")
	}
	return &ref
}

// TestOutlierProbabilityReference checks the distribution functions of the
// outlier rule.
func TestOutlierProbabilityReference(t *testing.T) {
	ref := loadOutlierReference(t)
	t.Logf("reference versions: %v", ref.Versions)
	worst := 0.0
	for _, c := range ref.FCDF {
		got := mixture.OutlierProbability(mixture.StudentT, c.P, c.DF, c.S)
		worst = math.Max(worst, math.Abs(got-c.Exact))
		// Source: 40-digit regularised incomplete beta values from mpmath
		// (testdata/tmix/make_reference.py); both evaluation branches
		// (incomplete beta below the large-ν threshold, second-order
		// expansion above it) are documented to about 1e-9.
		if d := math.Abs(got - c.Exact); !(d <= 2e-9) {
			t.Errorf("F(%d, %g) cdf at %.17g: got %.17g, mpmath %.17g (diff %.2g)", c.P, c.DF, c.S, got, c.Exact, d)
		}
		// Source: scipy.stats.f.cdf (same script). scipy's own value drifts
		// from the exact one for very large ν, so compare where it is exact.
		if math.Abs(c.Scipy-c.Exact) <= 1e-13 {
			if d := math.Abs(got - c.Scipy); !(d <= 2e-9) {
				t.Errorf("F(%d, %g) cdf at %.17g: got %.17g, scipy %.17g (diff %.2g)", c.P, c.DF, c.S, got, c.Scipy, d)
			}
		}
	}
	t.Logf("largest difference from the 40-digit F values: %.2g", worst)
	for _, c := range ref.Chi2CDF {
		got := mixture.OutlierProbability(mixture.Gaussian, c.P, 0, c.S)
		// Source: scipy.stats.chi2.cdf(p·s, p) (testdata/tmix/make_reference.py).
		if d := math.Abs(got - c.Scipy); !(d <= 1e-12) {
			t.Errorf("chi2(%d) cdf at %.17g: got %.17g, scipy %.17g (diff %.2g)", c.P, c.S, got, c.Scipy, d)
		}
	}
}

func TestOutlierProbabilityEdges(t *testing.T) {
	inf := math.Inf(1)
	cases := []struct {
		name string
		f    mixture.Family
		dim  int
		df   float64
		s    float64
		want float64 // NaN means NaN
	}{
		{"zero statistic", mixture.StudentT, 2, 5, 0, 0},
		{"negative statistic", mixture.Gaussian, 2, 0, -1, 0},
		{"infinite statistic", mixture.StudentT, 3, 5, inf, 1},
		{"statistic overflowing p·s", mixture.StudentT, 4, 5, math.MaxFloat64, 1},
		{"huge statistic, large df", mixture.StudentT, 4, 1e9, 1e300, 1},
		{"NaN statistic", mixture.StudentT, 2, 5, math.NaN(), math.NaN()},
		{"zero dim", mixture.Gaussian, 0, 0, 1, math.NaN()},
		{"zero df", mixture.StudentT, 2, 0, 1, math.NaN()},
		{"NaN df", mixture.StudentT, 2, math.NaN(), 1, math.NaN()},
		// F(1, 1) at 1 is 1/2 (closed form: the ratio of two independent
		// χ²₁ variables is symmetric about 1 on the log scale).
		{"F(1,1) median", mixture.StudentT, 1, 1, 1, 0.5},
		// χ²₂ has distribution function 1 − exp(−y/2) (closed form); y = 2·1.
		{"chi2(2) closed form", mixture.Gaussian, 2, 0, 1, 1 - math.Exp(-1)},
		// Infinite df is the χ²_p limit exactly (closed form as above).
		{"infinite df", mixture.StudentT, 2, inf, 1, 1 - math.Exp(-1)},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			got := mixture.OutlierProbability(c.f, c.dim, c.df, c.s)
			if math.IsNaN(c.want) {
				if !math.IsNaN(got) {
					t.Fatalf("got %v, want NaN", got)
				}
				return
			}
			if math.Abs(got-c.want) > 1e-14 {
				t.Fatalf("got %.17g, want %.17g", got, c.want)
			}
		})
	}
	// Monotone in the statistic across the branch threshold region.
	for _, df := range []float64{50, 9.9e4, 1.1e5, 1e7} {
		prev := -1.0
		for s := 0.0; s < 30; s += 0.05 {
			v := mixture.OutlierProbability(mixture.StudentT, 3, df, s)
			if v < prev-1e-15 || v < 0 || v > 1 {
				t.Fatalf("df %g: cdf %v at s=%v after %v: not a distribution function", df, v, s, prev)
			}
			prev = v
		}
	}
}

// referenceModel builds a model from one reference case.
func referenceModel(t *testing.T, family string, dim int, w []float64, means, covs [][]float64, dfs []float64) *mixture.Model {
	t.Helper()
	f, err := mixture.ParseFamily(family)
	if err != nil {
		t.Fatal(err)
	}
	p := mixture.Params{Dim: dim, Family: f, Structure: mixture.Full}
	for k := range w {
		p.Components = append(p.Components, mixture.Component{Weight: w[k], Mean: means[k], Cov: covs[k], DF: dfs[k]})
	}
	m, err := mixture.New(p)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

func TestOutliersReference(t *testing.T) {
	ref := loadOutlierReference(t)
	for _, c := range ref.Outliers {
		t.Run(c.Family, func(t *testing.T) {
			m := referenceModel(t, c.Family, c.Dim, c.Weights, c.Means, c.Covs, c.DFs)
			var x []float64
			for _, r := range c.Rows {
				x = append(x, r...)
			}
			n := len(c.Rows)
			stat := make([]float64, n)
			flags := make([]bool, n)
			if err := m.Outliers(x, c.Level, stat, flags); err != nil {
				t.Fatal(err)
			}
			labels := make([]int, n)
			if err := m.Assign(x, labels, nil); err != nil {
				t.Fatal(err)
			}
			nflag := 0
			for i := 0; i < n; i++ {
				// Source: scipy.stats.multivariate_t / multivariate_normal
				// log-densities for the most probable component, numpy
				// Mahalanobis distances, scipy.stats.f.cdf / chi2.cdf
				// (testdata/tmix/make_reference.py).
				if labels[i] != c.Labels[i] {
					t.Errorf("row %d: most probable component %d, scipy %d", i, labels[i], c.Labels[i])
				}
				if d := math.Abs(stat[i]-c.Stat[i]) / math.Max(1, math.Abs(c.Stat[i])); !(d <= 1e-10) {
					t.Errorf("row %d: stat %.17g, reference %.17g", i, stat[i], c.Stat[i])
				}
				if flags[i] != c.Flags[i] {
					t.Errorf("row %d: flag %v, reference %v (reference cdf %.17g, level %v)", i, flags[i], c.Flags[i], c.CDF[i], c.Level)
				}
				if flags[i] {
					nflag++
				}
			}
			if nflag == 0 || nflag == n {
				t.Fatalf("reference case flags %d of %d rows: it must exercise both outcomes", nflag, n)
			}
			// Either output may be omitted; the other is unchanged.
			stat2 := make([]float64, n)
			if err := m.Outliers(x, c.Level, stat2, nil); err != nil {
				t.Fatal(err)
			}
			flags2 := make([]bool, n)
			if err := m.Outliers(x, c.Level, nil, flags2); err != nil {
				t.Fatal(err)
			}
			for i := range stat {
				if stat2[i] != stat[i] || flags2[i] != flags[i] {
					t.Fatalf("row %d: results differ when one output is nil", i)
				}
			}
		})
	}
}

func twoComponentT(t *testing.T) *mixture.Model {
	t.Helper()
	m, err := mixture.New(mixture.Params{
		Dim: 2, Family: mixture.StudentT, Structure: mixture.Full,
		Components: []mixture.Component{
			{Weight: 0.4, Mean: []float64{0, 0}, Cov: []float64{1, 0.3, 0.3, 2}, DF: 4},
			{Weight: 0.6, Mean: []float64{6, -1}, Cov: []float64{0.5, 0, 0, 0.5}, DF: 2e6},
		},
	})
	if err != nil {
		t.Fatal(err)
	}
	return m
}

func TestOutliersErrors(t *testing.T) {
	m := twoComponentT(t)
	x := []float64{0, 0, 6, -1, 30, 30}
	cases := []struct {
		name  string
		x     []float64
		level float64
		stat  []float64
		flags []bool
		want  string
	}{
		{"level zero", x, 0, nil, make([]bool, 3), "level 0 must lie strictly between 0 and 1"},
		{"level one", x, 1, nil, make([]bool, 3), "level 1 must lie strictly between 0 and 1"},
		{"level NaN", x, math.NaN(), nil, make([]bool, 3), "level NaN"},
		{"level negative", x, -0.5, nil, make([]bool, 3), "level -0.5"},
		{"ragged rows", x[:5], 0.9, nil, make([]bool, 2), "not a multiple of dim 2"},
		{"NaN value", []float64{0, 0, 1, math.NaN()}, 0.9, nil, make([]bool, 2), "row 1, column 1"},
		{"Inf value", []float64{math.Inf(-1), 0}, 0.9, nil, make([]bool, 1), "row 0, column 0"},
		{"short stat", x, 0.9, make([]float64, 2), nil, "stat has 2 values, want 3"},
		{"long flags", x, 0.9, nil, make([]bool, 4), "flags has 4 values, want 3"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			err := m.Outliers(c.x, c.level, c.stat, c.flags)
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("error %v, want one containing %q", err, c.want)
			}
			for _, f := range c.flags {
				if f {
					t.Fatal("flags written despite the error")
				}
			}
		})
	}
	if err := m.Outliers(nil, 0.9, nil, nil); err != nil {
		t.Fatalf("no rows: %v", err)
	}
}

// TestOutliersBlocks checks that batches spanning several internal blocks
// (and the parallel evaluation path) give exactly the row-by-row results,
// and that rows far beyond float64 distances are flagged with stat +Inf.
func TestOutliersBlocks(t *testing.T) {
	m := twoComponentT(t)
	const n = 20000
	x := make([]float64, 2*n)
	s := m.Sampler(11)
	labels := make([]int, 1000)
	for lo := 0; lo < n; lo += 1000 {
		s.Next(x[2*lo:2*(lo+1000)], labels)
	}
	x[2*123], x[2*123+1] = 1e200, -1e200 // squared distance overflows
	stat := make([]float64, n)
	flags := make([]bool, n)
	if err := m.Outliers(x, mixture.DefaultOutlierLevel, stat, flags); err != nil {
		t.Fatal(err)
	}
	if !math.IsInf(stat[123], 1) || !flags[123] {
		t.Fatalf("row 123 (far away): stat %v flag %v, want +Inf and flagged", stat[123], flags[123])
	}
	one := make([]float64, 1)
	oneF := make([]bool, 1)
	nflag := 0
	for i := 0; i < n; i++ {
		if err := m.Outliers(x[2*i:2*i+2], mixture.DefaultOutlierLevel, one, oneF); err != nil {
			t.Fatal(err)
		}
		if one[0] != stat[i] || oneF[0] != flags[i] {
			t.Fatalf("row %d: batch gives (%v, %v), alone (%v, %v)", i, stat[i], flags[i], one[0], oneF[0])
		}
		if flags[i] {
			nflag++
		}
	}
	// Rows drawn from the model itself are flagged at about the rate
	// 1 − level = 0.001 (the rule's definition); allow a wide binomial band
	// (mean 20, sd about 4.5) because the most probable component is not
	// always the generating one.
	if nflag < 5 || nflag > 45 {
		t.Fatalf("%d of %d rows drawn from the model flagged at level %v, want about %d", nflag, n, mixture.DefaultOutlierLevel, n/1000)
	}
}

// ExampleModel_Outliers flags a pumping-station record (flow in m³/h,
// motor current in A) that lies far from every component of a Student-t
// model.
func ExampleModel_Outliers() {
	m, err := mixture.New(mixture.Params{
		Dim: 2, Family: mixture.StudentT, Structure: mixture.Full,
		Components: []mixture.Component{
			{Weight: 0.5, Mean: []float64{120, 14}, Cov: []float64{400, 30, 30, 4}, DF: 5},
			{Weight: 0.5, Mean: []float64{310, 31.5}, Cov: []float64{900, -45, -45, 6.25}, DF: 8},
		},
	})
	if err != nil {
		fmt.Println(err)
		return
	}
	rows := []float64{
		125, 14.5, // an ordinary record at low flow
		300, 31, // an ordinary record at high flow
		120, 40, // motor current far too high for the flow
	}
	stat := make([]float64, 3)
	flags := make([]bool, 3)
	if err := m.Outliers(rows, mixture.DefaultOutlierLevel, stat, flags); err != nil {
		fmt.Println(err)
		return
	}
	for i := range flags {
		fmt.Printf("row %d: statistic %.2f flagged %v\n", i, stat[i], flags[i])
	}
	// Output:
	// row 0: statistic 0.04 flagged false
	// row 1: statistic 0.18 flagged false
	// row 2: statistic 20.18 flagged true
}
