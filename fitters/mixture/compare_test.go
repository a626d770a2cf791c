package mixture

import (
	"context"
	"encoding/json"
	"math"
	"os"
	"slices"
	"strings"
	"testing"
)

type gaussianPair struct {
	Dim           int       `json:"dim"`
	Mean1         []float64 `json:"mean1"`
	Cov1          []float64 `json:"cov1"`
	Mean2         []float64 `json:"mean2"`
	Cov2          []float64 `json:"cov2"`
	KL12          float64   `json:"kl_12"`
	KL21          float64   `json:"kl_21"`
	Bhattacharyya float64   `json:"bhattacharyya"`
}

func loadGaussianPairs(t *testing.T) []gaussianPair {
	t.Helper()
	var doc struct {
		Pairs []gaussianPair `json:"gaussian_pairs"`
	}
	b, err := os.ReadFile(missingReferenceFile)
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &doc); err != nil || len(doc.Pairs) == 0 {
		t.Fatalf("decode %s: %v (%d pairs)", missingReferenceFile, err, len(doc.Pairs))
	}
	return doc.Pairs
}

// TestCompareSingleGaussiansMatchesClosedForm checks the Monte Carlo KL
// estimates in both directions against the closed-form divergence between
// two Gaussians (Kullback 1959; computed with numpy in
// testdata/missing/make_reference.py): within three standard errors. It also
// checks that the standard error shrinks like 1/√n and that the estimate
// is reproducible by seed.
func TestCompareSingleGaussiansMatchesClosedForm(t *testing.T) {
	ctx := context.Background()
	for _, pr := range loadGaussianPairs(t) {
		p := mustNew(t, single(Gaussian, pr.Dim, pr.Mean1, pr.Cov1, 0))
		q := mustNew(t, single(Gaussian, pr.Dim, pr.Mean2, pr.Cov2, 0))
		n := 20000
		res, err := Compare(ctx, p, q, CompareOptions{Samples: n, Seed: 1})
		if err != nil {
			t.Fatal(err)
		}
		// Three standard errors: a check that fails by chance about 3 times
		// in 1000 for a correct estimator (common practice); the seed is
		// fixed, so the outcome is fixed too.
		if math.Abs(res.Forward-pr.KL12) > 3*res.ForwardSE || !(res.ForwardSE > 0) {
			t.Errorf("d=%d: KL(p‖q) = %v ± %v, closed form %v", pr.Dim, res.Forward, res.ForwardSE, pr.KL12)
		}
		if math.Abs(res.Backward-pr.KL21) > 3*res.BackwardSE || !(res.BackwardSE > 0) {
			t.Errorf("d=%d: KL(q‖p) = %v ± %v, closed form %v", pr.Dim, res.Backward, res.BackwardSE, pr.KL21)
		}
		small, err := Compare(ctx, p, q, CompareOptions{Samples: n / 16, Seed: 1})
		if err != nil {
			t.Fatal(err)
		}
		if r := small.ForwardSE / res.ForwardSE; r < 2.5 || r > 6 {
			t.Errorf("d=%d: standard error ratio for 16× fewer draws is %v, want about 4", pr.Dim, r)
		}
		again, _ := Compare(ctx, p, q, CompareOptions{Samples: n, Seed: 1})
		if again.Forward != res.Forward || again.BackwardSE != res.BackwardSE {
			t.Errorf("d=%d: same seed, different estimate", pr.Dim)
		}
		if len(res.Matches) != 1 || !closeTo(res.Matches[0].Distance, pr.Bhattacharyya, 1e-12) {
			t.Errorf("d=%d: matches %+v, Bhattacharyya distance (numpy) %v", pr.Dim, res.Matches, pr.Bhattacharyya)
		}
	}
}

// TestCompareSelf checks that a model compared with itself (or with an
// identical copy) has KL 0 in both directions within its standard error,
// and that its components match themselves at distance 0, even when the
// copy lists them in another order.
func TestCompareSelf(t *testing.T) {
	ctx := context.Background()
	for _, f := range []Family{Gaussian, StudentT} {
		m := randomModel(t, f, Full, 3, 4, 7)
		p := m.Params()
		perm := []int{2, 0, 3, 1}
		shuffled := p.Clone()
		for i, j := range perm {
			shuffled.Components[i] = p.Components[j]
		}
		q := mustNew(t, shuffled)
		for _, other := range []*Model{m, q} {
			res, err := Compare(ctx, m, other, CompareOptions{Samples: 2000, Seed: 9})
			if err != nil {
				t.Fatal(err)
			}
			for _, v := range [][2]float64{{res.Forward, res.ForwardSE}, {res.Backward, res.BackwardSE}} {
				if math.Abs(v[0]) > 3*v[1]+1e-12 {
					t.Errorf("%v: self KL %v ± %v", f, v[0], v[1])
				}
			}
			if len(res.Matches) != 4 || len(res.UnmatchedP)+len(res.UnmatchedQ) != 0 {
				t.Fatalf("%v: matches %+v", f, res)
			}
			for _, mt := range res.Matches {
				want := mt.P
				if other == q {
					want = slices.Index(perm, mt.P)
				}
				if mt.Q != want || mt.Distance > 1e-12 || mt.WeightP != mt.WeightQ {
					t.Errorf("%v: component %d matched to %d at distance %v, want %d at 0", f, mt.P, mt.Q, mt.Distance, want)
				}
			}
		}
	}
}

// TestCompareDrift checks that a shifted model is detected: KL well above
// its error, and the moved component matched to its counterpart at the
// Bhattacharyya distance of the shift alone, ⅛ Δᵀ Σ⁻¹ Δ (same covariance;
// Fukunaga 1990). Models with different numbers of components report the
// unmatched ones.
func TestCompareDrift(t *testing.T) {
	ctx := context.Background()
	m := pumpModel(t, Gaussian, 0)
	p := m.Params()
	p.Components[1].Mean = []float64{64, 18} // flow +4 in regime 1 (variance 16, covariance with current −2, current variance 1)
	moved := mustNew(t, p)
	res, err := Compare(ctx, m, moved, CompareOptions{Samples: 5000, Seed: 2})
	if err != nil {
		t.Fatal(err)
	}
	if res.Forward < 10*res.ForwardSE || res.Backward < 10*res.BackwardSE {
		t.Errorf("drift not detected: %v ± %v, %v ± %v", res.Forward, res.ForwardSE, res.Backward, res.BackwardSE)
	}
	// Δ = (4, 0); Σ⁻¹_00 = Σ_11/det = 1/(16 − 4) = 1/12, so ⅛·16/12 = 1/6.
	if mt := res.Matches[1]; mt.Q != 1 || !closeTo(mt.Distance, 1.0/6, 1e-12) || res.Matches[0].Distance != 0 {
		t.Errorf("matches %+v, want component 1 at distance 1/6", res.Matches)
	}
	// Fewer components on one side.
	p2 := m.Params()
	p2.Components = p2.Components[:2]
	p2.Components[1].Weight = 0.5
	two := mustNew(t, p2)
	res, err = Compare(ctx, m, two, CompareOptions{Samples: 500, Seed: 2})
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Matches) != 2 || !slices.Equal(res.UnmatchedP, []int{2}) || len(res.UnmatchedQ) != 0 {
		t.Errorf("3 vs 2 components: matches %+v unmatched %v %v", res.Matches, res.UnmatchedP, res.UnmatchedQ)
	}
	if math.IsInf(res.Forward, 0) || math.IsNaN(res.Forward) {
		t.Errorf("KL %v", res.Forward)
	}
}

// TestComponentDistancesStudentT checks that Student-t components are
// compared through their moment-matched Gaussians N(μ, ν/(ν−2)Σ), and
// through N(μ, Σ) when ν ≤ 2.
func TestComponentDistancesStudentT(t *testing.T) {
	mean2 := []float64{1, 1}
	cov := []float64{2, 0.5, 0.5, 1}
	for _, nu := range []float64{1.5, 5} {
		tp := mustNew(t, single(StudentT, 2, []float64{0, 0}, cov, nu))
		tq := mustNew(t, single(StudentT, 2, mean2, cov, nu))
		f := 1.0
		if nu > 2 {
			f = nu / (nu - 2)
		}
		scaled := make([]float64, 4)
		for i, v := range cov {
			scaled[i] = f * v
		}
		gp := mustNew(t, single(Gaussian, 2, []float64{0, 0}, scaled, 0))
		gq := mustNew(t, single(Gaussian, 2, mean2, scaled, 0))
		dt, err := ComponentDistances(tp, tq)
		must(t, err)
		dg, err := ComponentDistances(gp, gq)
		must(t, err)
		if !closeTo(dt[0], dg[0], 1e-14) {
			t.Errorf("nu %v: t distance %v, Gaussian approximation %v", nu, dt[0], dg[0])
		}
	}
}

// TestCompareErrors checks the messages for models that cannot be compared
// and bad sample counts, and that cancellation stops the estimate.
func TestCompareErrors(t *testing.T) {
	ctx := context.Background()
	a := randomModel(t, Gaussian, Full, 2, 2, 1)
	b := randomModel(t, Gaussian, Full, 3, 2, 1)
	if _, err := Compare(ctx, a, b, CompareOptions{}); err == nil || !strings.Contains(err.Error(), "dimensions 2 and 3") {
		t.Errorf("dimension mismatch: %v", err)
	}
	pa := a.Params()
	pa.Features = []string{"flow", "current"}
	pb := a.Params()
	pb.Features = []string{"flow", "vibration"}
	if _, err := Compare(ctx, mustNew(t, pa), mustNew(t, pb), CompareOptions{}); err == nil || !strings.Contains(err.Error(), "different features") {
		t.Errorf("feature mismatch: %v", err)
	}
	if _, err := Compare(ctx, a, a, CompareOptions{Samples: 1}); err == nil || !strings.Contains(err.Error(), "at least 2") {
		t.Errorf("one sample: %v", err)
	}
	cctx, cancel := context.WithCancel(ctx)
	cancel()
	if _, err := Compare(cctx, a, a, CompareOptions{Samples: 100}); err == nil || !strings.Contains(err.Error(), "canceled") {
		t.Errorf("cancelled: %v", err)
	}
}

// TestMinCostAssignmentMatchesScipy compares with
// scipy.optimize.linear_sum_assignment (testdata/missing/make_reference.py)
// on square and rectangular cost matrices.
func TestMinCostAssignmentMatchesScipy(t *testing.T) {
	doc := loadMissingReference(t)
	for _, c := range doc.Assignment {
		got, err := MinCostAssignment(c.Rows, c.Cols, c.Cost)
		if err != nil {
			t.Fatal(err)
		}
		total := 0.0
		for i, j := range got {
			if j >= 0 {
				total += c.Cost[i*c.Cols+j]
			}
		}
		if !slices.Equal(got, c.ColumnOfRow) || !closeTo(total, c.Total, 1e-12) {
			t.Errorf("%d×%d: columns %v (total %v), scipy %v (total %v)", c.Rows, c.Cols, got, total, c.ColumnOfRow, c.Total)
		}
	}
}

// TestMinCostAssignmentBruteForce compares the total cost with an
// exhaustive search over all assignments of small random matrices, with
// ties (integer costs) and rectangular shapes.
func TestMinCostAssignmentBruteForce(t *testing.T) {
	r := newTestRand(3)
	for trial := 0; trial < 200; trial++ {
		rows, cols := 1+r.IntN(5), 1+r.IntN(5)
		cost := make([]float64, rows*cols)
		for i := range cost {
			cost[i] = float64(r.IntN(6)) // many ties
			if trial%2 == 1 {
				cost[i] = r.Float64()*10 - 3
			}
		}
		got, err := MinCostAssignment(rows, cols, cost)
		must(t, err)
		seen := map[int]bool{}
		total, pairs := 0.0, 0
		for i, j := range got {
			if j < 0 {
				continue
			}
			if seen[j] || j >= cols {
				t.Fatalf("trial %d: column %d used twice or out of range: %v", trial, j, got)
			}
			seen[j] = true
			total += cost[i*cols+j]
			pairs++
		}
		if pairs != min(rows, cols) {
			t.Fatalf("trial %d: %d pairs for %d×%d", trial, pairs, rows, cols)
		}
		if best := bruteForce(rows, cols, cost); math.Abs(total-best) > 1e-9 {
			t.Fatalf("trial %d (%d×%d): total %v, exhaustive minimum %v", trial, rows, cols, total, best)
		}
	}
	if _, err := MinCostAssignment(2, 2, []float64{1, math.NaN(), 0, 1}); err == nil || !strings.Contains(err.Error(), "cost[0][1]") {
		t.Errorf("NaN cost: %v", err)
	}
	if got, err := MinCostAssignment(0, 3, nil); err != nil || len(got) != 0 {
		t.Errorf("empty: %v %v", got, err)
	}
}

// bruteForce returns the smallest total over all ways of pairing
// min(rows, cols) rows with distinct columns.
func bruteForce(rows, cols int, cost []float64) float64 {
	best := math.Inf(1)
	used := make([]bool, cols)
	var rec func(i, left int, acc float64)
	rec = func(i, left int, acc float64) {
		if left == 0 {
			best = math.Min(best, acc)
			return
		}
		if rows-i < left {
			return
		}
		rec(i+1, left, acc) // row i unpaired
		for j := 0; j < cols; j++ {
			if !used[j] {
				used[j] = true
				rec(i+1, left-1, acc+cost[i*cols+j])
				used[j] = false
			}
		}
	}
	rec(0, min(rows, cols), 0)
	return best
}
