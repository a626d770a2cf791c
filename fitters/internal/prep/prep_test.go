package prep

import (
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat"

	"github.com/mixd-dev/mixd/fitters"
)

// pumps returns n rows of flow (m³/h), motor current (A) and vibration
// (mm/s) from a seeded generator, with weights 0, 0.5, 1, 1.5, ... cycling.
func pumps(n int, seed uint64) fitters.Data {
	rng := rand.New(rand.NewPCG(seed, 1))
	x := make([]float64, 0, 3*n)
	w := make([]float64, n)
	for i := 0; i < n; i++ {
		flow := 120 + 15*rng.NormFloat64()
		x = append(x, flow, 0.2*flow+2*rng.NormFloat64(), 1.5+0.4*rng.NormFloat64())
		w[i] = 0.5 * float64(i%4)
	}
	return fitters.Data{Rows: n, Cols: 3, Values: x, Weights: w}
}

func TestCheckValues(t *testing.T) {
	cases := []struct {
		name string
		data fitters.Data
		want string // "" for no error
	}{
		{"ok", fitters.Data{Rows: 2, Cols: 1, Values: []float64{1, -1e100}}, ""},
		{"no rows", fitters.Data{Cols: 2}, "data: no rows (rows is 0)"},
		{"no columns", fitters.Data{Rows: 2}, "data: no columns (cols is 0)"},
		{"short", fitters.Data{Rows: 2, Cols: 2, Values: []float64{1, 2, 3}}, "data: 3 values for 2 rows x 2 columns"},
		{"overflowing shape", fitters.Data{Rows: math.MaxInt, Cols: 2}, "values for"},
		{"NaN", fitters.Data{Rows: 2, Cols: 2, Values: []float64{1, 2, 3, math.NaN()}}, "data: row 1 column 1 is NaN (values must be finite)"},
		{"Inf", fitters.Data{Rows: 2, Cols: 2, Values: []float64{1, math.Inf(-1), 3, 4}}, "data: row 0 column 1 is -Inf"},
		{"huge", fitters.Data{Rows: 2, Cols: 2, Values: []float64{1, 2, 3e100, 4}}, "data: row 1 column 0 is 3e+100, beyond the supported magnitude 1e+100"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			err := CheckValues(c.data, 1e100)
			if c.want == "" {
				if err != nil {
					t.Fatal(err)
				}
				return
			}
			if err == nil || !strings.Contains(err.Error(), c.want) || fitters.CodeOf(err) != fitters.InvalidArgument {
				t.Fatalf("error %v, want InvalidArgument containing %q", err, c.want)
			}
		})
	}
}

func TestCheckWeights(t *testing.T) {
	huge := math.MaxFloat64
	cases := []struct {
		name      string
		w         []float64
		maxWeight float64
		want      Weights
		err       string
	}{
		{"unit", nil, 0, Weights{Sum: 3, Max: 1, Positive: 3}, ""},
		{"given", []float64{0, 2, 0.5}, 0, Weights{Sum: 2.5, Max: 2, Positive: 2}, ""},
		{"length", []float64{1, 2}, 0, Weights{}, "weights: 2 weights for 3 rows"},
		{"negative", []float64{1, -1, 1}, 0, Weights{}, "weights: row 1 has weight -1 (weights must be finite and non-negative)"},
		{"NaN first", []float64{1, math.NaN(), -1}, 0, Weights{}, "row 1 has weight NaN"},
		{"above max", []float64{1, 3, 1}, 2, Weights{}, "weights: row 1 has weight 3, beyond the supported maximum 2"},
		{"no max when zero", []float64{1, 3e300, 1}, 0, Weights{Sum: 2 + 3e300, Max: 3e300, Positive: 3}, ""},
		{"all zero", []float64{0, 0, 0}, 0, Weights{}, "weights: every weight is zero"},
		{"sum overflows", []float64{huge, huge, 0}, 0, Weights{}, "weights: their sum overflows"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			got, err := CheckWeights(c.w, 3, c.maxWeight)
			if c.err != "" {
				if err == nil || !strings.Contains(err.Error(), c.err) || fitters.CodeOf(err) != fitters.InvalidArgument {
					t.Fatalf("error %v, want InvalidArgument containing %q", err, c.err)
				}
				return
			}
			if err != nil || got != c.want {
				t.Fatalf("got %+v, %v; want %+v", got, err, c.want)
			}
		})
	}
}

// TestRelative: weights are divided by their maximum, and a weight that
// underflows to zero no longer counts as positive.
func TestRelative(t *testing.T) {
	rel, sum, pos := Relative([]float64{2, 0, 1, 5e-324}, 2)
	if !slices.Equal(rel, []float64{1, 0, 0.5, 0}) || sum != 1.5 || pos != 2 {
		t.Fatalf("rel %v sum %v positive %d", rel, sum, pos)
	}
}

// TestMomentsAgainstGonum compares the weighted mean and covariance with
// gonum's stat.Mean and stat.CovarianceMatrix (frequency weights, divisor
// Σw − 1), an implementation outside the project.
func TestMomentsAgainstGonum(t *testing.T) {
	data := pumps(500, 3)
	r := Rows{N: data.Rows, D: data.Cols, X: data.Values, W: data.Weights}
	var sw float64
	for _, w := range data.Weights {
		sw += w
	}
	mean, cov := r.Moments(sw, sw-1)

	x := mat.NewDense(data.Rows, data.Cols, data.Values)
	var want mat.SymDense
	stat.CovarianceMatrix(&want, x, data.Weights)
	for j := 0; j < r.D; j++ {
		m := stat.Mean(mat.Col(nil, j, x), data.Weights)
		if math.Abs(mean[j]-m) > 1e-12*math.Abs(m) {
			t.Errorf("mean[%d] = %v, gonum %v", j, mean[j], m)
		}
		for l := 0; l <= j; l++ {
			got, w := cov[Tri(j)+l], want.At(j, l)
			if math.Abs(got-w) > 1e-9*math.Sqrt(want.At(j, j)*want.At(l, l)) {
				t.Errorf("cov[%d,%d] = %v, gonum %v", j, l, got, w)
			}
		}
	}
	if d := Diagonal(cov, r.D); d[2] != cov[Tri(2)+2] || d[0] != cov[0] {
		t.Fatalf("diagonal %v of %v", d, cov)
	}
}

// TestWeightsAsRepeats: an integer weight acts as that many copies of the
// row, in the summary and in the count of distinct rows.
func TestWeightsAsRepeats(t *testing.T) {
	data := fitters.Data{Rows: 4, Cols: 2, Values: []float64{1, 2, 3, 5, 4, 4, 9, 9}, Weights: []float64{2, 1, 0, 3}}
	rep := fitters.Data{Rows: 6, Cols: 2, Values: []float64{1, 2, 1, 2, 3, 5, 9, 9, 9, 9, 9, 9}}
	a, err := Summarise(data, Limits{MaxAbsValue: 1e100})
	if err != nil {
		t.Fatal(err)
	}
	b, err := Summarise(rep, Limits{MaxAbsValue: 1e100})
	if err != nil {
		t.Fatal(err)
	}
	if a.WSum != 6 || a.RelSum != 2 || a.WScale != 3 || a.Positive != 3 || b.WSum != 6 || b.RelSum != 6 || b.Positive != 6 {
		t.Fatalf("sums: weighted %+v / repeated %+v", a, b)
	}
	for j := range a.Mean {
		if math.Abs(a.Mean[j]-b.Mean[j]) > 1e-14 || math.Abs(a.Var[j]-b.Var[j]) > 1e-13 || math.Abs(a.Scale[j]-b.Scale[j]) > 1e-13 {
			t.Fatalf("feature %d: weighted mean %v var %v scale %v, repeated %v %v %v", j, a.Mean[j], a.Var[j], a.Scale[j], b.Mean[j], b.Var[j], b.Scale[j])
		}
	}
	if got := a.DistinctAtLeast(10); got != 3 {
		t.Fatalf("distinct rows of positive weight: %d, want 3", got)
	}
	if err := a.RequireDistinct(4); err == nil || fitters.CodeOf(err) != fitters.FailedPrecondition ||
		err.Error() != "4 components requested but the data has only 3 distinct rows with positive weight" {
		t.Fatalf("RequireDistinct(4): %v", err)
	}
	if err := a.RequireDistinct(3); err != nil {
		t.Fatal(err)
	}
}

func TestDistinctAtLeast(t *testing.T) {
	r := Rows{N: 5, D: 2, X: []float64{0, 1, math.Copysign(0, -1), 1, 2, 2, 2, 2, 3, 3}}
	if got := r.DistinctAtLeast(10); got != 3 { // −0 equals 0
		t.Fatalf("distinct %d, want 3", got)
	}
	if got := r.DistinctAtLeast(2); got != 2 { // stops at the limit
		t.Fatalf("distinct with limit 2: %d", got)
	}
	r.W = []float64{1, 1, 1, 1, 0}
	if got := r.DistinctAtLeast(10); got != 2 { // zero-weight rows do not count
		t.Fatalf("distinct with a zero weight: %d, want 2", got)
	}
}

func TestScalesConstantColumn(t *testing.T) {
	// Column 1 varies by 1e-13 around 1e3: constant at double precision's
	// resolution for the data's scale.
	r := Rows{N: 3, D: 2, X: []float64{1, 1e3, 2, 1e3 + 1e-13, 3, 1e3}}
	_, cov := r.Moments(3, 3)
	_, err := r.Scales(Diagonal(cov, 2))
	if err == nil || fitters.CodeOf(err) != fitters.FailedPrecondition || !strings.Contains(err.Error(), "data: column 1 is constant") {
		t.Fatalf("error %v", err)
	}
	// A zero-weight row that alone makes a column vary does not count.
	r = Rows{N: 3, D: 1, X: []float64{5, 5, 7}, W: []float64{1, 1, 0}}
	_, cov = r.Moments(2, 2)
	if _, err := r.Scales(Diagonal(cov, 1)); err == nil || !strings.Contains(err.Error(), "column 0 is constant (standard deviation 0") {
		t.Fatalf("error %v", err)
	}
	r.W[2] = 1
	_, cov = r.Moments(3, 3)
	s, err := r.Scales(Diagonal(cov, 1))
	if err != nil || math.Abs(s[0]-1/math.Sqrt(8.0/9)) > 1e-15 {
		t.Fatalf("scale %v, %v", s, err)
	}
}

// TestSummariseErrorsInOrder: the value check comes before the weights,
// the weights before the statistics.
func TestSummariseErrorsInOrder(t *testing.T) {
	data := fitters.Data{Rows: 2, Cols: 1, Values: []float64{1, math.NaN()}, Weights: []float64{-1, 1}}
	if _, err := Summarise(data, Limits{MaxAbsValue: 10}); err == nil || !strings.Contains(err.Error(), "is NaN") {
		t.Fatalf("error %v", err)
	}
	data.Values[1] = 1
	if _, err := Summarise(data, Limits{MaxAbsValue: 10}); err == nil || !strings.Contains(err.Error(), "row 0 has weight -1") {
		t.Fatalf("error %v", err)
	}
	data.Weights[0] = 11
	if _, err := Summarise(data, Limits{MaxAbsValue: 10, MaxWeight: 10}); err == nil || !strings.Contains(err.Error(), "beyond the supported maximum 10") {
		t.Fatalf("error %v", err)
	}
	data.Weights[0] = 1
	if _, err := Summarise(data, Limits{MaxAbsValue: 10}); err == nil || !strings.Contains(err.Error(), "column 0 is constant") {
		t.Fatalf("error %v", err)
	}
}

func TestAddOuter(t *testing.T) {
	s := make([]float64, Tri(3))
	AddOuter(s, []float64{1, 2, 3}, 2)
	// 2·[1 2 3]ᵀ[1 2 3], packed lower triangle row by row (common practice).
	if want := []float64{2, 4, 8, 6, 12, 18}; !slices.Equal(s, want) {
		t.Fatalf("got %v, want %v", s, want)
	}
}
