package mixture

import (
	"fmt"
	"math"
	"runtime"
	"strings"
	"testing"

	"gonum.org/v1/gonum/floats"
)

func mustNew(t testing.TB, p Params) *Model {
	t.Helper()
	m, err := New(p)
	if err != nil {
		t.Fatalf("New: %v", err)
	}
	return m
}

func single(f Family, dim int, mean, cov []float64, df float64) Params {
	return Params{Dim: dim, Family: f, Structure: Full,
		Components: []Component{{Weight: 1, Mean: mean, Cov: cov, DF: df}}}
}

// TestClosedForm checks densities with textbook closed forms.
func TestClosedForm(t *testing.T) {
	cases := []struct {
		name string
		p    Params
		x    []float64
		want float64
		src  string
	}{
		{"standard bivariate normal at origin", single(Gaussian, 2, []float64{0, 0}, []float64{1, 0, 0, 1}, 0),
			[]float64{0, 0}, -math.Log(2 * math.Pi), "N(0,I₂) density at 0 is 1/(2π) (closed form)"},
		{"standard normal at 1", single(Gaussian, 1, []float64{0}, []float64{1}, 0),
			[]float64{1}, -0.5*math.Log(2*math.Pi) - 0.5, "φ(1) = exp(−½)/√(2π) (closed form)"},
		{"normal with variance 4 at mean", single(Gaussian, 1, []float64{3}, []float64{4}, 0),
			[]float64{3}, -0.5 * math.Log(2*math.Pi*4), "1/√(2πσ²) (closed form)"},
		{"Cauchy at 0", single(StudentT, 1, []float64{0}, []float64{1}, 1),
			[]float64{0}, -math.Log(math.Pi), "t₁ is Cauchy, density 1/π at 0 (closed form)"},
		{"Cauchy at 1", single(StudentT, 1, []float64{0}, []float64{1}, 1),
			[]float64{1}, -math.Log(2 * math.Pi), "Cauchy density 1/(π(1+x²)) (closed form)"},
		{"bivariate t1 at origin", single(StudentT, 2, []float64{0, 0}, []float64{1, 0, 0, 1}, 1),
			[]float64{0, 0}, -math.Log(2 * math.Pi), "Γ(3/2)/(Γ(1/2)·π) = 1/(2π) (closed form)"},
		{"t2 at 0", single(StudentT, 1, []float64{0}, []float64{1}, 2),
			[]float64{0}, -1.5 * math.Log(2), "t₂ density (2+x²)^(−3/2) at 0 = 2^(−3/2) (closed form)"},
		{"t with df 1e15 at 0 is the normal", single(StudentT, 1, []float64{0}, []float64{1}, 1e15),
			[]float64{0}, -0.5 * math.Log(2*math.Pi), "limit ν→∞ (difference O(1/ν))"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			m := mustNew(t, tc.p)
			out := make([]float64, 1)
			if err := m.LogDensity(tc.x, out); err != nil {
				t.Fatal(err)
			}
			if math.Abs(out[0]-tc.want) > 1e-14 {
				t.Errorf("log-density %.17g, want %.17g [%s]", out[0], tc.want, tc.src)
			}
		})
	}
}

// TestLargeDFContinuity checks that the Student-t log-density is smooth
// across LargeDFThreshold and converges to the Gaussian like O(1/ν).
func TestLargeDFContinuity(t *testing.T) {
	x := []float64{0.7, -1.2, 0.4}
	cov := []float64{2, 0.3, 0.1, 0.3, 1, -0.2, 0.1, -0.2, 0.5}
	mean := []float64{0.1, 0.2, -0.3}
	eval := func(f Family, df float64) float64 {
		m := mustNew(t, single(f, 3, mean, cov, df))
		out := make([]float64, 1)
		if err := m.LogDensity(x, out); err != nil {
			t.Fatal(err)
		}
		return out[0]
	}
	below, at := eval(StudentT, math.Nextafter(LargeDFThreshold, 0)), eval(StudentT, LargeDFThreshold)
	if math.Abs(below-at) > 1e-13 {
		t.Errorf("jump at the threshold: %.17g below, %.17g at", below, at)
	}
	g := eval(Gaussian, 0)
	prev := math.Inf(1)
	for _, df := range []float64{1e2, 1e4, 1e6, 1e8, 1e10, 1e12, 1e14, 1e200} {
		diff := math.Abs(eval(StudentT, df) - g)
		// The difference is O(1/ν); allow 20/ν plus rounding.
		if diff > 20/df+1e-14 {
			t.Errorf("df %g: |t − gaussian| = %.3g, want O(1/ν)", df, diff)
		}
		if diff > prev+1e-15 {
			t.Errorf("df %g: difference to the gaussian grew: %.3g after %.3g", df, diff, prev)
		}
		prev = diff
	}
}

func TestBatchErrors(t *testing.T) {
	m := mustNew(t, validParams(Gaussian, Full)) // dim 2, K 2
	x := []float64{1, 2, 3, 4, 5, 6}             // 3 rows
	bad := []float64{1, 2, 3}
	nan := []float64{1, 2, 3, math.NaN()}
	inf := []float64{math.Inf(1), 2}
	cases := []struct {
		name string
		err  error
		want string
	}{
		{"ld ragged", m.LogDensity(bad, make([]float64, 1)), "log-density: x has 3 values, not a multiple of dim 2"},
		{"ld out", m.LogDensity(x, make([]float64, 2)), "log-density: out has 2 values, want 3 (one per row)"},
		{"ld NaN", m.LogDensity(nan, make([]float64, 2)), "log-density: x row 1, column 1: value NaN is not finite"},
		{"ld Inf", m.LogDensity(inf, make([]float64, 1)), "log-density: x row 0, column 0: value +Inf is not finite"},
		{"comp out", m.ComponentLogDensity(x, make([]float64, 3)), "component log-density: out has 3 values, want 6 (rows × components)"},
		{"comp ragged", m.ComponentLogDensity(bad, nil), "not a multiple of dim 2"},
		{"maha out", m.Mahalanobis(x, make([]float64, 7)), "mahalanobis: out has 7 values, want 6"},
		{"maha NaN", m.Mahalanobis(nan, make([]float64, 4)), "mahalanobis: x row 1, column 1"},
		{"post logDens", m.Posteriors(x, make([]float64, 1), nil, nil), "posteriors: logDens has 1 values, want 3"},
		{"post post", m.Posteriors(x, nil, make([]float64, 3), nil), "posteriors: post has 3 values, want 6"},
		{"post logPost", m.Posteriors(x, nil, nil, make([]float64, 5)), "posteriors: logPost has 5 values, want 6"},
		{"post NaN", m.Posteriors(nan, nil, nil, nil), "posteriors: x row 1, column 1"},
		{"assign labels", m.Assign(x, make([]int, 2), nil), "assign: labels has 2 values, want 3"},
		{"assign maxPost", m.Assign(x, make([]int, 3), make([]float64, 4)), "assign: maxPost has 4 values, want 3"},
	}
	for _, tc := range cases {
		if tc.err == nil || !strings.Contains(tc.err.Error(), tc.want) {
			t.Errorf("%s: error %v, want %q", tc.name, tc.err, tc.want)
		}
	}
	for _, tc := range []struct {
		w    []float64
		want string
	}{
		{[]float64{1, 1}, "log-likelihood: weights has 2 values, want 3"},
		{[]float64{1, -1, 1}, "log-likelihood: weights[1] = -1 must be finite and non-negative"},
		{[]float64{1, 1, math.NaN()}, "weights[2] = NaN"},
		{[]float64{math.Inf(1), 1, 1}, "weights[0] = +Inf"},
	} {
		if _, err := m.LogLikelihood(x, tc.w); err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("LogLikelihood(weights %v): error %v, want %q", tc.w, err, tc.want)
		}
	}
	if _, err := m.LogLikelihood(nan, nil); err == nil {
		t.Errorf("LogLikelihood accepted NaN rows")
	}
	// Outputs untouched by a failed call.
	out := []float64{7, 7, 7}
	if err := m.LogDensity([]float64{1, 2, 3, 4, math.NaN(), 6}, out); err == nil || out[0] != 7 || out[1] != 7 {
		t.Errorf("failed call wrote output: %v %v", err, out)
	}
	// Empty input is fine.
	if err := m.LogDensity(nil, nil); err != nil {
		t.Errorf("empty batch: %v", err)
	}
	if ll, err := m.LogLikelihood(nil, nil); err != nil || ll != 0 {
		t.Errorf("empty log-likelihood %v %v", ll, err)
	}
}

// randomModel builds a valid model of the given shape from a fixed seed.
func randomModel(t testing.TB, f Family, s Structure, dim, k int, seed uint64) *Model {
	t.Helper()
	r := newTestRand(seed)
	p := Params{Dim: dim, Family: f, Structure: s}
	tied := r.spd(dim)
	for c := 0; c < k; c++ {
		var cov []float64
		switch s {
		case Full:
			cov = r.spd(dim)
		case Diagonal:
			cov = make([]float64, dim*dim)
			for i := 0; i < dim; i++ {
				cov[i*dim+i] = 0.2 + 2*r.Float64()
			}
		case Spherical:
			cov = make([]float64, dim*dim)
			v := 0.2 + 2*r.Float64()
			for i := 0; i < dim; i++ {
				cov[i*dim+i] = v
			}
		case Tied:
			cov = append([]float64(nil), tied...)
		}
		mean := make([]float64, dim)
		for i := range mean {
			mean[i] = 4 * r.NormFloat64()
		}
		df := 0.0
		if f == StudentT {
			df = []float64{0.7, 3, 12, 1e9}[c%4]
		}
		p.Components = append(p.Components, Component{Weight: 1 / float64(k), Mean: mean, Cov: cov, DF: df})
	}
	sum := 0.0
	for _, c := range p.Components[:k-1] {
		sum += c.Weight
	}
	p.Components[k-1].Weight = 1 - sum
	return mustNew(t, p)
}

// TestParallelBitIdentical checks that results are bit-identical for
// GOMAXPROCS 1, 2, 3 and 5, on a batch large enough to be split, and that a
// row evaluated alone equals the same row inside the batch.
func TestParallelBitIdentical(t *testing.T) {
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	for _, f := range []Family{Gaussian, StudentT} {
		m := randomModel(t, f, Full, 5, 4, 11)
		rows := 3*ChunkRows + ParallelMinRows + 77
		x, _ := m.Sample(rows, 5)
		type result struct {
			ld, post, lpost, comp, maha []float64
			labels                      []int
			ll                          float64
		}
		eval := func(procs int) result {
			runtime.GOMAXPROCS(procs)
			k := m.K()
			r := result{ld: make([]float64, rows), post: make([]float64, rows*k), lpost: make([]float64, rows*k),
				comp: make([]float64, rows*k), maha: make([]float64, rows*k), labels: make([]int, rows)}
			must(t, m.LogDensity(x, r.ld))
			must(t, m.Posteriors(x, nil, r.post, r.lpost))
			must(t, m.ComponentLogDensity(x, r.comp))
			must(t, m.Mahalanobis(x, r.maha))
			must(t, m.Assign(x, r.labels, nil))
			ll, err := m.LogLikelihood(x, nil)
			must(t, err)
			r.ll = ll
			return r
		}
		ref := eval(1)
		for _, procs := range []int{2, 3, 5} {
			got := eval(procs)
			if math.Float64bits(got.ll) != math.Float64bits(ref.ll) {
				t.Errorf("%v GOMAXPROCS %d: log-likelihood %.17g, with 1: %.17g", f, procs, got.ll, ref.ll)
			}
			for name, pair := range map[string][2][]float64{"ld": {got.ld, ref.ld}, "post": {got.post, ref.post},
				"lpost": {got.lpost, ref.lpost}, "comp": {got.comp, ref.comp}, "maha": {got.maha, ref.maha}} {
				for i := range pair[0] {
					if math.Float64bits(pair[0][i]) != math.Float64bits(pair[1][i]) {
						t.Fatalf("%v GOMAXPROCS %d: %s[%d] differs: %v vs %v", f, procs, name, i, pair[0][i], pair[1][i])
					}
				}
			}
			for i := range got.labels {
				if got.labels[i] != ref.labels[i] {
					t.Fatalf("%v GOMAXPROCS %d: label %d differs", f, procs, i)
				}
			}
		}
		// Row alone vs in batch, at chunk and block boundaries.
		for _, i := range []int{0, blockRows - 1, blockRows, ChunkRows - 1, ChunkRows, rows - 1} {
			one := make([]float64, 1)
			must(t, m.LogDensity(x[i*5:(i+1)*5], one))
			if math.Float64bits(one[0]) != math.Float64bits(ref.ld[i]) {
				t.Errorf("%v row %d alone %v, in batch %v", f, i, one[0], ref.ld[i])
			}
		}
		// The log-likelihood is the block-ordered sum of the log-densities.
		want, total := 0.0, 0.0
		for c := 0; c*ChunkRows < rows; c++ {
			s := 0.0
			for i := c * ChunkRows; i < min((c+1)*ChunkRows, rows); i++ {
				s += ref.ld[i]
			}
			total += s
		}
		want = total
		if math.Float64bits(want) != math.Float64bits(ref.ll) {
			t.Errorf("%v log-likelihood %.17g, block-ordered sum of log-densities %.17g", f, ref.ll, want)
		}
	}
}

func must(t testing.TB, err error) {
	t.Helper()
	if err != nil {
		t.Fatal(err)
	}
}

// TestConsistency checks the outputs against each other: posteriors sum to 1,
// exp(logPost) = post, logPost = log w + component log-density − log-density,
// labels are the argmax, and weighted log-likelihood equals the weighted sum.
func TestConsistency(t *testing.T) {
	for _, f := range []Family{Gaussian, StudentT} {
		for _, s := range []Structure{Full, Diagonal, Spherical, Tied} {
			m := randomModel(t, f, s, 3, 4, 3)
			rows, k := 500, m.K()
			x, _ := m.Sample(rows, 9)
			ld, post, lpost, comp := make([]float64, rows), make([]float64, rows*k), make([]float64, rows*k), make([]float64, rows*k)
			must(t, m.Posteriors(x, ld, post, lpost))
			must(t, m.ComponentLogDensity(x, comp))
			labels, maxPost := make([]int, rows), make([]float64, rows)
			must(t, m.Assign(x, labels, maxPost))
			weights := make([]float64, rows)
			wantLL := 0.0
			for i := 0; i < rows; i++ {
				weights[i] = float64(i%3) * 0.5
				wantLL += weights[i] * ld[i]
				sum := 0.0
				best := 0
				for a := 0; a < k; a++ {
					sum += post[i*k+a]
					if post[i*k+a] > post[i*k+best] {
						best = a
					}
					if post[i*k+a] != math.Exp(lpost[i*k+a]) {
						t.Fatalf("post != exp(logPost)")
					}
					want := math.Log(m.params.Components[a].Weight) + comp[i*k+a] - ld[i]
					if math.Abs(lpost[i*k+a]-want) > 1e-12*math.Max(1, math.Abs(want)) {
						t.Fatalf("%v/%v row %d comp %d: logPost %v, want %v", f, s, i, a, lpost[i*k+a], want)
					}
				}
				if math.Abs(sum-1) > 1e-12 {
					t.Fatalf("%v/%v row %d: posteriors sum to %v", f, s, i, sum)
				}
				if post[i*k+labels[i]] < post[i*k+best] || maxPost[i] != post[i*k+labels[i]] {
					t.Fatalf("%v/%v row %d: label %d (max %v) but posteriors %v", f, s, i, labels[i], maxPost[i], post[i*k:(i+1)*k])
				}
			}
			ll, err := m.LogLikelihood(x, weights)
			must(t, err)
			if math.Abs(ll-wantLL) > 1e-9*math.Abs(wantLL) {
				t.Errorf("%v/%v weighted log-likelihood %v, want %v", f, s, ll, wantLL)
			}
		}
	}
}

func TestAssignTiesAndZeroWeights(t *testing.T) {
	// Two identical components: every row is a tie, the lowest index wins.
	p := Params{Dim: 1, Family: Gaussian, Structure: Full, Components: []Component{
		{Weight: 0, Mean: []float64{0}, Cov: []float64{1}},
		{Weight: 0.5, Mean: []float64{0}, Cov: []float64{1}},
		{Weight: 0.5, Mean: []float64{0}, Cov: []float64{1}},
	}}
	m := mustNew(t, p)
	x := []float64{-3, 0, 2.5}
	labels, maxPost := make([]int, 3), make([]float64, 3)
	must(t, m.Assign(x, labels, maxPost))
	post := make([]float64, 9)
	must(t, m.Posteriors(x, nil, post, nil))
	for i := range labels {
		if labels[i] != 1 || math.Abs(maxPost[i]-0.5) > 1e-15 {
			t.Errorf("row %d: label %d max %v, want 1 and 0.5", i, labels[i], maxPost[i])
		}
		if post[i*3] != 0 {
			t.Errorf("zero-weight component has posterior %v", post[i*3])
		}
	}
}

// TestExtremeRowsNoNaN: rows near the float64 limit give finite or −Inf
// log-densities, +Inf distances and valid posteriors, never NaN.
func TestExtremeRowsNoNaN(t *testing.T) {
	for _, f := range []Family{Gaussian, StudentT} {
		for _, s := range []Structure{Full, Diagonal, Tied} {
			m := randomModel(t, f, s, 3, 3, 21)
			x := []float64{
				1e300, -1e300, 1e300,
				math.MaxFloat64, 0, 0,
				-math.MaxFloat64, math.MaxFloat64, 1,
				1e160, 1e160, 1e160,
				1e-300, 0, 5e-324,
			}
			rows, k := 5, m.K()
			ld, post, lpost := make([]float64, rows), make([]float64, rows*k), make([]float64, rows*k)
			maha, comp := make([]float64, rows*k), make([]float64, rows*k)
			labels, maxPost := make([]int, rows), make([]float64, rows)
			must(t, m.Posteriors(x, ld, post, lpost))
			must(t, m.Mahalanobis(x, maha))
			must(t, m.ComponentLogDensity(x, comp))
			must(t, m.Assign(x, labels, maxPost))
			ll, err := m.LogLikelihood(x, nil)
			must(t, err)
			for _, v := range [][]float64{ld, post, lpost, maha, comp, maxPost, {ll}} {
				for i, e := range v {
					if math.IsNaN(e) {
						t.Fatalf("%v/%v: NaN at %d of %v", f, s, i, v)
					}
				}
			}
			for i := 0; i < rows-1; i++ {
				if f == Gaussian && !math.IsInf(ld[i], -1) {
					t.Errorf("%v/%v row %d: log-density %v, want -Inf", f, s, i, ld[i])
				}
				sum := 0.0
				for a := 0; a < k; a++ {
					sum += post[i*k+a]
				}
				if math.Abs(sum-1) > 1e-12 {
					t.Errorf("%v/%v row %d: posteriors sum to %v", f, s, i, sum)
				}
			}
			if math.IsInf(ld[rows-1], 0) {
				t.Errorf("row near 0 has log-density %v", ld[rows-1])
			}
		}
	}
}

// TestNoAllocations checks that a small single-goroutine batch allocates
// nothing once the model's scratch pool is warm.
func TestNoAllocations(t *testing.T) {
	if testing.CoverMode() != "" || raceEnabled {
		t.Skip("allocation counts are not meaningful under coverage or the race detector")
	}
	for _, f := range []Family{Gaussian, StudentT} {
		m := randomModel(t, f, Full, 4, 3, 2)
		rows, k := 300, m.K()
		x, _ := m.Sample(rows, 1)
		ld, post, lpost, comp := make([]float64, rows), make([]float64, rows*k), make([]float64, rows*k), make([]float64, rows*k)
		labels := make([]int, rows)
		for name, fn := range map[string]func(){
			"LogDensity":          func() { _ = m.LogDensity(x, ld) },
			"Posteriors":          func() { _ = m.Posteriors(x, ld, post, lpost) },
			"ComponentLogDensity": func() { _ = m.ComponentLogDensity(x, comp) },
			"Mahalanobis":         func() { _ = m.Mahalanobis(x, comp) },
			"Assign":              func() { _ = m.Assign(x, labels, ld) },
			"LogLikelihood":       func() { _, _ = m.LogLikelihood(x, ld) },
		} {
			if a := testing.AllocsPerRun(20, fn); a != 0 {
				t.Errorf("%v %s: %v allocations per call, want 0", f, name, a)
			}
		}
	}
}

// TestLogSumExpMatchesGonum: the inlined log-sum-exp gives exactly gonum's
// floats.LogSumExp, and posteriors stay normalised when the maximum is so
// large that log Σ would be absorbed by rounding.
func TestLogSumExpMatchesGonum(t *testing.T) {
	r := newTestRand(4)
	for n := 1; n < 12; n++ {
		for trial := 0; trial < 200; trial++ {
			s := make([]float64, n)
			for i := range s {
				s[i] = r.NormFloat64() * math.Pow(10, float64(r.IntN(20)))
				if r.IntN(10) == 0 {
					s[i] = math.Inf(-1)
				}
			}
			mx, logS := logSumExpParts(s)
			if got, want := logS+mx, floats.LogSumExp(s); math.Float64bits(got) != math.Float64bits(want) {
				t.Fatalf("%v: %v, gonum %v", s, got, want)
			}
		}
	}
	// Two equal components 1e8 standard deviations away: posteriors 1/2 each.
	m := mustNew(t, Params{Dim: 1, Family: Gaussian, Structure: Full, Components: []Component{
		{Weight: 0.5, Mean: []float64{0}, Cov: []float64{1}},
		{Weight: 0.5, Mean: []float64{0}, Cov: []float64{1}},
	}})
	post := make([]float64, 2)
	maxPost := make([]float64, 1)
	must(t, m.Posteriors([]float64{1e8}, nil, post, nil))
	must(t, m.Assign([]float64{1e8}, make([]int, 1), maxPost))
	if post[0] != 0.5 || post[1] != 0.5 || maxPost[0] != 0.5 {
		t.Errorf("posteriors %v, max %v, want 1/2 each", post, maxPost)
	}
}

// TestConcurrentUse evaluates one model from several goroutines at once
// (run with -race) and checks every caller gets the serial result.
func TestConcurrentUse(t *testing.T) {
	m := randomModel(t, StudentT, Tied, 3, 4, 5)
	x, _ := m.Sample(ParallelMinRows+500, 3)
	rows := len(x) / 3
	want := make([]float64, rows)
	must(t, m.LogDensity(x, want))
	errs := make(chan error, 4)
	for g := 0; g < 4; g++ {
		go func() {
			got := make([]float64, rows)
			post := make([]float64, rows*m.K())
			if err := m.Posteriors(x[:300*3], nil, post[:300*m.K()], nil); err != nil {
				errs <- err
				return
			}
			if err := m.LogDensity(x, got); err != nil {
				errs <- err
				return
			}
			for i := range got {
				if got[i] != want[i] {
					errs <- fmt.Errorf("row %d: %v, want %v", i, got[i], want[i])
					return
				}
			}
			errs <- nil
		}()
	}
	for g := 0; g < 4; g++ {
		if err := <-errs; err != nil {
			t.Error(err)
		}
	}
}
