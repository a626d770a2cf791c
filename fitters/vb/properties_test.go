package vb

import (
	"context"
	"fmt"
	"math"
	"testing"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/em"
	"github.com/mixd-dev/mixd/fitters/mixture"

	"github.com/mixd-dev/mixd/fitters/internal/testkit"
)

// threeBlobs is a known 3-component model in two dimensions.
var threeBlobs = []blob{
	{weight: 0.5, mean: []float64{0, 0}, sd: []float64{1, 0.6}, rho: 0.5},
	{weight: 0.3, mean: []float64{7, 2}, sd: []float64{0.8, 1.2}, rho: -0.3},
	{weight: 0.2, mean: []float64{2, 8}, sd: []float64{1.1, 0.7}, rho: 0},
}

// TestBoundNeverDecreases checks, at every iteration, that the bound does not
// fall by more than a relative 1e-10 (coordinate ascent on the bound is
// monotone: Bishop 2006, section 10.2.4), on several data sets and settings.
func TestBoundNeverDecreases(t *testing.T) {
	faithful := testkit.Faithful(t)
	blobs, _ := generate(1500, 3, threeBlobs)
	five, _ := generate(800, 9, []blob{
		{weight: 0.2, mean: []float64{0, 0, 0}, sd: []float64{1, 1, 1}, rho: 0.4},
		{weight: 0.2, mean: []float64{5, 0, 1}, sd: []float64{1, 2, 1}},
		{weight: 0.2, mean: []float64{0, 6, 2}, sd: []float64{0.5, 1, 3}, rho: -0.6},
		{weight: 0.2, mean: []float64{4, 4, 4}, sd: []float64{1, 1, 0.2}},
		{weight: 0.2, mean: []float64{-4, 3, 0}, sd: []float64{2, 0.3, 1}},
	})
	weighted := blobs
	weighted.Weights = make([]float64, blobs.Rows)
	for i := range weighted.Weights {
		weighted.Weights[i] = float64(i%3) * 0.75
	}
	type tc struct {
		name string
		data fitters.Data
		s    fitters.Settings
	}
	var cases []tc
	for _, st := range []mixture.Structure{mixture.Full, mixture.Tied, mixture.Diagonal, mixture.Spherical} {
		for _, wp := range []string{"dirichlet", "stick_breaking"} {
			opts := map[string]string{OptWeightPrior: wp, OptServedModel: ServePlugin}
			cases = append(cases,
				tc{fmt.Sprintf("faithful/%s/%s/K6", st, wp), faithful, fitters.Settings{Components: 6, Structure: st, Seed: 1, Options: opts}},
				tc{fmt.Sprintf("blobs/%s/%s/K10", st, wp), blobs, fitters.Settings{Components: 10, Structure: st, Seed: 2, Restarts: 1, Options: opts}},
				tc{fmt.Sprintf("five3d/%s/%s/K8", st, wp), five, fitters.Settings{Components: 8, Structure: st, Seed: 3, Options: opts}},
			)
		}
	}
	cases = append(cases,
		tc{"weighted/full/K5", weighted, fitters.Settings{Components: 5, Seed: 4}},
		tc{"faithful/small-concentration", faithful, fitters.Settings{Components: 8, Seed: 5, Options: map[string]string{OptConcentration: "1e-4"}}},
		tc{"faithful/strong-prior", faithful, fitters.Settings{Components: 4, Seed: 6, Options: map[string]string{
			OptMeanStrength: "50", OptWishartDOF: "30", OptPriorMean: "3,70", OptInverseScale: "30,0,0,3000"}}},
		tc{"faithful/ridge", faithful, fitters.Settings{Components: 3, Seed: 7, Ridge: 0.5}},
		tc{"faithful/labels", faithful, fitters.Settings{Components: 4, Labels: faithfulLabels(t, faithful, "row_mod_4")}},
	)
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			var seen []float64
			var restart int
			res, err := New().Fit(context.Background(), c.data, c.s, func(p fitters.Progress) {
				if p.Restart != restart {
					restart, seen = p.Restart, nil
				}
				if p.Iteration != len(seen)+1 {
					t.Errorf("restart %d: progress iteration %d, want %d", p.Restart, p.Iteration, len(seen)+1)
				}
				if n := len(seen); n > 0 && p.Objective < seen[n-1]-1e-10*math.Abs(seen[n-1]) {
					t.Errorf("restart %d iteration %d: bound fell from %.15g to %.15g", p.Restart, p.Iteration, seen[n-1], p.Objective)
				}
				seen = append(seen, p.Objective)
			})
			if err != nil {
				t.Fatal(err)
			}
			h := res.Report.History
			if len(h) == 0 || len(h) != res.Report.Iterations || h[len(h)-1] != res.Report.Bound {
				t.Fatalf("history of %d values, %d iterations, bound %v", len(h), res.Report.Iterations, res.Report.Bound)
			}
			for i := 1; i < len(h); i++ {
				if h[i] < h[i-1]-1e-10*math.Abs(h[i-1]) {
					t.Errorf("history: bound fell from %.15g to %.15g at iteration %d", h[i-1], h[i], i+1)
				}
			}
		})
	}
}

// TestBoundNeverDecreasesFromStart also includes the bound of the initial
// update (from the starting responsibilities) in the sequence.
func TestBoundNeverDecreasesFromStart(t *testing.T) {
	data, _ := generate(900, 11, threeBlobs)
	for _, st := range []mixture.Structure{mixture.Full, mixture.Tied, mixture.Diagonal, mixture.Spherical} {
		p, err := newProblem(data)
		if err != nil {
			t.Fatal(err)
		}
		cfg, err := resolve(data, fitters.Settings{Components: 7, Structure: st, Options: map[string]string{OptServedModel: ServePlugin}}, p)
		if err != nil {
			t.Fatal(err)
		}
		pr, err := cfg.priorFor(p, 7)
		if err != nil {
			t.Fatal(err)
		}
		e := newEngine(p, pr, st, 7)
		labels := make([]int, data.Rows)
		for i := range labels {
			labels[i] = (i * 7919) % 7
		}
		if err := e.oneHot(labels); err != nil {
			t.Fatal(err)
		}
		q, s := newPosterior(7, 2, st, dirichlet), newStats(7, 2, st)
		scr := make([]float64, 16)
		e.accumulate(s)
		if err := e.mstep(s, q); err != nil {
			t.Fatal(err)
		}
		prev := e.bound(s, q, scr)
		for it := 1; it <= 300; it++ {
			if err := e.estep(q, s); err != nil {
				t.Fatal(err)
			}
			// The bound after the E-step alone (new responsibilities, old q)
			// must not be below the previous one either.
			mid := e.bound(s, q, scr)
			if err := e.mstep(s, q); err != nil {
				t.Fatal(err)
			}
			b := e.bound(s, q, scr)
			if mid < prev-1e-10*math.Abs(prev) || b < mid-1e-10*math.Abs(mid) {
				t.Fatalf("%s iteration %d: bound %.15g -> %.15g (after responsibilities) -> %.15g", st, it, prev, mid, b)
			}
			prev = b
		}
	}
}

// matchMeans returns the smallest, over assignments of the wanted means to
// distinct fitted means, of the largest Euclidean distance between a pair.
func matchMeans(got, want [][]float64) float64 {
	best := math.Inf(1)
	var rec func(i int, used []bool, worst float64)
	rec = func(i int, used []bool, worst float64) {
		if worst >= best {
			return
		}
		if i == len(want) {
			best = worst
			return
		}
		for j := range got {
			if used[j] {
				continue
			}
			var d float64
			for a := range want[i] {
				d += (got[j][a] - want[i][a]) * (got[j][a] - want[i][a])
			}
			used[j] = true
			rec(i+1, used, math.Max(worst, math.Sqrt(d)))
			used[j] = false
		}
	}
	rec(0, make([]bool, len(got)), 0)
	return best
}

// TestRecoversThreeOfTen: rows drawn from a known 3-component model, fitted
// with K = 10 and a small concentration, leave exactly 3 effective components
// whose means match the true ones (matched by an assignment) within 0.15,
// about five standard errors of a mean at these component sizes.
func TestRecoversThreeOfTen(t *testing.T) {
	want := [][]float64{threeBlobs[0].mean, threeBlobs[1].mean, threeBlobs[2].mean}
	elongated, _ := generate(3000, 21, threeBlobs)
	// A spherical model needs round components: the same means, equal
	// standard deviations on both axes.
	round := make([]blob, len(threeBlobs))
	for i, b := range threeBlobs {
		round[i] = blob{weight: b.weight, mean: b.mean, sd: []float64{0.9, 0.9}}
	}
	spherical, _ := generate(3000, 22, round)
	for _, wp := range []string{"dirichlet", "stick_breaking"} {
		for _, st := range []mixture.Structure{mixture.Full, mixture.Spherical} {
			t.Run(wp+"/"+st.String(), func(t *testing.T) {
				data := elongated
				if st == mixture.Spherical {
					data = spherical
				}
				res, post, err := New().FitPosterior(context.Background(), data, fitters.Settings{
					Components: 10, Structure: st, Seed: 5, Restarts: 1,
					Options: map[string]string{OptWeightPrior: wp, OptConcentration: "0.001"},
				}, nil)
				if err != nil {
					t.Fatal(err)
				}
				if res.Report.EffectiveComponents != 3 {
					t.Fatalf("effective components %d, want 3 (expected rows %v)", res.Report.EffectiveComponents, post.ExpectedRows)
				}
				var got [][]float64
				for k, n := range post.ExpectedRows {
					if n >= 3 {
						got = append(got, post.Means[k])
					}
				}
				if d := matchMeans(got, want); d > 0.15 {
					t.Errorf("means %v differ from %v by up to %.3g", got, want, d)
				}
				var wsum float64
				for _, c := range res.Params.Components {
					wsum += c.Weight
				}
				if math.Abs(wsum-1) > 1e-12 {
					t.Errorf("served weights sum to %.17g", wsum)
				}
				if st == mixture.Full && res.Params.Family != mixture.StudentT {
					t.Errorf("served family %s, want student_t", res.Params.Family)
				}
			})
		}
	}
}

// simpson returns the composite Simpson weights for n (even) intervals on [a, b].
func simpson(a, b float64, n int) (xs, ws []float64) {
	h := (b - a) / float64(n)
	for i := 0; i <= n; i++ {
		w := 2.0
		switch {
		case i == 0 || i == n:
			w = 1
		case i%2 == 1:
			w = 4
		}
		xs = append(xs, a+float64(i)*h)
		ws = append(ws, w*h/3)
	}
	return xs, ws
}

// TestPredictiveIntegratesToOne integrates the served predictive density over
// the whole line or plane by quadrature after the change of variables
// x = c + s·tan θ (which maps ℝ onto (−π/2, π/2) and keeps the Cauchy-like
// tails of nearly empty components integrable); composite Simpson rule.
// Tolerances: 1e-7 in 1-D (20 000 intervals), 1e-5 in 2-D (800×800).
func TestPredictiveIntegratesToOne(t *testing.T) {
	ctx := context.Background()
	t.Run("1d", func(t *testing.T) {
		data, _ := generate(600, 31, []blob{
			{weight: 0.6, mean: []float64{0}, sd: []float64{1}},
			{weight: 0.4, mean: []float64{6}, sd: []float64{0.5}},
		})
		for _, st := range []mixture.Structure{mixture.Full, mixture.Spherical} {
			res, err := New().Fit(ctx, data, fitters.Settings{Components: 5, Structure: st, Seed: 1}, nil)
			if err != nil {
				t.Fatal(err)
			}
			m, err := mixture.New(res.Params)
			if err != nil {
				t.Fatal(err)
			}
			const c, s = 3.0, 3.0
			th, w := simpson(-math.Pi/2, math.Pi/2, 20000)
			th, w = th[1:len(th)-1], w[1:len(w)-1] // the ends contribute 0 or a finite limit of measure zero
			x := make([]float64, len(th))
			for i, v := range th {
				x[i] = c + s*math.Tan(v)
			}
			ld := make([]float64, len(x))
			if err := m.LogDensity(x, ld); err != nil {
				t.Fatal(err)
			}
			var sum float64
			for i, v := range th {
				sec := 1 / math.Cos(v)
				sum += w[i] * math.Exp(ld[i]) * s * sec * sec
			}
			if math.Abs(sum-1) > 1e-7 {
				t.Errorf("%s: integral %.12g, want 1 within 1e-7", st, sum)
			}
		}
	})
	t.Run("2d", func(t *testing.T) {
		data, _ := generate(1200, 33, threeBlobs)
		for _, st := range []mixture.Structure{mixture.Full, mixture.Spherical} {
			// Six prior degrees of freedom keep every component's tails light
			// enough for the product rule.
			res, err := New().Fit(ctx, data, fitters.Settings{Components: 4, Structure: st, Seed: 2,
				Options: map[string]string{OptWishartDOF: "6"}}, nil)
			if err != nil {
				t.Fatal(err)
			}
			m, err := mixture.New(res.Params)
			if err != nil {
				t.Fatal(err)
			}
			const n = 800
			c := [2]float64{3, 3}
			s := [2]float64{4, 4}
			th, w := simpson(-math.Pi/2, math.Pi/2, n)
			th, w = th[1:n], w[1:n]
			x := make([]float64, 0, 2*len(th)*len(th))
			for _, a := range th {
				for _, b := range th {
					x = append(x, c[0]+s[0]*math.Tan(a), c[1]+s[1]*math.Tan(b))
				}
			}
			ld := make([]float64, len(x)/2)
			if err := m.LogDensity(x, ld); err != nil {
				t.Fatal(err)
			}
			var sum float64
			for i, a := range th {
				sa := 1 / math.Cos(a)
				for j, b := range th {
					sb := 1 / math.Cos(b)
					sum += w[i] * w[j] * math.Exp(ld[i*len(th)+j]) * s[0] * s[1] * sa * sa * sb * sb
				}
			}
			if math.Abs(sum-1) > 1e-5 {
				t.Errorf("%s: integral %.10g, want 1 within 1e-5", st, sum)
			}
		}
	})
}

// TestWeakPriorApproachesEM: with a very weak prior and many rows, the plug-in
// means and covariances equal the maximum-likelihood (EM) estimates from the
// same start up to terms of order (prior strength)/N_k.
func TestWeakPriorApproachesEM(t *testing.T) {
	ctx := context.Background()
	data, truth := generate(20000, 41, threeBlobs)
	for _, st := range []mixture.Structure{mixture.Full, mixture.Tied, mixture.Diagonal, mixture.Spherical} {
		t.Run(st.String(), func(t *testing.T) {
			ref, err := em.New().Fit(ctx, data, fitters.Settings{Structure: st, Labels: truth, Tolerance: 1e-12, Ridge: 0}, nil)
			if err != nil {
				t.Fatal(err)
			}
			is := "1e-6,0,0,1e-6"
			if !matrixPrecision(st) {
				is = "1e-6,1e-6"
				if st == mixture.Spherical {
					is = "1e-6"
				}
			}
			dof := "1.000001"
			if !matrixPrecision(st) {
				dof = "1e-6"
			}
			res, err := New().Fit(ctx, data, fitters.Settings{Structure: st, Labels: truth, Tolerance: 1e-13,
				Options: map[string]string{OptMeanStrength: "1e-6", OptWishartDOF: dof, OptInverseScale: is,
					OptConcentration: "1", OptServedModel: ServePlugin}}, nil)
			if err != nil {
				t.Fatal(err)
			}
			if len(res.Params.Components) != len(ref.Params.Components) {
				t.Fatalf("%d components, em has %d", len(res.Params.Components), len(ref.Params.Components))
			}
			for k, c := range res.Params.Components {
				r := ref.Params.Components[k]
				if math.Abs(c.Weight-r.Weight) > 1e-3 {
					t.Errorf("component %d: weight %.6g, em %.6g", k, c.Weight, r.Weight)
				}
				for j := range c.Mean {
					sd := math.Sqrt(r.Cov[j*2+j])
					if math.Abs(c.Mean[j]-r.Mean[j]) > 1e-3*sd {
						t.Errorf("component %d: mean[%d] %.8g, em %.8g", k, j, c.Mean[j], r.Mean[j])
					}
				}
				for i := range c.Cov {
					a, b := i/2, i%2
					scale := math.Sqrt(r.Cov[a*2+a] * r.Cov[b*2+b])
					if math.Abs(c.Cov[i]-r.Cov[i]) > 2e-3*scale {
						t.Errorf("component %d: cov[%d] %.8g, em %.8g", k, i, c.Cov[i], r.Cov[i])
					}
				}
			}
		})
	}
}

// TestOneDimensionStructuresAgree: in one dimension the full, diagonal and
// spherical models are the same model, so their bounds and plug-in models agree.
func TestOneDimensionStructuresAgree(t *testing.T) {
	data, _ := generate(500, 51, []blob{
		{weight: 0.5, mean: []float64{0}, sd: []float64{1}},
		{weight: 0.5, mean: []float64{4}, sd: []float64{0.7}},
	})
	labels := make([]int, data.Rows)
	for i := range labels {
		if data.Values[i] > 2 {
			labels[i] = 1
		}
	}
	var first *fitters.Result
	for _, st := range []mixture.Structure{mixture.Full, mixture.Diagonal, mixture.Spherical} {
		res, err := New().Fit(context.Background(), data, fitters.Settings{Structure: st, Labels: labels, MaxIterations: 40,
			Options: map[string]string{OptServedModel: ServePlugin}}, nil)
		if err != nil {
			t.Fatal(err)
		}
		if first == nil {
			first = res
			continue
		}
		if !relClose(res.Report.Bound, first.Report.Bound, 1e-12, math.Abs(first.Report.Bound)) {
			t.Errorf("%s: bound %.15g, full %.15g", st, res.Report.Bound, first.Report.Bound)
		}
		for k, c := range res.Params.Components {
			f := first.Params.Components[k]
			if !relClose(c.Weight, f.Weight, 1e-10, 1) || !relClose(c.Mean[0], f.Mean[0], 1e-10, 5) || !relClose(c.Cov[0], f.Cov[0], 1e-10, f.Cov[0]) {
				t.Errorf("%s component %d: %+v, full %+v", st, k, c, f)
			}
		}
	}
}

// TestFrequencyWeightsActAsCopies: integer row weights give the same fit as
// repeating the rows.
func TestFrequencyWeightsActAsCopies(t *testing.T) {
	base, _ := generate(300, 61, threeBlobs)
	w := make([]float64, base.Rows)
	var rep []float64
	var labels, repLabels []int
	for i := range w {
		w[i] = float64(i % 3)
		l := i % 3
		if base.Values[2*i] > 4 {
			l = 1
		} else if base.Values[2*i+1] > 5 {
			l = 2
		} else {
			l = 0
		}
		labels = append(labels, l)
		for c := 0; c < int(w[i]); c++ {
			rep = append(rep, base.Row(i)...)
			repLabels = append(repLabels, l)
		}
	}
	weighted := base
	weighted.Weights = w
	copies := fitters.Data{Rows: len(rep) / 2, Cols: 2, Values: rep}
	s := fitters.Settings{MaxIterations: 30, Labels: labels}
	a, err := New().Fit(context.Background(), weighted, s, nil)
	if err != nil {
		t.Fatal(err)
	}
	s.Labels = repLabels
	b, err := New().Fit(context.Background(), copies, s, nil)
	if err != nil {
		t.Fatal(err)
	}
	if !relClose(a.Report.Bound, b.Report.Bound, 1e-10, math.Abs(b.Report.Bound)) {
		t.Errorf("bound %.15g with weights, %.15g with copies", a.Report.Bound, b.Report.Bound)
	}
	for k, c := range a.Params.Components {
		d := b.Params.Components[k]
		for j := range c.Mean {
			if !relClose(c.Mean[j], d.Mean[j], 1e-9, 10) {
				t.Errorf("component %d mean %v vs %v", k, c.Mean, d.Mean)
			}
		}
	}
}
