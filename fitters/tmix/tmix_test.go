package tmix

import (
	"context"
	"errors"
	"math"
	"reflect"
	"runtime"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

func TestDescribe(t *testing.T) {
	info, err := New().Describe(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	if info.Name != "tmix" || info.Version != Version || info.Description == "" {
		t.Fatalf("name %q version %q description %q", info.Name, info.Version, info.Description)
	}
	if !slices.Equal(info.Families, []mixture.Family{mixture.StudentT}) {
		t.Fatalf("families %v", info.Families)
	}
	if !slices.Equal(info.Structures, allStructures) {
		t.Fatalf("structures %v", info.Structures)
	}
	var names []string
	for _, o := range info.Options {
		if o.Description == "" || o.Default == "" {
			t.Errorf("option %q lacks a description or default", o.Name)
		}
		names = append(names, o.Name)
	}
	want := []string{optDF, optUpdate, optSharing, optDFStart, optDFFloor, optDFCap, optOutlier, optMinRows}
	if !slices.Equal(names, want) {
		t.Fatalf("options %v, want %v", names, want)
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := New().Describe(ctx); fitters.CodeOf(err) != fitters.Canceled {
		t.Fatalf("cancelled Describe: %v", err)
	}
}

// TestBadInput: every unusable input is an error with the right code whose
// message names the problem; nothing panics.
func TestBadInput(t *testing.T) {
	good, _ := sample(pumpModel(t, 2, []float64{4, 4, 4}), 200, 1)
	nan := good
	nan.Values = slices.Clone(good.Values)
	nan.Values[2*17+1] = math.NaN()
	inf := good
	inf.Values = slices.Clone(good.Values)
	inf.Values[2*5] = math.Inf(-1)
	huge := good
	huge.Values = slices.Clone(good.Values)
	huge.Values[3] = 1e200
	constCol := good
	constCol.Values = slices.Clone(good.Values)
	for i := 0; i < good.Rows; i++ {
		constCol.Values[2*i+1] = 7
	}
	dup := fitters.Data{Rows: 6, Cols: 2, Values: []float64{1, 2, 1, 2, 1, 2, 3, 4, 3, 4, 3, 4}}
	badW := good
	badW.Weights = make([]float64, good.Rows)
	badW.Weights[9] = -1
	zeroW := good
	zeroW.Weights = make([]float64, good.Rows)
	shortW := good
	shortW.Weights = []float64{1, 2}
	start3 := pumpModel(t, 3, []float64{4, 4, 4}).Params()
	start2 := pumpModel(t, 2, []float64{4, 4, 4}).Params()
	badStart := start2.Clone()
	badStart.Components[1].Weight = 0.9

	cases := []struct {
		name string
		data fitters.Data
		set  fitters.Settings
		code fitters.Code
		want string
	}{
		{"no rows", fitters.Data{Cols: 2}, fitters.Settings{Components: 1}, fitters.InvalidArgument, "no rows"},
		{"no columns", fitters.Data{Rows: 2}, fitters.Settings{Components: 1}, fitters.InvalidArgument, "no columns"},
		{"ragged", fitters.Data{Rows: 3, Cols: 2, Values: []float64{1, 2, 3, 4, 5}}, fitters.Settings{Components: 1}, fitters.InvalidArgument, "5 values for 3 rows x 2 columns"},
		{"NaN", nan, fitters.Settings{Components: 2}, fitters.InvalidArgument, "row 17 column 1 is NaN"},
		{"Inf", inf, fitters.Settings{Components: 2}, fitters.InvalidArgument, "row 5 column 0 is -Inf"},
		{"huge", huge, fitters.Settings{Components: 2}, fitters.InvalidArgument, "row 1 column 1 is 1e+200"},
		{"constant column", constCol, fitters.Settings{Components: 2}, fitters.FailedPrecondition, "column 1 is constant"},
		{"K above distinct rows", dup, fitters.Settings{Components: 3}, fitters.FailedPrecondition, "only 2 distinct rows"},
		{"K zero", good, fitters.Settings{}, fitters.InvalidArgument, "components: 0 must be at least 1"},
		{"K negative range", good, fitters.Settings{MaxComponents: -1}, fitters.InvalidArgument, "negative bound"},
		{"K range inverted", good, fitters.Settings{MinComponents: 4, MaxComponents: 2}, fitters.InvalidArgument, "min components 4 exceeds max components 2"},
		{"negative weight", badW, fitters.Settings{Components: 2}, fitters.InvalidArgument, "row 9 has weight -1"},
		{"zero weights", zeroW, fitters.Settings{Components: 2}, fitters.InvalidArgument, "every weight is zero"},
		{"weights length", shortW, fitters.Settings{Components: 2}, fitters.InvalidArgument, "2 weights for 200 rows"},
		{"gaussian family", good, fitters.Settings{Components: 2, Family: mixture.Gaussian}, fitters.Unimplemented, "family: gaussian is not supported"},
		{"unknown family", good, fitters.Settings{Components: 2, Family: 9}, fitters.InvalidArgument, "family: 9"},
		{"unknown structure", good, fitters.Settings{Components: 2, Structure: 9}, fitters.InvalidArgument, "structure: 9"},
		{"unknown criterion", good, fitters.Settings{MaxComponents: 3, Criterion: 7}, fitters.InvalidArgument, "criterion: 7"},
		{"negative iterations", good, fitters.Settings{Components: 2, MaxIterations: -2}, fitters.InvalidArgument, "max iterations: -2"},
		{"NaN tolerance", good, fitters.Settings{Components: 2, Tolerance: math.NaN()}, fitters.InvalidArgument, "tolerance: NaN"},
		{"negative restarts", good, fitters.Settings{Components: 2, Restarts: -1}, fitters.InvalidArgument, "restarts: -1"},
		{"Inf ridge", good, fitters.Settings{Components: 2, Ridge: math.Inf(1)}, fitters.InvalidArgument, "ridge: +Inf"},
		{"start and labels", good, fitters.Settings{Start: &start2, Labels: make([]int, 200)}, fitters.InvalidArgument, "start and labels are both set"},
		{"start dim", good, fitters.Settings{Start: &start3}, fitters.InvalidArgument, "start: dim 3 differs from the data's 2 columns"},
		{"start K", good, fitters.Settings{Components: 2, Start: &start2}, fitters.InvalidArgument, "components is 2 but start has 3"},
		{"start invalid", good, fitters.Settings{Start: &badStart}, fitters.InvalidArgument, "weights: sum to"},
		{"labels length", good, fitters.Settings{Labels: []int{0, 1}}, fitters.InvalidArgument, "labels: 2 labels for 200 rows"},
		{"labels range", good, fitters.Settings{Components: 2, Labels: append(make([]int, 199), 5)}, fitters.InvalidArgument, "row 199 has label 5, want 0..1"},
		{"labels empty component", good, fitters.Settings{Components: 3, Labels: make([]int, 200)}, fitters.InvalidArgument, "component 1 has no rows"},
		{"selection with start", good, fitters.Settings{MaxComponents: 3, Start: &start2}, fitters.InvalidArgument, "start or labels fix K"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			res, err := New().Fit(context.Background(), c.data, c.set, nil)
			if err == nil {
				t.Fatalf("no error; result %+v", res.Report)
			}
			if got := fitters.CodeOf(err); got != c.code {
				t.Errorf("code %v, want %v (%v)", got, c.code, err)
			}
			if !strings.Contains(err.Error(), c.want) {
				t.Errorf("error %q does not mention %q", err, c.want)
			}
		})
	}
}

// TestOptions: every option is validated and names itself in its error;
// accepted values show up in the report's settings.
func TestOptions(t *testing.T) {
	data, _ := sample(pumpModel(t, 2, []float64{4, 4, 4}), 300, 2)
	bad := []struct {
		opts map[string]string
		want string
	}{
		{map[string]string{"degrees": "3"}, `option "degrees" is not recognised`},
		{map[string]string{optDF: "0"}, `option "dof": value "0"`},
		{map[string]string{optDF: "-3"}, `option "dof": value "-3"`},
		{map[string]string{optDF: "Inf"}, `option "dof": value "Inf"`},
		{map[string]string{optDF: "lots"}, `option "dof": value "lots"`},
		{map[string]string{optUpdate: "newton"}, `option "dof_update": value "newton"`},
		{map[string]string{optSharing: "some"}, `option "dof_sharing": value "some"`},
		{map[string]string{optDFCap: "NaN"}, `option "dof_cap": value "NaN" is not a finite number`},
		{map[string]string{optDFCap: "1e9"}, `option "dof_cap": value "1e9" exceeds the limit 1e+08`},
		{map[string]string{optDFFloor: "0"}, `option "dof_floor": value "0" must be positive`},
		{map[string]string{optDFFloor: "50", optDFCap: "20"}, `option "dof_floor": floor 50 must be below the cap 20`},
		{map[string]string{optDFStart: "300"}, `option "dof_start": value 300 lies outside [0.5, 200]`},
		{map[string]string{optDF: "5", optUpdate: valECM}, `option "dof_update" applies only when "dof" is "estimate"`},
		{map[string]string{optDF: "5", optDFCap: "50"}, `option "dof_cap" applies only when "dof" is "estimate"`},
		{map[string]string{optOutlier: "1"}, `option "outlier_level": value "1" must lie strictly between 0 and 1`},
		{map[string]string{optOutlier: "0"}, `option "outlier_level": value "0"`},
		{map[string]string{optMinRows: "-2"}, `option "min_component_rows": value "-2"`},
	}
	for _, c := range bad {
		_, err := New().Fit(context.Background(), data, fitters.Settings{Components: 2, Options: c.opts}, nil)
		if fitters.CodeOf(err) != fitters.InvalidArgument || err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("options %v: error %v, want InvalidArgument containing %q", c.opts, err, c.want)
		}
	}
	good := []struct {
		opts map[string]string
		echo map[string]string
	}{
		{nil, map[string]string{optDF: valEstimate, optUpdate: valECME, optSharing: valShared, optDFStart: "10", optDFFloor: "0.5", optDFCap: "200", optOutlier: "0.999"}},
		{map[string]string{optDF: " 7 "}, map[string]string{optDF: "7", optOutlier: "0.999"}},
		{map[string]string{optUpdate: valECM, optSharing: valPerComp, optDFCap: "40", optDFFloor: "2", optDFStart: "3", optOutlier: "0.99"},
			map[string]string{optUpdate: valECM, optSharing: valPerComp, optDFCap: "40", optDFFloor: "2", optDFStart: "3", optOutlier: "0.99"}},
		{map[string]string{optDFCap: "5"}, map[string]string{optDFStart: "5", optDFCap: "5"}},
	}
	for _, c := range good {
		res, err := New().Fit(context.Background(), data, fitters.Settings{Components: 2, Seed: 3, Options: c.opts}, nil)
		if err != nil {
			t.Fatalf("options %v: %v", c.opts, err)
		}
		for k, v := range c.echo {
			if got := res.Report.Settings[k]; got != v {
				t.Errorf("options %v: settings[%q] = %q, want %q", c.opts, k, got, v)
			}
		}
		if c.opts[optDF] != "" {
			if _, ok := res.Report.Settings[optUpdate]; ok {
				t.Errorf("fixed dof: settings echo %q", optUpdate)
			}
			for _, comp := range res.Params.Components {
				if comp.DF != 7 {
					t.Errorf("fixed dof 7: component df %v", comp.DF)
				}
			}
		}
		want := mixture.DefaultOutlierLevel
		if v := c.opts[optOutlier]; v != "" {
			want = 0.99
		}
		if res.Report.OutlierLevel != want {
			t.Errorf("options %v: outlier level %v, want %v", c.opts, res.Report.OutlierLevel, want)
		}
		for _, comp := range res.Params.Components {
			floor, cap := DefaultDFFloor, DefaultDFCap
			if v := c.opts[optDFCap]; v == "40" {
				floor, cap = 2, 40
			} else if v == "5" {
				cap = 5
			}
			if c.opts[optDF] == "" && (comp.DF < floor || comp.DF > cap) {
				t.Errorf("options %v: df %v outside [%v, %v]", c.opts, comp.DF, floor, cap)
			}
		}
	}
}

// TestInputUnchanged: a fit never writes to the caller's data, weights,
// start or labels.
func TestInputUnchanged(t *testing.T) {
	data, labels := sample(pumpModel(t, 3, []float64{3, 5, 9}), 500, 4)
	data.Weights = make([]float64, data.Rows)
	for i := range data.Weights {
		data.Weights[i] = 1 + float64(i%3)
	}
	start := pumpModel(t, 3, []float64{3, 5, 9}).Params()
	copies := []any{slices.Clone(data.Values), slices.Clone(data.Weights), start.Clone(), slices.Clone(labels)}
	for _, s := range []fitters.Settings{{Start: &start}, {Labels: labels}, {Components: 3}} {
		if _, err := New().Fit(context.Background(), data, s, nil); err != nil {
			t.Fatal(err)
		}
	}
	now := []any{data.Values, data.Weights, start, labels}
	for i := range now {
		if !reflect.DeepEqual(copies[i], now[i]) {
			t.Fatalf("input %d changed by the fit", i)
		}
	}
}

// TestDeterministicAcrossProcs: the same data, settings and seed give
// bit-identical results for any GOMAXPROCS (the data span several chunks).
func TestDeterministicAcrossProcs(t *testing.T) {
	data, _ := sample(pumpModel(t, 3, []float64{3, 6, 15}), 2*chunkRows+123, 5)
	for _, opts := range []map[string]string{nil, {optSharing: valPerComp}, {optUpdate: valECM}, {optDF: "4"}} {
		set := fitters.Settings{Components: 3, Seed: 99, Restarts: 2, MaxIterations: 12, Options: opts}
		var results []*fitters.Result
		for _, procs := range []int{1, 2, 3} {
			old := runtime.GOMAXPROCS(procs)
			res, err := New().Fit(context.Background(), data, set, nil)
			runtime.GOMAXPROCS(old)
			if err != nil {
				t.Fatal(err)
			}
			results = append(results, res)
		}
		for i := 1; i < len(results); i++ {
			if !reflect.DeepEqual(results[0].Params, results[i].Params) || !slices.Equal(results[0].Report.History, results[i].Report.History) {
				t.Fatalf("options %v: GOMAXPROCS changes the result", opts)
			}
		}
		// A different seed gives a different k-means++ start.
		set.Seed = 100
		other, err := New().Fit(context.Background(), data, set, nil)
		if err != nil {
			t.Fatal(err)
		}
		if slices.Equal(other.Report.History[:1], results[0].Report.History[:1]) {
			t.Errorf("options %v: seeds 99 and 100 start from the same log-likelihood", opts)
		}
	}
}

func TestCancellation(t *testing.T) {
	data, _ := sample(pumpModel(t, 3, []float64{3, 6, 15}), 5000, 6)
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := New().Fit(ctx, data, fitters.Settings{Components: 3}, nil); fitters.CodeOf(err) != fitters.Canceled {
		t.Fatalf("cancelled before start: %v", err)
	}
	ctx, cancel = context.WithTimeout(context.Background(), time.Nanosecond)
	defer cancel()
	time.Sleep(time.Millisecond)
	if _, err := New().Fit(ctx, data, fitters.Settings{Components: 3}, nil); fitters.CodeOf(err) != fitters.DeadlineExceeded {
		t.Fatalf("deadline passed: %v", err)
	}
	// Cancelled from the progress callback at iteration 3: the fit stops
	// at the next iteration with no result.
	ctx, cancel = context.WithCancel(context.Background())
	defer cancel()
	last := -1
	_, err := New().Fit(ctx, data, fitters.Settings{Components: 3, Tolerance: 1e-15, MaxIterations: 500}, func(p fitters.Progress) {
		last = p.Iteration
		if p.Iteration == 3 {
			cancel()
		}
	})
	if fitters.CodeOf(err) != fitters.Canceled || !errors.Is(err, context.Canceled) {
		t.Fatalf("cancelled during the fit: %v", err)
	}
	if last != 3 {
		t.Fatalf("progress continued to iteration %d after cancellation at 3", last)
	}
}

// TestProgressAndReport: progress events match the history; the report is
// complete and consistent with the returned parameters.
func TestProgressAndReport(t *testing.T) {
	m := pumpModel(t, 3, []float64{3, 6, 15})
	data, _ := sample(m, 2000, 7)
	var events []fitters.Progress
	res, err := New().Fit(context.Background(), data, fitters.Settings{Components: 3, Seed: 8, Restarts: 1}, func(p fitters.Progress) {
		events = append(events, p)
	})
	if err != nil {
		t.Fatal(err)
	}
	r := res.Report
	if len(events) != len(r.History) || len(r.History) != r.Iterations+1 {
		t.Fatalf("%d events, history %d, iterations %d", len(events), len(r.History), r.Iterations)
	}
	for i, e := range events {
		if e.Iteration != i || e.Objective != r.History[i] || e.Components != 3 || e.Restart != 0 {
			t.Fatalf("event %d: %+v (history %v)", i, e, r.History[i])
		}
	}
	if !r.Converged || r.Objective != "log_likelihood" {
		t.Fatalf("converged %v objective %q", r.Converged, r.Objective)
	}
	model, err := mixture.New(res.Params)
	if err != nil {
		t.Fatal(err)
	}
	ll, err := model.LogLikelihood(data.Values, nil)
	if err != nil {
		t.Fatal(err)
	}
	if ll != r.LogLikelihood || math.Abs(ll-r.History[len(r.History)-1]) > 1e-9*math.Abs(ll) {
		t.Fatalf("report log-likelihood %v, model %v, last history %v", r.LogLikelihood, ll, r.History[len(r.History)-1])
	}
	// BIC and AIC count one shared ν (the default): mixture's count minus K plus 1.
	np := float64(model.FreeParameters() - 3 + 1)
	if want := -2*ll + np*math.Log(2000); math.Abs(r.BIC-want) > 1e-9*math.Abs(want) {
		t.Fatalf("BIC %v, want %v", r.BIC, want)
	}
	if want := -2*ll + 2*np; math.Abs(r.AIC-want) > 1e-9*math.Abs(want) {
		t.Fatalf("AIC %v, want %v", r.AIC, want)
	}
	if res.Params.Family != mixture.StudentT || r.Settings["family"] != "student_t" || r.Settings["start"] != "kmeans++" {
		t.Fatalf("family %v settings %v", res.Params.Family, r.Settings)
	}
	if r.OutlierLevel != mixture.DefaultOutlierLevel {
		t.Fatalf("outlier level %v", r.OutlierLevel)
	}
	flags := make([]bool, data.Rows)
	if err := model.Outliers(data.Values, r.OutlierLevel, nil, flags); err != nil {
		t.Fatal(err)
	}
	n := 0
	for _, f := range flags {
		if f {
			n++
		}
	}
	if n != r.FlaggedRows {
		t.Fatalf("report flags %d rows, the shared rule %d", r.FlaggedRows, n)
	}
	last := r.Notes[len(r.Notes)-1]
	if !strings.Contains(last, "flagged at outlier level 0.999") || !strings.Contains(last, "not a diagnosis") {
		t.Fatalf("last note %q", last)
	}
}

// TestFreeParameters: BIC and AIC count K degrees of freedom when each
// component's is estimated, one when shared, none when fixed.
func TestFreeParameters(t *testing.T) {
	data, _ := sample(pumpModel(t, 2, []float64{3, 6, 15}), 600, 10)
	for _, c := range []struct {
		opts  map[string]string
		extra int
	}{{map[string]string{optSharing: valPerComp}, 3}, {nil, 1}, {map[string]string{optDF: "5"}, 0}} {
		res, err := New().Fit(context.Background(), data, fitters.Settings{Components: 3, Seed: 1, Options: c.opts}, nil)
		if err != nil {
			t.Fatal(err)
		}
		// Full structure, K = 3, D = 2: 2 weights + 6 means + 9 matrix entries.
		np := float64(17 + c.extra)
		ll := res.Report.LogLikelihood
		if want := -2*ll + np*math.Log(600); math.Abs(res.Report.BIC-want) > 1e-9*math.Abs(want) {
			t.Errorf("options %v: BIC %v, want %v", c.opts, res.Report.BIC, want)
		}
	}
}

// TestRecovery: rows drawn from a known Student-t mixture (full scale
// matrices, ν of 3, 5 and 8) are refitted close to it. Components are
// matched by nearest mean.
func TestRecovery(t *testing.T) {
	truth := pumpModel(t, 3, []float64{3, 5, 8})
	data, _ := sample(truth, 6000, 11)
	tp := truth.Params()
	for _, s := range []mixture.Structure{mixture.Full} {
		res, err := New().Fit(context.Background(), data, fitters.Settings{Components: 3, Structure: s, Seed: 12, Restarts: 1, Options: map[string]string{optSharing: valPerComp}}, nil)
		if err != nil {
			t.Fatalf("%s: %v", s, err)
		}
		for _, want := range tp.Components {
			best, bd := -1, math.Inf(1)
			for k, got := range res.Params.Components {
				var d float64
				for j := range want.Mean {
					d += math.Pow((got.Mean[j]-want.Mean[j])/math.Sqrt(want.Cov[j*3+j]), 2)
				}
				if d < bd {
					best, bd = k, d
				}
			}
			got := res.Params.Components[best]
			// Means within 0.15 of the component's scale; weights within
			// 0.02 (about four standard errors at n = 6000).
			if math.Sqrt(bd) > 0.15 || math.Abs(got.Weight-want.Weight) > 0.02 {
				t.Errorf("%s: component with mean %v: fitted mean %v weight %v (true weight %v)", s, want.Mean, got.Mean, got.Weight, want.Weight)
			}
			if s == mixture.Full && math.Abs(math.Log(got.DF/want.DF)) > math.Log(1.6) {
				t.Errorf("full: component with mean %v: df %v, true %v", want.Mean, got.DF, want.DF)
			}
		}
	}
}

// TestZeroIterations: NoIterations evaluates the start and returns it.
func TestZeroIterations(t *testing.T) {
	truth := pumpModel(t, 2, []float64{3, 5, 8})
	data, _ := sample(truth, 400, 13)
	start := truth.Params()
	res, err := New().Fit(context.Background(), data, fitters.Settings{Start: &start, MaxIterations: NoIterations, Options: map[string]string{optSharing: valPerComp}}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(res.Params, start) {
		t.Fatalf("params changed:\n got %+v\nwant %+v", res.Params, start)
	}
	ll, _ := truth.LogLikelihood(data.Values, nil)
	if res.Report.Iterations != 0 || len(res.Report.History) != 1 || res.Report.LogLikelihood != ll {
		t.Fatalf("iterations %d history %v log-likelihood %v (model %v)", res.Report.Iterations, res.Report.History, res.Report.LogLikelihood, ll)
	}
	// Without dof_sharing, a start whose components differ in ν keeps them
	// apart, so the start comes back unchanged.
	res, err = New().Fit(context.Background(), data, fitters.Settings{Start: &start, MaxIterations: NoIterations}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(res.Params, start) {
		t.Fatalf("default sharing changed the start:\n got %+v\nwant %+v", res.Params, start)
	}
	if got := res.Report.Settings[optSharing]; got != valPerComp {
		t.Errorf("settings echo %s = %q, want %q", optSharing, got, valPerComp)
	}
	// With one shared ν asked for, the start's values are averaged with the
	// component weights: 0.3·3 + 0.45·5 + 0.25·8 = 5.15.
	res, err = New().Fit(context.Background(), data, fitters.Settings{Start: &start, MaxIterations: NoIterations, Options: map[string]string{optSharing: valShared}}, nil)
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range res.Params.Components {
		if math.Abs(c.DF-5.15) > 1e-12 {
			t.Fatalf("shared start df %v, want 5.15", c.DF)
		}
	}
	// A Gaussian start gets the fixed (or starting) degrees of freedom.
	g := start.Clone()
	g.Family = mixture.Gaussian
	for k := range g.Components {
		g.Components[k].DF = 0
	}
	res, err = New().Fit(context.Background(), data, fitters.Settings{Start: &g, MaxIterations: NoIterations, Options: map[string]string{optDF: "6"}}, nil)
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range res.Params.Components {
		if c.DF != 6 {
			t.Fatalf("gaussian start with dof 6: df %v", c.DF)
		}
	}
}

// TestChooseK: fitting K = 1..4 by BIC picks the generating K = 3.
func TestChooseK(t *testing.T) {
	data, _ := sample(pumpModel(t, 2, []float64{4, 6, 10}), 1000, 14)
	res, err := New().Fit(context.Background(), data, fitters.Settings{MinComponents: 1, MaxComponents: 4, Seed: 15, Restarts: 1, Tolerance: 1e-6}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Params.Components) != 3 || len(res.Report.Selection) != 4 {
		t.Fatalf("chose K=%d; selection %+v", len(res.Params.Components), res.Report.Selection)
	}
	for i, row := range res.Report.Selection {
		if row.Components != i+1 || math.IsNaN(row.BIC) || (i+1 != 3 && row.BIC <= res.Report.BIC) {
			t.Fatalf("selection row %+v (chosen BIC %v)", row, res.Report.BIC)
		}
	}
	if res.Report.Settings["criterion"] != "bic" {
		t.Fatalf("settings %v", res.Report.Settings)
	}
}

// TestLabelsStartAndCollapse: labels give the start; a component with too
// few rows collapses at the first iteration and is re-seeded at the
// worst-explained row, and the result is a valid model.
func TestLabelsStartAndCollapse(t *testing.T) {
	data, truthLabels := sample(pumpModel(t, 2, []float64{4, 6, 10}), 800, 16)
	res, err := New().Fit(context.Background(), data, fitters.Settings{Labels: truthLabels, MaxIterations: 3}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if res.Report.Settings["start"] != "labels" || len(res.Params.Components) != 3 {
		t.Fatalf("settings %v, K %d", res.Report.Settings, len(res.Params.Components))
	}
	// Component 2 gets a single row: fewer than D+1 = 3 effective rows.
	labels := make([]int, data.Rows)
	for i := range labels {
		labels[i] = i % 2
	}
	labels[10] = 2
	res, err = New().Fit(context.Background(), data, fitters.Settings{Labels: labels, MaxIterations: 20}, nil)
	if err != nil {
		t.Fatal(err)
	}
	found := false
	for _, n := range res.Report.Notes {
		if strings.HasPrefix(n, "component 2 collapsed at iteration 1 (") && strings.Contains(n, "re-seeded at row") {
			found = true
		}
	}
	if !found {
		t.Fatalf("no collapse note: %v", res.Report.Notes)
	}
	if _, err := mixture.New(res.Params); err != nil {
		t.Fatalf("result is not a valid model: %v", err)
	}
}

// TestECMBounds: on Gaussian rows the ν equation has no root below the cap;
// ECM holds ν at the cap and says so, never failing silently.
func TestECMBounds(t *testing.T) {
	truth := pumpModel(t, 2, []float64{1e9, 1e9, 1e9})
	data, _ := sample(truth, 1500, 17)
	res, err := New().Fit(context.Background(), data, fitters.Settings{Components: 3, Seed: 2, Restarts: 1, MaxIterations: 200, Options: map[string]string{optUpdate: valECM, optDFCap: "30"}}, nil)
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range res.Params.Components {
		if c.DF != 30 {
			t.Fatalf("df %v, want the cap 30", c.DF)
		}
	}
	var noRoot, atCap bool
	for _, n := range res.Report.Notes {
		noRoot = noRoot || strings.Contains(n, "had no root inside [0.5, 30]") && strings.Contains(n, "held at the cap")
		atCap = atCap || strings.Contains(n, "ended at the cap 30")
	}
	if !noRoot || !atCap {
		t.Fatalf("notes %v", res.Report.Notes)
	}
	// ECME reaches the same bound.
	res, err = New().Fit(context.Background(), data, fitters.Settings{Components: 3, Seed: 2, Restarts: 1, MaxIterations: 200, Options: map[string]string{optDFCap: "30"}}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if res.Params.Components[0].DF != 30 {
		t.Fatalf("ecme: df %v, want the cap 30", res.Params.Components[0].DF)
	}
}

// TestWeightsAreFrequencies: integer row weights give the same fit as
// repeating the rows.
func TestWeightsAreFrequencies(t *testing.T) {
	base, _ := sample(pumpModel(t, 2, []float64{4, 6, 10}), 300, 18)
	weighted := base
	weighted.Weights = make([]float64, base.Rows)
	var rep fitters.Data
	rep.Cols = 2
	for i := 0; i < base.Rows; i++ {
		w := 1 + i%3
		weighted.Weights[i] = float64(w)
		for r := 0; r < w; r++ {
			rep.Values = append(rep.Values, base.Row(i)...)
			rep.Rows++
		}
	}
	start := pumpModel(t, 2, []float64{4, 6, 10}).Params()
	set := fitters.Settings{Start: &start, Tolerance: 1e-13, MaxIterations: 2000, Options: map[string]string{optSharing: valPerComp}}
	a, err := New().Fit(context.Background(), weighted, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	b, err := New().Fit(context.Background(), rep, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	if d := math.Abs(a.Report.LogLikelihood - b.Report.LogLikelihood); d > 1e-6 {
		t.Fatalf("log-likelihood %v weighted, %v repeated", a.Report.LogLikelihood, b.Report.LogLikelihood)
	}
	for k := range a.Params.Components {
		ca, cb := a.Params.Components[k], b.Params.Components[k]
		if math.Abs(ca.Weight-cb.Weight) > 1e-6 || maxAbsDiff(ca.Mean, cb.Mean) > 1e-4 || math.Abs(ca.DF/cb.DF-1) > 1e-4 {
			t.Fatalf("component %d: weighted %+v, repeated %+v", k, ca, cb)
		}
	}
}

// TestRowWeights checks the exported latent weights against the formula
// for one component, u = (ν+p)/(ν+δ) (Peel and McLachlan, 2000), and its
// errors.
func TestRowWeights(t *testing.T) {
	m, err := mixture.New(mixture.Params{Dim: 2, Family: mixture.StudentT, Structure: mixture.Full,
		Components: []mixture.Component{{Weight: 1, Mean: []float64{1, 2}, Cov: []float64{4, 1, 1, 2}, DF: 3}}})
	if err != nil {
		t.Fatal(err)
	}
	x := []float64{1, 2, 3, 2, -5, 9}
	u := make([]float64, 3)
	if err := RowWeights(m, x, u); err != nil {
		t.Fatal(err)
	}
	// δ by hand: Σ⁻¹ = [[2, −1], [−1, 4]]/7.
	for i, dev := range [][2]float64{{0, 0}, {2, 0}, {-6, 7}} {
		delta := (2*dev[0]*dev[0] - 2*dev[0]*dev[1] + 4*dev[1]*dev[1]) / 7
		if want := 5 / (3 + delta); math.Abs(u[i]-want) > 1e-14 {
			t.Errorf("row %d: u %v, want %v", i, u[i], want)
		}
	}
	if err := RowWeights(m, x[:5], make([]float64, 2)); err == nil || !strings.Contains(err.Error(), "not a multiple of dim 2") {
		t.Errorf("ragged: %v", err)
	}
	if err := RowWeights(m, x, make([]float64, 2)); err == nil || !strings.Contains(err.Error(), "out has 2 values, want 3") {
		t.Errorf("short out: %v", err)
	}
	g, _ := mixture.New(mixture.Params{Dim: 1, Family: mixture.Gaussian, Structure: mixture.Full,
		Components: []mixture.Component{{Weight: 1, Mean: []float64{0}, Cov: []float64{1}}}})
	if err := RowWeights(g, []float64{1}, make([]float64, 1)); err == nil || !strings.Contains(err.Error(), "want student_t") {
		t.Errorf("gaussian model: %v", err)
	}
}
