package layout

import (
	"math"
	"math/rand/v2"
	"reflect"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/internal/prep"
	"github.com/mixd-dev/mixd/fitters/internal/seed"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

var allStructures = []mixture.Structure{mixture.Full, mixture.Diagonal, mixture.Spherical, mixture.Tied}

// stations returns n rows of flow (m³/h), motor current (A) and vibration
// (mm/s) from two pumping regimes, from a seeded generator, and the regime
// of every row.
func stations(n int) (fitters.Data, []int) {
	rng := rand.New(rand.NewPCG(21, 4))
	x := make([]float64, 0, 3*n)
	labels := make([]int, n)
	for i := 0; i < n; i++ {
		c := i % 2
		flow := 80 + 70*float64(c) + 6*rng.NormFloat64()
		x = append(x, flow, 0.2*flow+rng.NormFloat64(), 1+float64(c)+0.3*rng.NormFloat64())
		labels[i] = c
	}
	return fitters.Data{Rows: n, Cols: 3, Values: x}, labels
}

func frame(t *testing.T, data fitters.Data, s mixture.Structure, ridge float64) *Frame {
	t.Helper()
	sum, err := prep.Summarise(data, prep.Limits{MaxAbsValue: 1e100})
	if err != nil {
		t.Fatal(err)
	}
	f := &Frame{Summary: *sum, Who: "demo", Noun: "covariance"}
	r := make([]float64, data.Cols)
	for j := range r {
		r[j] = ridge
	}
	if err := f.Prepare(s, r, float64(data.Cols+1), 1e-12); err != nil {
		t.Fatal(err)
	}
	return f
}

// TestFactorAgainstGonum compares the Cholesky factor and log-determinant
// with gonum's mat.Cholesky, and checks that White is the factor's inverse.
func TestFactorAgainstGonum(t *testing.T) {
	data, _ := stations(200)
	f := frame(t, data, mixture.Full, 0)
	sigma := []float64{4, 1, 0.5, 1, 3, 0.25, 0.5, 0.25, 2}
	st := NewState(1, 3, mixture.Full, true)
	for j := 0; j < 3; j++ {
		for l := 0; l <= j; l++ {
			st.Cov[prep.Tri(j)+l] = sigma[j*3+l]
		}
	}
	if why := f.FactorCov(&st, 0); why != "" {
		t.Fatal(why)
	}
	var ch mat.Cholesky
	if !ch.Factorize(mat.NewSymDense(3, sigma)) {
		t.Fatal("gonum: not positive definite")
	}
	if math.Abs(st.LogDet[0]-ch.LogDet()) > 1e-13 {
		t.Fatalf("log-determinant %v, gonum %v", st.LogDet[0], ch.LogDet())
	}
	var l mat.TriDense
	ch.LTo(&l)
	for j := 0; j < 3; j++ {
		for m := 0; m <= j; m++ {
			if got := st.Chol[prep.Tri(j)+m]; math.Abs(got-l.At(j, m)) > 1e-14 {
				t.Fatalf("L[%d,%d] = %v, gonum %v", j, m, got, l.At(j, m))
			}
			var um float64 // (U L)[j][m]
			for q := m; q <= j; q++ {
				um += st.White[prep.Tri(j)+q] * st.Chol[prep.Tri(q)+m]
			}
			if want := map[bool]float64{true: 1, false: 0}[j == m]; math.Abs(um-want) > 1e-14 {
				t.Fatalf("(U L)[%d,%d] = %v", j, m, um)
			}
		}
		if math.Abs(st.InvD[j]*st.Chol[prep.Tri(j)+j]-1) > 1e-15 {
			t.Fatalf("InvD[%d] = %v", j, st.InvD[j])
		}
	}
}

func TestFactorRejects(t *testing.T) {
	data, _ := stations(200)
	full := frame(t, data, mixture.Full, 0)
	// Feature 1 is exactly twice feature 0: singular.
	cov := []float64{1, 2, 4, 0, 0, 1}
	if _, why := full.Factor(cov, make([]float64, 6), make([]float64, 3)); !strings.HasPrefix(why, "conditional variance") || !strings.Contains(why, "of feature 1 is not above the floor") {
		t.Fatalf("why %q", why)
	}
	diag := frame(t, data, mixture.Diagonal, 0)
	if _, why := diag.Factor([]float64{1, 0, 1}, nil, make([]float64, 3)); !strings.HasPrefix(why, "variance 0 of feature 1 is not above the floor") {
		t.Fatalf("why %q", why)
	}
	ld, why := diag.Factor([]float64{1, 4, 9}, nil, make([]float64, 3))
	if why != "" || math.Abs(ld-math.Log(36)) > 1e-15 {
		t.Fatalf("log-determinant %v, %q", ld, why)
	}
}

func TestFinish(t *testing.T) {
	data, _ := stations(50)
	ridge := 0.5
	for _, c := range []struct {
		s        mixture.Structure
		in, want []float64
	}{
		{mixture.Full, []float64{2, 4, 6, 8, 10, 12}, []float64{1.5, 2, 3.5, 4, 5, 6.5}},
		{mixture.Diagonal, []float64{2, 4, 6}, []float64{1.5, 2.5, 3.5}},
		{mixture.Spherical, []float64{2, 4, 6}, []float64{2.5, 2.5, 2.5}},
	} {
		f := frame(t, data, c.s, ridge)
		got := append([]float64(nil), c.in...)
		f.Finish(got, 2)
		if !reflect.DeepEqual(got, c.want) {
			t.Errorf("%s: %v, want %v", c.s, got, c.want)
		}
	}
}

// TestFromLabelsAgainstGonum: weights are the groups' shares, means and
// covariances their sample moments (maximum likelihood: gonum's
// stat.CovarianceMatrix, divisor n−1, times (n−1)/n) plus the ridge.
func TestFromLabelsAgainstGonum(t *testing.T) {
	data, labels := stations(400)
	for _, s := range []mixture.Structure{mixture.Full, mixture.Diagonal} {
		f := frame(t, data, s, 0.01)
		st := NewState(2, 3, s, false)
		if err := f.FromLabels(&st, labels); err != nil {
			t.Fatal(err)
		}
		for c := 0; c < 2; c++ {
			var rows []float64
			for i, l := range labels {
				if l == c {
					rows = append(rows, f.Row(i)...)
				}
			}
			n := len(rows) / 3
			x := mat.NewDense(n, 3, rows)
			var cov mat.SymDense
			stat.CovarianceMatrix(&cov, x, nil)
			if st.Weight[c] != 0.5 {
				t.Fatalf("%s: weight %v", s, st.Weight[c])
			}
			for j := 0; j < 3; j++ {
				if m := stat.Mean(mat.Col(nil, j, x), nil); math.Abs(st.Mean[c*3+j]-m) > 1e-12*math.Abs(m) {
					t.Fatalf("%s: mean %v, gonum %v", s, st.Mean[c*3+j], m)
				}
				want := cov.At(j, j)*float64(n-1)/float64(n) + 0.01
				got := st.CovOf(c)[j]
				if s == mixture.Full {
					got = st.CovOf(c)[prep.Tri(j)+j]
				}
				if math.Abs(got-want) > 1e-10*want {
					t.Fatalf("%s: variance %d of component %d: %v, gonum %v", s, j, c, got, want)
				}
			}
		}
	}
}

func TestFromLabelsFallbackAndErrors(t *testing.T) {
	data, labels := stations(100)
	f := frame(t, data, mixture.Full, 0)
	few := append([]int(nil), labels...)
	for i := range few {
		few[i] = 0
	}
	few[7], few[8] = 1, 1 // two rows: fewer than MinRows = D+1
	st := NewState(2, 3, mixture.Full, false)
	if err := f.FromLabels(&st, few); err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(st.CovOf(1), f.Fallback) || reflect.DeepEqual(st.CovOf(0), f.Fallback) {
		t.Fatal("the small component does not start from the fallback, or the large one does")
	}
	empty := make([]int, 100)
	st = NewState(2, 3, mixture.Full, false)
	err := f.FromLabels(&st, empty)
	if err == nil || fitters.CodeOf(err) != fitters.InvalidArgument || err.Error() != "labels: component 1 has no rows with positive weight" {
		t.Fatalf("error %v", err)
	}
}

// TestParamsRoundTrip: a State built from parameters gives them back.
func TestParamsRoundTrip(t *testing.T) {
	data, _ := stations(100)
	for _, s := range allStructures {
		f := frame(t, data, s, 0)
		p := mixture.Params{Dim: 3, Family: mixture.Gaussian, Structure: s, Components: []mixture.Component{
			{Weight: 0.25, Mean: []float64{80, 16, 1}, Cov: []float64{36, 7, 0, 7, 2.5, 0, 0, 0, 0.09}},
			{Weight: 0.75, Mean: []float64{150, 30, 2}, Cov: []float64{36, 7, 0, 7, 2.5, 0, 0, 0, 0.09}},
		}}
		if s == mixture.Diagonal || s == mixture.Spherical {
			for i := range p.Components {
				p.Components[i].Cov = []float64{2, 0, 0, 0, 2, 0, 0, 0, 2}
			}
		}
		st := NewState(2, 3, s, true)
		if err := f.FromParams(&st, &p); err != nil {
			t.Fatal(err)
		}
		if got := st.Params(mixture.Gaussian, nil); !reflect.DeepEqual(got, p) {
			t.Fatalf("%s: got %+v, want %+v", s, got, p)
		}
		pt := p.Clone()
		pt.Family = mixture.StudentT
		pt.Components[0].DF, pt.Components[1].DF = 3, 7
		if got := st.Params(mixture.StudentT, []float64{3, 7}); !reflect.DeepEqual(got, pt) {
			t.Fatalf("%s: got %+v, want %+v", s, got, pt)
		}
	}
	f := frame(t, data, mixture.Diagonal, 0)
	tiny := mixture.Params{Dim: 3, Family: mixture.Gaussian, Structure: mixture.Diagonal, Components: []mixture.Component{
		{Weight: 1, Mean: []float64{0, 0, 0}, Cov: []float64{1, 0, 0, 0, 1e-300, 0, 0, 0, 1}}}}
	st := NewState(1, 3, mixture.Diagonal, false)
	err := f.FromParams(&st, &tiny)
	if err == nil || fitters.CodeOf(err) != fitters.FailedPrecondition || !strings.HasPrefix(err.Error(), "start: component 0 covariance is not usable: variance 1e-300 of feature 1") {
		t.Fatalf("error %v", err)
	}
}

// TestStepMatchesFromLabels: statistics of a hard assignment, taken about
// zero means, give the same weights, means and matrices through Step as
// through FromLabels.
func TestStepMatchesFromLabels(t *testing.T) {
	data, labels := stations(300)
	for _, s := range []mixture.Structure{mixture.Full, mixture.Diagonal, mixture.Spherical} {
		f := frame(t, data, s, 0.01)
		want := NewState(2, 3, s, false)
		if err := f.FromLabels(&want, labels); err != nil {
			t.Fatal(err)
		}
		cl := Len(s, 3)
		stats := Stats{N: make([]float64, 2), X: make([]float64, 6), XX: make([]float64, 2*cl)}
		for i, c := range labels {
			x := f.Row(i)
			stats.N[c]++
			for j, v := range x {
				stats.X[c*3+j] += v
			}
			if s == mixture.Full {
				prep.AddOuter(stats.XX[c*cl:(c+1)*cl], x, 1)
			} else {
				for j, v := range x {
					stats.XX[c*cl+j] += v * v
				}
			}
		}
		stats.U = stats.N
		got := NewState(2, 3, s, false)
		if why := f.Step(&got, stats); why[0] != "" || why[1] != "" {
			t.Fatalf("%s: collapsed: %q", s, why)
		}
		for _, pair := range [][2][]float64{{got.Weight, want.Weight}, {got.Mean, want.Mean}, {got.Cov, want.Cov}, {got.LogDet, want.LogDet}} {
			for i := range pair[0] {
				if math.Abs(pair[0][i]-pair[1][i]) > 1e-9*(1+math.Abs(pair[1][i])) {
					t.Fatalf("%s: Step %v, FromLabels %v", s, pair[0], pair[1])
				}
			}
		}
	}
}

func TestCollapse(t *testing.T) {
	data, labels := stations(60)
	f := frame(t, data, mixture.Diagonal, 0)
	st := NewState(3, 3, mixture.Diagonal, false)
	three := append([]int(nil), labels...)
	for i := 0; i < len(three); i += 3 {
		three[i] = 2
	}
	if err := f.FromLabels(&st, three); err != nil {
		t.Fatal(err)
	}
	rowLD := make([]float64, f.N)
	for i := range rowLD {
		rowLD[i] = -float64(i % 7)
	}
	notes := Notes{Max: 1}
	why := []string{"", "too few rows", "too few rows"}
	reseeded, replaced := f.Collapse(&st, why, "", rowLD, 4, &notes)
	if !replaced || !reflect.DeepEqual(reseeded, []bool{false, true, true}) {
		t.Fatalf("reseeded %v replaced %v", reseeded, replaced)
	}
	// Rows 6 and 13 have the lowest log-density (−6); the first goes to
	// component 1, the next unused one to component 2.
	if !reflect.DeepEqual(st.Mean[3:6], f.Row(6)) || !reflect.DeepEqual(st.Mean[6:9], f.Row(13)) {
		t.Fatalf("means %v", st.Mean)
	}
	if !reflect.DeepEqual(st.CovOf(1), f.Fallback) {
		t.Fatal("the re-seeded component does not have the fallback matrix")
	}
	var sum float64
	for _, w := range st.Weight {
		sum += w
	}
	if math.Abs(sum-1) > 1e-15 {
		t.Fatalf("weights %v", st.Weight)
	}
	if want := []string{"component 1 collapsed at iteration 4 (too few rows) and was re-seeded at row 6", "1 further collapses were handled the same way"}; !reflect.DeepEqual(notes.Lines(), want) {
		t.Fatalf("notes %q", notes.Lines())
	}
	tied := frame(t, data, mixture.Tied, 0)
	tied.Noun = "scale matrix"
	tst := NewState(2, 3, mixture.Tied, false)
	if err := tied.FromLabels(&tst, labels); err != nil {
		t.Fatal(err)
	}
	notes = Notes{Max: 5}
	if _, replaced := tied.Collapse(&tst, []string{"", ""}, "singular", rowLD, 2, &notes); !replaced ||
		!reflect.DeepEqual(notes.Lines(), []string{"the shared scale matrix was not usable at iteration 2 (singular) and was replaced by the data covariance"}) {
		t.Fatalf("replaced %v notes %q", replaced, notes.Lines())
	}
}

func TestWorstRow(t *testing.T) {
	data, _ := stations(4)
	data.Weights = []float64{1, 0, 1, 1}
	f := frame(t, data, mixture.Full, 1)
	rowLD := []float64{-1, -9, -5, -5}
	if got := f.WorstRow(rowLD, nil); got != 2 { // row 1 has zero weight; ties go to the lower row
		t.Fatalf("worst row %d", got)
	}
	if got := f.WorstRow(rowLD, map[int]bool{2: true}); got != 3 {
		t.Fatalf("worst unused row %d", got)
	}
	if got := f.WorstRow(rowLD, map[int]bool{0: true, 2: true, 3: true}); got != 2 {
		t.Fatalf("with every row used: %d", got)
	}
}

func TestPrepareRejectsDependentFeatures(t *testing.T) {
	data := fitters.Data{Rows: 5, Cols: 2, Values: []float64{1, 2, 2, 4, 3, 6, 4, 8, 5, 10}}
	sum, err := prep.Summarise(data, prep.Limits{MaxAbsValue: 1e100})
	if err != nil {
		t.Fatal(err)
	}
	f := &Frame{Summary: *sum}
	err = f.Prepare(mixture.Full, []float64{0, 0}, 3, 1e-12)
	if err == nil || fitters.CodeOf(err) != fitters.FailedPrecondition || !strings.Contains(err.Error(), "(nearly) linearly dependent") {
		t.Fatalf("error %v", err)
	}
	if err := f.Prepare(mixture.Full, []float64{0.1, 0.1}, 3, 1e-12); err != nil {
		t.Fatalf("with a ridge: %v", err)
	}
}

// TestBegin: the caller's labels or parameters win; otherwise the start is
// the nearest-seed partition of the k-means++ seeds, drawn from rng.
func TestBegin(t *testing.T) {
	data, labels := stations(120)
	f := frame(t, data, mixture.Full, 0.01)
	short := func(seeded, k int) error { return fitters.Errorf(fitters.FailedPrecondition, "%d of %d", seeded, k) }

	got := NewState(2, 3, mixture.Full, false)
	if err := f.Begin(&got, nil, nil, rand.New(rand.NewPCG(3, 3)), short); err != nil {
		t.Fatal(err)
	}
	seeds, _ := seed.KMeansPP(&f.Rows, f.Scale, 2, rand.New(rand.NewPCG(3, 3)))
	want := NewState(2, 3, mixture.Full, false)
	if err := f.FromLabels(&want, seed.Nearest(&f.Rows, f.Scale, seeds)); err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(got, want) {
		t.Fatal("seeded start differs from the nearest-seed partition")
	}

	fromLabels := NewState(2, 3, mixture.Full, false)
	if err := f.Begin(&fromLabels, nil, labels, nil, short); err != nil {
		t.Fatal(err)
	}
	p := fromLabels.Params(mixture.Gaussian, nil)
	fromParams := NewState(2, 3, mixture.Full, false)
	if err := f.Begin(&fromParams, &p, labels, nil, short); err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(fromParams.Params(mixture.Gaussian, nil), p) {
		t.Fatal("the caller's parameters were not used as given")
	}

	dup := fitters.Data{Rows: 4, Cols: 1, Values: []float64{1, 1, 2, 2}}
	g := frame(t, dup, mixture.Diagonal, 0)
	st := NewState(3, 1, mixture.Diagonal, false)
	if err := g.Begin(&st, nil, nil, rand.New(rand.NewPCG(1, 1)), short); err == nil || err.Error() != "2 of 3" {
		t.Fatalf("error %v", err)
	}
}
