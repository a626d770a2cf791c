package em

import (
	"context"
	"errors"
	"fmt"
	"math"
	"reflect"
	"runtime"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/mixture"

	"github.com/mixd-dev/mixd/fitters/internal/testkit"
)

var allStructures = []mixture.Structure{mixture.Full, mixture.Diagonal, mixture.Spherical, mixture.Tied}

func TestDescribe(t *testing.T) {
	info, err := New().Describe(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	if info.Name != "em" || info.Version != Version {
		t.Fatalf("name %q version %q", info.Name, info.Version)
	}
	if !slices.Equal(info.Families, []mixture.Family{mixture.Gaussian}) {
		t.Fatalf("families %v", info.Families)
	}
	if !slices.Equal(info.Structures, allStructures) {
		t.Fatalf("structures %v", info.Structures)
	}
	if len(info.Options) != 1 || info.Options[0].Name != optMinRows || info.Options[0].Description == "" {
		t.Fatalf("options %+v", info.Options)
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := New().Describe(ctx); fitters.CodeOf(err) != fitters.Canceled {
		t.Fatalf("cancelled Describe: %v", err)
	}
}

// TestMonotone checks that EM never decreases the log-likelihood when no
// ridge is added: each iteration maximises a lower bound that touches the
// log-likelihood at the current parameters (Dempster, Laird and Rubin, 1977;
// common practice). Allowed slack is rounding only.
func TestMonotone(t *testing.T) {
	faithful := testkit.Faithful(t)
	pump2, _ := pumpTruth(2).sample(800, 11)
	pump3, _ := pumpTruth(3).sample(1500, 12)
	weighted, _ := pumpTruth(3).sample(700, 13)
	weighted.Weights = make([]float64, weighted.Rows)
	for i := range weighted.Weights {
		weighted.Weights[i] = 0.25 + float64(i%7)*0.5
	}
	sets := []struct {
		name string
		data fitters.Data
		k    int
	}{
		{"faithful", faithful, 2},
		{"faithful-k3", faithful, 3},
		{"pump-d2", pump2, 3},
		{"pump-d3", pump3, 3},
		{"pump-d3-weighted", weighted, 3},
	}
	for _, set := range sets {
		for _, s := range allStructures {
			t.Run(fmt.Sprintf("%s/%s", set.name, s), func(t *testing.T) {
				res, err := New().Fit(context.Background(), set.data, fitters.Settings{
					Components: set.k, Structure: s, Ridge: 0, Seed: 7, Restarts: 2,
					Tolerance: 1e-12, MaxIterations: 500,
				}, nil)
				if err != nil {
					t.Fatal(err)
				}
				for _, n := range res.Report.Notes {
					if strings.Contains(n, "collapsed") || strings.Contains(n, "shared covariance") {
						t.Fatalf("a re-seed breaks monotonicity by design; pick other data: %s", n)
					}
				}
				h := res.Report.History
				if len(h) < 3 {
					t.Fatalf("history too short to test: %v", h)
				}
				for i := 1; i < len(h); i++ {
					if slack := 1e-11 * math.Abs(h[i-1]); h[i] < h[i-1]-slack {
						t.Fatalf("log-likelihood decreased at iteration %d: %.15g -> %.15g", i, h[i-1], h[i])
					}
				}
				checkParams(t, res.Params)
			})
		}
	}
}

// TestSingleComponentOneDimension: with K=1 and one feature every structure
// has the same single variance parameter, so the fits, their
// log-likelihoods and their BIC coincide (common practice).
func TestSingleComponentOneDimension(t *testing.T) {
	f := testkit.Faithful(t)
	waiting := fitters.Data{Rows: f.Rows, Cols: 1}
	for i := 0; i < f.Rows; i++ {
		waiting.Values = append(waiting.Values, f.Values[2*i+1])
	}
	var bics []float64
	for _, s := range allStructures {
		res, err := New().Fit(context.Background(), waiting, fitters.Settings{Components: 1, Structure: s, Ridge: 0, Seed: 1}, nil)
		if err != nil {
			t.Fatal(err)
		}
		bics = append(bics, res.Report.BIC)
	}
	for i, b := range bics {
		if math.Abs(b-bics[0]) > 1e-9*math.Abs(bics[0]) {
			t.Fatalf("BIC differs across structures: %v (structure %s)", bics, allStructures[i])
		}
	}
	// Closed form (common practice): the maximum-likelihood normal fit has
	// log L = −n/2 (log 2π σ̂² + 1) with σ̂² the 1/n variance, and two
	// parameters, so BIC = n (log 2π σ̂² + 1) + 2 log n.
	n := float64(waiting.Rows)
	var mu, v float64
	for _, x := range waiting.Values {
		mu += x
	}
	mu /= n
	for _, x := range waiting.Values {
		v += (x - mu) * (x - mu)
	}
	v /= n
	want := n*(math.Log(2*math.Pi*v)+1) + 2*math.Log(n)
	if math.Abs(bics[0]-want) > 1e-9*math.Abs(want) {
		t.Fatalf("BIC %.12g, closed form %.12g", bics[0], want)
	}
}

// TestZeroIterations: MaxIterations = NoIterations evaluates the start and
// returns it unchanged, so it classifies rows exactly as the start does.
func TestZeroIterations(t *testing.T) {
	tr := pumpTruth(3)
	data, _ := tr.sample(3000, 21)
	for _, s := range allStructures {
		t.Run(s.String(), func(t *testing.T) {
			start := tr.params(s)
			if s != mixture.Full {
				for k := range start.Components {
					c := start.Components[k].Cov
					for a := 0; a < 3; a++ {
						for b := 0; b < 3; b++ {
							switch {
							case s == mixture.Tied:
								c[a*3+b] = tr.covs[0][a*3+b]
							case a != b:
								c[a*3+b] = 0
							case s == mixture.Spherical:
								c[a*3+b] = 4
							}
						}
					}
				}
			}
			res, err := New().Fit(context.Background(), data, fitters.Settings{Start: &start, MaxIterations: NoIterations}, nil)
			if err != nil {
				t.Fatal(err)
			}
			if res.Report.Iterations != 0 || len(res.Report.History) != 1 || res.Report.Converged {
				t.Fatalf("report %+v", res.Report)
			}
			if !reflect.DeepEqual(res.Params, start) {
				t.Fatalf("params changed:\n got %+v\nwant %+v", res.Params, start)
			}
			want := checkParams(t, start)
			got := checkParams(t, res.Params)
			lw, lg := make([]int, data.Rows), make([]int, data.Rows)
			if err := want.Assign(data.Values, lw, nil); err != nil {
				t.Fatal(err)
			}
			if err := got.Assign(data.Values, lg, nil); err != nil {
				t.Fatal(err)
			}
			if !slices.Equal(lw, lg) {
				t.Fatal("labels differ from those of the start")
			}
			ll, _ := want.LogLikelihood(data.Values, nil)
			if math.Abs(res.Report.History[0]-ll) > 1e-9*math.Abs(ll) {
				t.Fatalf("history[0] %.12g, model log-likelihood %.12g", res.Report.History[0], ll)
			}
		})
	}
}

// TestRecovery samples rows from a known model, refits it and checks the
// fit recovers the model: weights within 0.01, every mean coordinate within
// three standard errors sqrt(Σ_jj / (n w_k)). Components are matched by the
// permutation of least total standardised mean distance, not by index.
func TestRecovery(t *testing.T) {
	for _, d := range []int{2, 5} {
		t.Run(fmt.Sprint("d", d), func(t *testing.T) {
			tr := pumpTruth(d)
			const n = 20000
			data, _ := tr.sample(n, uint64(100+d))
			res, err := New().Fit(context.Background(), data, fitters.Settings{Components: 3, Seed: 5, Restarts: 1, MaxIterations: 200}, nil)
			if err != nil {
				t.Fatal(err)
			}
			fit := res.Params.Components
			perm := bestMatch(3, func(k, f int) float64 {
				var c float64
				for j := 0; j < d; j++ {
					z := (fit[f].Mean[j] - tr.means[k][j]) / math.Sqrt(tr.covs[k][j*d+j])
					c += z * z
				}
				return c
			})
			for k := 0; k < 3; k++ {
				f := fit[perm[k]]
				if math.Abs(f.Weight-tr.weights[k]) > 0.01 {
					t.Errorf("component %d: weight %.4f, true %.4f", k, f.Weight, tr.weights[k])
				}
				for j := 0; j < d; j++ {
					se := math.Sqrt(tr.covs[k][j*d+j] / (n * tr.weights[k]))
					if math.Abs(f.Mean[j]-tr.means[k][j]) > 3*se {
						t.Errorf("component %d mean[%d]: %.4f, true %.4f, 3 SE %.4f", k, j, f.Mean[j], tr.means[k][j], 3*se)
					}
				}
			}
		})
	}
}

// TestDeterministicAcrossProcs: the same data, settings and seed give
// bit-identical parameters and history for any GOMAXPROCS.
func TestDeterministicAcrossProcs(t *testing.T) {
	data, _ := pumpTruth(3).sample(9000, 31) // several E-step chunks
	data.Weights = make([]float64, data.Rows)
	for i := range data.Weights {
		data.Weights[i] = 1 + float64(i%3)
	}
	for _, s := range []mixture.Structure{mixture.Full, mixture.Diagonal} {
		fit := func(procs int) *fitters.Result {
			old := runtime.GOMAXPROCS(procs)
			defer runtime.GOMAXPROCS(old)
			res, err := New().Fit(context.Background(), data, fitters.Settings{Components: 4, Structure: s, Seed: 99, Restarts: 2, MaxIterations: 10}, nil)
			if err != nil {
				t.Fatal(err)
			}
			return res
		}
		a, b := fit(1), fit(4)
		if !reflect.DeepEqual(a.Params, b.Params) {
			t.Fatalf("%s: params differ between GOMAXPROCS 1 and 4", s)
		}
		if !slices.Equal(a.Report.History, b.Report.History) || a.Report.LogLikelihood != b.Report.LogLikelihood {
			t.Fatalf("%s: history or log-likelihood differ", s)
		}
	}
}

// TestRestartsDiffer: restarts draw different seeds from one generator, and
// the run as a whole is reproducible.
func TestRestartsDiffer(t *testing.T) {
	data, _ := pumpTruth(2).sample(600, 41)
	var first []float64
	record := func(p fitters.Progress) {
		if p.Iteration == 0 {
			first = append(first, p.Objective)
		}
	}
	res1, err := New().Fit(context.Background(), data, fitters.Settings{Components: 3, Seed: 3, Restarts: 4}, record)
	if err != nil {
		t.Fatal(err)
	}
	if len(first) != 4 {
		t.Fatalf("%d restarts reported, want 4", len(first))
	}
	distinct := map[float64]bool{}
	for _, v := range first {
		distinct[v] = true
	}
	if len(distinct) < 3 {
		t.Fatalf("restarts look identical: %v", first)
	}
	again := first
	first = nil
	res2, err := New().Fit(context.Background(), data, fitters.Settings{Components: 3, Seed: 3, Restarts: 4}, record)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(again, first) || !reflect.DeepEqual(res1.Params, res2.Params) {
		t.Fatal("the same seed gave a different run")
	}
	first = nil
	if _, err := New().Fit(context.Background(), data, fitters.Settings{Components: 3, Seed: 4, Restarts: 4}, record); err != nil {
		t.Fatal(err)
	}
	if slices.Equal(again, first) {
		t.Fatal("a different seed gave the same starts")
	}
}

// TestChooseK fits K = 1..5 to data from a three-component model and
// expects BIC to pick 3; the report carries the whole table.
func TestChooseK(t *testing.T) {
	data, _ := pumpTruth(3).sample(1500, 51)
	var table []fitters.SelectionRow
	for _, crit := range []fitters.Criterion{fitters.BIC, fitters.AIC} {
		res, err := New().Fit(context.Background(), data, fitters.Settings{MinComponents: 1, MaxComponents: 5, Criterion: crit, Seed: 2, Restarts: 2, MaxIterations: 100}, nil)
		if err != nil {
			t.Fatal(err)
		}
		sel := res.Report.Selection
		if len(sel) != 5 {
			t.Fatalf("selection has %d rows", len(sel))
		}
		if table != nil && !reflect.DeepEqual(table, sel) {
			t.Fatal("the criterion changed the fits, not only the choice")
		}
		table = sel
		bestK, bestV := 0, math.Inf(1)
		for i, row := range sel {
			if row.Components != i+1 {
				t.Fatalf("row %d is K=%d", i, row.Components)
			}
			if row.AIC >= row.BIC || math.IsNaN(row.BIC) {
				t.Fatalf("row %+v: with n=1500 BIC's penalty exceeds AIC's", row)
			}
			v := row.BIC
			if crit == fitters.AIC {
				v = row.AIC
			}
			if v < bestV {
				bestK, bestV = row.Components, v
			}
		}
		if len(res.Params.Components) != bestK {
			t.Fatalf("%s: returned K=%d but the table's best is K=%d", crit, len(res.Params.Components), bestK)
		}
		if crit == fitters.BIC && bestK != 3 {
			t.Fatalf("BIC chose K=%d, want 3: %+v", bestK, sel)
		}
		m := checkParams(t, res.Params)
		if got := m.BIC(res.Report.LogLikelihood, float64(data.Rows)); got != res.Report.BIC {
			t.Fatalf("report BIC %v, model BIC %v", res.Report.BIC, got)
		}
		if res.Report.Settings["criterion"] != crit.String() || res.Report.Settings["components_max"] != "5" {
			t.Fatalf("settings echo %v", res.Report.Settings)
		}
	}
}

func TestCancellation(t *testing.T) {
	data, _ := pumpTruth(3).sample(2000, 61)
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := New().Fit(ctx, data, fitters.Settings{Components: 3}, nil); fitters.CodeOf(err) != fitters.Canceled {
		t.Fatalf("pre-cancelled: %v", err)
	}

	ctx, cancel = context.WithCancel(context.Background())
	defer cancel()
	var events int
	_, err := New().Fit(ctx, data, fitters.Settings{Components: 3, Tolerance: 1e-300, MaxIterations: 100000}, func(p fitters.Progress) {
		events++
		if p.Iteration == 3 {
			cancel()
		}
	})
	if fitters.CodeOf(err) != fitters.Canceled || !errors.Is(err, context.Canceled) {
		t.Fatalf("cancelled mid-fit: %v", err)
	}
	if events != 4 {
		t.Fatalf("%d progress events after cancelling at iteration 3, want 4 (checked every iteration)", events)
	}

	dctx, dcancel := context.WithDeadline(context.Background(), time.Now().Add(-time.Second))
	defer dcancel()
	if _, err := New().Fit(dctx, data, fitters.Settings{Components: 3}, nil); fitters.CodeOf(err) != fitters.DeadlineExceeded {
		t.Fatalf("deadline: %v", err)
	}
}

func TestProgressAndReport(t *testing.T) {
	data, _ := pumpTruth(2).sample(500, 71)
	var evs []fitters.Progress
	res, err := New().Fit(context.Background(), data, fitters.Settings{Components: 3, Restarts: 1, Seed: 8}, func(p fitters.Progress) { evs = append(evs, p) })
	if err != nil {
		t.Fatal(err)
	}
	r := res.Report
	if len(evs) != r.Iterations+1 || len(r.History) != r.Iterations+1 {
		t.Fatalf("%d events, %d history, %d iterations", len(evs), len(r.History), r.Iterations)
	}
	for i, e := range evs {
		if e.Iteration != i || e.Components != 3 || e.Restart != 0 || e.Objective != r.History[i] {
			t.Fatalf("event %d: %+v (history %v)", i, e, r.History[i])
		}
	}
	if r.Objective != "log_likelihood" || !r.Converged {
		t.Fatalf("report %+v", r)
	}
	m := checkParams(t, res.Params)
	ll, _ := m.LogLikelihood(data.Values, nil)
	if ll != r.LogLikelihood || math.Abs(ll-r.History[len(r.History)-1]) > 1e-9*math.Abs(ll) {
		t.Fatalf("report log-likelihood %v, model %v, last history %v", r.LogLikelihood, ll, r.History[len(r.History)-1])
	}
	if r.BIC != m.BIC(ll, 500) || r.AIC != m.AIC(ll) {
		t.Fatalf("criteria %v %v", r.BIC, r.AIC)
	}
	want := map[string]string{
		"family": "gaussian", "structure": "full", "components": "3", "seed": "8",
		"max_iterations": "1000", "tolerance": "1e-08", "restarts": "1", "start": "kmeans++",
		optMinRows: "3",
	}
	for k, v := range want {
		if r.Settings[k] != v {
			t.Errorf("settings[%q] = %q, want %q", k, r.Settings[k], v)
		}
	}
	if r.Settings["ridge"] != "0" {
		t.Errorf("ridge echo %q, want 0 (Settings.Ridge zero means none)", r.Settings["ridge"])
	}
}

// TestDefaultRidge: with K=1 and a full covariance the fit is the data's
// maximum-likelihood covariance plus the default ridge, 1e-6 × each
// feature's variance on the diagonal.
func TestDefaultRidge(t *testing.T) {
	data := testkit.Faithful(t)
	res, err := New().Fit(context.Background(), data, fitters.Settings{Components: 1, Ridge: -1}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if e := res.Report.Settings["ridge"]; !strings.HasPrefix(e, "1e-06 x feature variance = ") {
		t.Fatalf("ridge echo %q", e)
	}
	s := sampleCov(data)
	n := float64(data.Rows)
	for j := 0; j < 2; j++ {
		for l := 0; l < 2; l++ {
			want := s[j*2+l] * (n - 1) / n
			if j == l {
				want *= 1 + DefaultRidgeFraction
			}
			if got := res.Params.Components[0].Cov[j*2+l]; math.Abs(got-want) > 1e-12*math.Abs(want) {
				t.Fatalf("cov[%d][%d] = %.15g, want %.15g", j, l, got, want)
			}
		}
	}
}

// TestWeightsAreFrequencies: integer row weights give the same fit as
// repeating each row that many times (from the same start).
func TestWeightsAreFrequencies(t *testing.T) {
	base, _ := pumpTruth(2).sample(300, 81)
	w := make([]float64, base.Rows)
	var rep fitters.Data
	rep.Cols = 2
	for i := range w {
		w[i] = float64(i % 4) // includes zero weights
		for c := 0; c < int(w[i]); c++ {
			rep.Values = append(rep.Values, base.Values[2*i:2*i+2]...)
			rep.Rows++
		}
	}
	base.Weights = w
	start := pumpTruth(2).params(mixture.Full)
	// A fixed number of iterations, so both runs take exactly the same steps.
	set := fitters.Settings{Start: &start, Ridge: 0, Tolerance: 1e-300, MaxIterations: 100}
	a, err := New().Fit(context.Background(), base, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	b, err := New().Fit(context.Background(), rep, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(a.Report.LogLikelihood-b.Report.LogLikelihood) > 1e-9*math.Abs(b.Report.LogLikelihood) {
		t.Fatalf("log-likelihood %v vs %v", a.Report.LogLikelihood, b.Report.LogLikelihood)
	}
	if math.Abs(a.Report.BIC-b.Report.BIC) > 1e-9*math.Abs(b.Report.BIC) {
		t.Fatalf("BIC %v vs %v", a.Report.BIC, b.Report.BIC)
	}
	for k := range a.Params.Components {
		ca, cb := a.Params.Components[k], b.Params.Components[k]
		all := [][2]float64{{ca.Weight, cb.Weight}}
		for j := range ca.Mean {
			all = append(all, [2]float64{ca.Mean[j], cb.Mean[j]})
		}
		for j := range ca.Cov {
			all = append(all, [2]float64{ca.Cov[j], cb.Cov[j]})
		}
		for _, p := range all {
			if math.Abs(p[0]-p[1]) > 1e-10*math.Max(1, math.Abs(p[1])) {
				t.Fatalf("component %d differs: %+v vs %+v", k, ca, cb)
			}
		}
	}
}

// TestLabelsStart: a labels start begins at the labelled groups' weights,
// means and covariances (plus ridge).
func TestLabelsStart(t *testing.T) {
	data, labels := pumpTruth(2).sample(900, 91)
	res, err := New().Fit(context.Background(), data, fitters.Settings{Labels: labels, MaxIterations: NoIterations, Ridge: 0, Structure: mixture.Diagonal}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Params.Components) != 3 || res.Report.Settings["start"] != "labels" {
		t.Fatalf("K=%d start %q", len(res.Params.Components), res.Report.Settings["start"])
	}
	for k := 0; k < 3; k++ {
		var n, s0, s1, v0 float64
		for i, l := range labels {
			if l == k {
				n++
				s0 += data.Values[2*i]
				s1 += data.Values[2*i+1]
			}
		}
		m0 := s0 / n
		for i, l := range labels {
			if l == k {
				v0 += (data.Values[2*i] - m0) * (data.Values[2*i] - m0)
			}
		}
		c := res.Params.Components[k]
		if math.Abs(c.Weight-n/900) > 1e-12 || math.Abs(c.Mean[0]-m0) > 1e-9 || math.Abs(c.Mean[1]-s1/n) > 1e-9 ||
			math.Abs(c.Cov[0]-v0/n) > 1e-9*v0/n || c.Cov[1] != 0 {
			t.Fatalf("component %d: %+v; want weight %v mean (%v, %v) var %v", k, c, n/900, m0, s1/n, v0/n)
		}
	}
	full, err := New().Fit(context.Background(), data, fitters.Settings{Labels: labels}, nil)
	if err != nil || !full.Report.Converged {
		t.Fatalf("fit from labels: %v", err)
	}
}

// TestCollapseReseeds: a component that explains no row is re-seeded at the
// worst-explained row (lowest mixture log-density under the current
// parameters) and the event is noted; a component whose covariance becomes
// singular is re-seeded too. The result is always a valid model.
func TestCollapseReseeds(t *testing.T) {
	data, _ := pumpTruth(2).sample(400, 101)
	start := pumpTruth(2).params(mixture.Full)
	// Component 2 sits far from every row with a tiny weight: no row
	// gives it any responsibility.
	start.Components[2].Mean = []float64{5000, 5000}
	start.Components[2].Weight = 1e-3
	start.Components[1].Weight = 0.5 - 1e-3 + 0.2
	sm, err := mixture.New(start)
	if err != nil {
		t.Fatal(err)
	}
	ld := make([]float64, data.Rows)
	if err := sm.LogDensity(data.Values, ld); err != nil {
		t.Fatal(err)
	}
	worst := 0
	for i, v := range ld {
		if v < ld[worst] {
			worst = i
		}
	}
	res, err := New().Fit(context.Background(), data, fitters.Settings{Start: &start, Ridge: 0}, nil)
	if err != nil {
		t.Fatal(err)
	}
	want := fmt.Sprintf("component 2 collapsed at iteration 1 (0 effective rows, below the minimum 3) and was re-seeded at row %d", worst)
	if len(res.Report.Notes) == 0 || res.Report.Notes[0] != want {
		t.Fatalf("notes %q, want first %q", res.Report.Notes, want)
	}
	checkParams(t, res.Params)

	// Singular covariance: two identical far rows claimed by one component,
	// with the count threshold lowered so only the factorisation fails.
	blob, _ := pumpTruth(2).sample(300, 102)
	blob.Values = append(blob.Values, 400, 100, 400, 100)
	blob.Rows += 2
	two := mixture.Params{Dim: 2, Family: mixture.Gaussian, Structure: mixture.Full, Components: []mixture.Component{
		{Weight: 0.9, Mean: []float64{100, 30}, Cov: []float64{2000, 0, 0, 150}},
		{Weight: 0.1, Mean: []float64{400, 100}, Cov: []float64{1, 0, 0, 1}},
	}}
	res, err = New().Fit(context.Background(), blob, fitters.Settings{Start: &two, Ridge: 0, Options: map[string]string{optMinRows: "0.5"}, MaxIterations: 50}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Report.Notes) == 0 || !strings.Contains(res.Report.Notes[0], "component 1 collapsed at iteration 1 (") ||
		!strings.Contains(res.Report.Notes[0], "variance") {
		t.Fatalf("notes %q", res.Report.Notes)
	}
	checkParams(t, res.Params)
}

func TestOptions(t *testing.T) {
	data, _ := pumpTruth(2).sample(300, 111)
	res, err := New().Fit(context.Background(), data, fitters.Settings{Components: 2, Options: map[string]string{optMinRows: " 7.5 "}}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if res.Report.Settings[optMinRows] != "7.5" {
		t.Fatalf("echo %q", res.Report.Settings[optMinRows])
	}
}

func TestBadInput(t *testing.T) {
	good, _ := pumpTruth(2).sample(50, 121)
	start := pumpTruth(2).params(mixture.Full)
	start3 := pumpTruth(3).params(mixture.Full)
	withVal := func(i int, v float64) fitters.Data {
		d := good
		d.Values = slices.Clone(good.Values)
		d.Values[i] = v
		return d
	}
	withW := func(w []float64) fitters.Data { d := good; d.Weights = w; return d }
	ones := func(n int) []float64 {
		w := make([]float64, n)
		for i := range w {
			w[i] = 1
		}
		return w
	}
	constCol := good
	constCol.Values = slices.Clone(good.Values)
	for i := 0; i < good.Rows; i++ {
		constCol.Values[2*i+1] = 3.25
	}
	dup := fitters.Data{Rows: 6, Cols: 2, Values: []float64{1, 2, 1, 2, 1, 2, 3, 4, 3, 4, -0.0, 5}}
	dup.Values[11] = 5
	collinear := fitters.Data{Rows: 5, Cols: 2, Values: []float64{1, 2, 2, 4, 3, 6, 4, 8, 5, 10}}
	badW := ones(good.Rows)
	badW[7] = -1
	nanW := ones(good.Rows)
	nanW[9] = math.NaN()
	zeroW := make([]float64, good.Rows)
	labels := make([]int, good.Rows)
	badLabels := make([]int, good.Rows)
	badLabels[4] = 3
	emptyLabels := make([]int, good.Rows) // all 0, but K=2 asked

	cases := []struct {
		name string
		data fitters.Data
		set  fitters.Settings
		code fitters.Code
		want string
	}{
		{"no rows", fitters.Data{Cols: 2}, fitters.Settings{Components: 1}, fitters.InvalidArgument, "no rows"},
		{"no cols", fitters.Data{Rows: 2}, fitters.Settings{Components: 1}, fitters.InvalidArgument, "no columns"},
		{"short values", fitters.Data{Rows: 3, Cols: 2, Values: []float64{1, 2, 3}}, fitters.Settings{Components: 1}, fitters.InvalidArgument, "3 values for 3 rows x 2 columns"},
		{"nan", withVal(2*17+1, math.NaN()), fitters.Settings{Components: 1}, fitters.InvalidArgument, "row 17 column 1 is NaN"},
		{"inf", withVal(2*3, math.Inf(-1)), fitters.Settings{Components: 1}, fitters.InvalidArgument, "row 3 column 0 is -Inf"},
		{"huge", withVal(2*5, 1e200), fitters.Settings{Components: 1}, fitters.InvalidArgument, "row 5 column 0"},
		{"k zero", good, fitters.Settings{}, fitters.InvalidArgument, "components 0 must be at least 1"},
		{"k negative", good, fitters.Settings{Components: -2}, fitters.InvalidArgument, "components -2"},
		{"k above distinct", dup, fitters.Settings{Components: 4}, fitters.FailedPrecondition, "only 3 distinct rows"},
		{"max k above distinct", dup, fitters.Settings{MaxComponents: 5}, fitters.FailedPrecondition, "only 3 distinct rows"},
		{"constant column", constCol, fitters.Settings{Components: 1}, fitters.FailedPrecondition, "column 1 is constant"},
		{"collinear no ridge", collinear, fitters.Settings{Components: 1, Ridge: 0}, fitters.FailedPrecondition, "linearly dependent"},
		{"start dim", good, fitters.Settings{Start: &start3}, fitters.InvalidArgument, "start: dim 3 differs from the data's 2 columns"},
		{"start k mismatch", good, fitters.Settings{Start: &start, Components: 2}, fitters.InvalidArgument, "start has 3 components"},
		{"start structure", good, fitters.Settings{Start: &start, Structure: mixture.Diagonal}, fitters.InvalidArgument, "start: structure full differs"},
		{"start and labels", good, fitters.Settings{Start: &start, Labels: labels}, fitters.InvalidArgument, "both set"},
		{"labels length", good, fitters.Settings{Components: 2, Labels: labels[:10]}, fitters.InvalidArgument, "10 labels for 50 rows"},
		{"labels range", good, fitters.Settings{Components: 2, Labels: badLabels}, fitters.InvalidArgument, "row 4 has label 3, want 0..1"},
		{"labels empty component", good, fitters.Settings{Components: 2, Labels: emptyLabels}, fitters.InvalidArgument, "component 1 has no rows"},
		{"weights length", withW(ones(3)), fitters.Settings{Components: 1}, fitters.InvalidArgument, "3 weights for 50 rows"},
		{"negative weight", withW(badW), fitters.Settings{Components: 1}, fitters.InvalidArgument, "row 7 has weight -1"},
		{"nan weight", withW(nanW), fitters.Settings{Components: 1}, fitters.InvalidArgument, "row 9 has weight NaN"},
		{"zero weights", withW(zeroW), fitters.Settings{Components: 1}, fitters.InvalidArgument, "every weight is zero"},
		{"student t", good, fitters.Settings{Components: 1, Family: mixture.StudentT}, fitters.Unimplemented, "student_t"},
		{"bad family", good, fitters.Settings{Components: 1, Family: 9}, fitters.InvalidArgument, "family 9"},
		{"bad structure", good, fitters.Settings{Components: 1, Structure: 9}, fitters.InvalidArgument, "structure 9"},
		{"bad criterion", good, fitters.Settings{MaxComponents: 2, Criterion: 7}, fitters.InvalidArgument, "criterion 7"},
		{"min above max", good, fitters.Settings{MinComponents: 3, MaxComponents: 2}, fitters.InvalidArgument, "min components 3 exceeds max components 2"},
		{"selection with start", good, fitters.Settings{MaxComponents: 3, Start: &start}, fitters.InvalidArgument, "fix K"},
		{"iterations", good, fitters.Settings{Components: 1, MaxIterations: -2}, fitters.InvalidArgument, "max iterations -2"},
		{"tolerance", good, fitters.Settings{Components: 1, Tolerance: math.NaN()}, fitters.InvalidArgument, "tolerance"},
		{"restarts", good, fitters.Settings{Components: 1, Restarts: -1}, fitters.InvalidArgument, "restarts -1"},
		{"ridge", good, fitters.Settings{Components: 1, Ridge: math.Inf(1)}, fitters.InvalidArgument, "ridge"},
		{"unknown option", good, fitters.Settings{Components: 1, Options: map[string]string{"speed": "fast"}}, fitters.InvalidArgument, `option "speed"`},
		{"bad option value", good, fitters.Settings{Components: 1, Options: map[string]string{optMinRows: "-1"}}, fitters.InvalidArgument, `option "min_component_rows"`},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			res, err := New().Fit(context.Background(), c.data, c.set, nil)
			if err == nil {
				t.Fatalf("no error; result %+v", res)
			}
			if got := fitters.CodeOf(err); got != c.code {
				t.Fatalf("code %d, want %d: %v", got, c.code, err)
			}
			if !strings.Contains(err.Error(), c.want) {
				t.Fatalf("error %q does not contain %q", err, c.want)
			}
		})
	}
}

// TestInputUnchanged: a fit never writes to the caller's data, weights,
// labels or start.
func TestInputUnchanged(t *testing.T) {
	data, labels := pumpTruth(2).sample(400, 131)
	data.Weights = make([]float64, data.Rows)
	for i := range data.Weights {
		data.Weights[i] = float64(1 + i%2)
	}
	vals, ws, ls := slices.Clone(data.Values), slices.Clone(data.Weights), slices.Clone(labels)
	start := pumpTruth(2).params(mixture.Full)
	startCopy := start.Clone()
	for _, set := range []fitters.Settings{{Labels: labels}, {Start: &start}, {Components: 2}} {
		if _, err := New().Fit(context.Background(), data, set, nil); err != nil {
			t.Fatal(err)
		}
	}
	if !slices.Equal(vals, data.Values) || !slices.Equal(ws, data.Weights) || !slices.Equal(ls, labels) || !reflect.DeepEqual(start, startCopy) {
		t.Fatal("input modified")
	}
}
