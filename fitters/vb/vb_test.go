package vb

import (
	"context"
	"errors"
	"math"
	"reflect"
	"runtime"
	"strings"
	"testing"
	"time"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/mixture"

	"github.com/mixd-dev/mixd/fitters/internal/testkit"
)

func TestDescribe(t *testing.T) {
	info, err := New().Describe(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	if info.Name != "vb" || info.Version != Version {
		t.Errorf("name %q version %q", info.Name, info.Version)
	}
	documented := map[string]bool{}
	for _, o := range info.Options {
		if o.Description == "" || o.Default == "" {
			t.Errorf("option %q lacks a description or default", o.Name)
		}
		documented[o.Name] = true
	}
	for _, name := range optionNames {
		if !documented[name] {
			t.Errorf("option %q is accepted but not described", name)
		}
	}
	if len(documented) != len(optionNames) {
		t.Errorf("%d options described, %d accepted", len(documented), len(optionNames))
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := New().Describe(ctx); fitters.CodeOf(err) != fitters.Canceled {
		t.Errorf("cancelled Describe: %v", err)
	}
}

func TestBadInput(t *testing.T) {
	good, _ := generate(200, 1, threeBlobs)
	nan := good
	nan.Values = append([]float64(nil), good.Values...)
	nan.Values[2*17+1] = math.NaN()
	inf := good
	inf.Values = append([]float64(nil), good.Values...)
	inf.Values[2*5] = math.Inf(-1)
	constant := good
	constant.Values = append([]float64(nil), good.Values...)
	for i := 0; i < good.Rows; i++ {
		constant.Values[2*i+1] = 4
	}
	twoRows := fitters.Data{Rows: 3, Cols: 1, Values: []float64{1, 2, 1}}
	badWeights := good
	badWeights.Weights = make([]float64, good.Rows)
	badWeights.Weights[3] = -1
	start := mixture.Params{Dim: 3, Family: mixture.Gaussian, Structure: mixture.Full, Components: []mixture.Component{
		{Weight: 1, Mean: []float64{0, 0, 0}, Cov: []float64{1, 0, 0, 0, 1, 0, 0, 0, 1}}}}
	opt := func(k, v string) fitters.Settings {
		return fitters.Settings{Components: 2, Options: map[string]string{k: v}}
	}
	cases := []struct {
		name string
		data fitters.Data
		s    fitters.Settings
		code fitters.Code
		want string
	}{
		{"no rows", fitters.Data{Cols: 2}, fitters.Settings{Components: 1}, fitters.InvalidArgument, "no rows"},
		{"ragged", fitters.Data{Rows: 2, Cols: 2, Values: []float64{1, 2, 3}}, fitters.Settings{Components: 1}, fitters.InvalidArgument, "3 values for 2 rows"},
		{"nan", nan, fitters.Settings{Components: 2}, fitters.InvalidArgument, "row 17 column 1"},
		{"inf", inf, fitters.Settings{Components: 2}, fitters.InvalidArgument, "row 5 column 0"},
		{"huge", fitters.Data{Rows: 2, Cols: 1, Values: []float64{1, 2e100}}, fitters.Settings{Components: 1}, fitters.InvalidArgument, "row 1 column 0"},
		{"constant column", constant, fitters.Settings{Components: 2}, fitters.FailedPrecondition, "column 1 is constant"},
		{"K<1", good, fitters.Settings{Components: -2}, fitters.InvalidArgument, "components -2"},
		{"K zero", good, fitters.Settings{}, fitters.InvalidArgument, "components 0"},
		{"too few distinct rows", twoRows, fitters.Settings{Components: 3}, fitters.FailedPrecondition, "only 2 distinct rows"},
		{"labels length", good, fitters.Settings{Components: 2, Labels: []int{0, 1}}, fitters.InvalidArgument, "2 labels for 200 rows"},
		{"label range", good, fitters.Settings{Components: 2, Labels: make([]int, 200)}, fitters.InvalidArgument, "component 1 has no rows"},
		{"negative label", good, fitters.Settings{Components: 2, Labels: append([]int{-1}, make([]int, 199)...)}, fitters.InvalidArgument, "row 0 has label -1"},
		{"weights", badWeights, fitters.Settings{Components: 2}, fitters.InvalidArgument, "row 3 has weight -1"},
		{"weights length", fitters.Data{Rows: 2, Cols: 1, Values: []float64{1, 2}, Weights: []float64{1}}, fitters.Settings{Components: 1}, fitters.InvalidArgument, "1 weights for 2 rows"},
		{"start and labels", good, fitters.Settings{Start: &start, Labels: make([]int, 200)}, fitters.InvalidArgument, "both set"},
		{"start dim", good, fitters.Settings{Start: &start}, fitters.InvalidArgument, "start: dim 3"},
		{"range with labels", good, fitters.Settings{MaxComponents: 3, Labels: make([]int, 200)}, fitters.InvalidArgument, "max components"},
		{"range order", good, fitters.Settings{MinComponents: 4, MaxComponents: 3}, fitters.InvalidArgument, "min components 4 exceeds"},
		{"tolerance", good, fitters.Settings{Components: 2, Tolerance: -1}, fitters.InvalidArgument, "tolerance"},
		{"iterations", good, fitters.Settings{Components: 2, MaxIterations: -5}, fitters.InvalidArgument, "max iterations -5"},
		{"restarts", good, fitters.Settings{Components: 2, Restarts: -1}, fitters.InvalidArgument, "restarts -1"},
		{"ridge", good, fitters.Settings{Components: 2, Ridge: math.NaN()}, fitters.InvalidArgument, "ridge"},
		{"family", good, fitters.Settings{Components: 2, Family: 7}, fitters.InvalidArgument, "family 7"},
		{"family and served model", good, fitters.Settings{Components: 2, Family: mixture.StudentT, Options: map[string]string{OptServedModel: ServePlugin}}, fitters.InvalidArgument, "family student_t asks for the predictive model"},
		{"diagonal student_t", good, fitters.Settings{Components: 2, Family: mixture.StudentT, Structure: mixture.Diagonal}, fitters.Unimplemented, "product of univariate student_t"},
		{"tied student_t", good, fitters.Settings{Components: 2, Family: mixture.StudentT, Structure: mixture.Tied}, fitters.Unimplemented, "not a tied student_t mixture"},
		{"tied predictive", good, fitters.Settings{Components: 2, Structure: mixture.Tied, Options: map[string]string{OptServedModel: ServePredictive}}, fitters.Unimplemented, "served_model=plugin"},
		{"dof tied", good, fitters.Settings{Components: 2, Structure: mixture.Tied, Options: map[string]string{OptWishartDOF: "0.5"}}, fitters.InvalidArgument, `option "wishart_dof": value "0.5" must exceed 1`},
		{"inverse scale tied", good, fitters.Settings{Components: 2, Structure: mixture.Tied, Options: map[string]string{OptInverseScale: "1,2,2,1"}}, fitters.InvalidArgument, `option "wishart_inverse_scale": covariance is not positive definite`},
		{"unknown structure", good, fitters.Settings{Components: 2, Structure: 9}, fitters.InvalidArgument, "structure 9"},
		{"unknown option", good, opt("components_max", "3"), fitters.InvalidArgument, `option "components_max" is not recognised`},
		{"weight prior", good, opt(OptWeightPrior, "pitman"), fitters.InvalidArgument, `option "weight_prior": value "pitman"`},
		{"concentration", good, opt(OptConcentration, "0"), fitters.InvalidArgument, `option "concentration": value "0" must be positive`},
		{"concentration text", good, opt(OptConcentration, "lots"), fitters.InvalidArgument, `option "concentration": value "lots" is not a finite number`},
		{"mean strength", good, opt(OptMeanStrength, "-1"), fitters.InvalidArgument, `option "mean_strength"`},
		{"prior mean length", good, opt(OptPriorMean, "1,2,3"), fitters.InvalidArgument, `option "prior_mean": 3 values given, want 2`},
		{"prior mean value", good, opt(OptPriorMean, "1,NaN"), fitters.InvalidArgument, `option "prior_mean": value 1`},
		{"dof full", good, opt(OptWishartDOF, "0.5"), fitters.InvalidArgument, `option "wishart_dof": value "0.5" must exceed 1`},
		{"dof diagonal", good, fitters.Settings{Components: 2, Structure: mixture.Diagonal, Options: map[string]string{OptWishartDOF: "0"}}, fitters.InvalidArgument, `option "wishart_dof": value "0" must be positive`},
		{"inverse scale shape", good, opt(OptInverseScale, "1,0,0"), fitters.InvalidArgument, `option "wishart_inverse_scale": 3 values given, want 4`},
		{"inverse scale not pd", good, opt(OptInverseScale, "1,2,2,1"), fitters.InvalidArgument, `option "wishart_inverse_scale": covariance is not positive definite`},
		{"inverse scale diagonal", good, fitters.Settings{Components: 2, Structure: mixture.Diagonal, Options: map[string]string{OptInverseScale: "1,-1"}}, fitters.InvalidArgument, `option "wishart_inverse_scale": value 1 (-1) must be positive`},
		{"served model", good, opt(OptServedModel, "map"), fitters.InvalidArgument, `option "served_model": value "map"`},
		{"diagonal predictive", good, fitters.Settings{Components: 2, Structure: mixture.Diagonal, Options: map[string]string{OptServedModel: ServePredictive}}, fitters.Unimplemented, "served_model=plugin"},
		{"min rows", good, opt(OptMinRows, "-3"), fitters.InvalidArgument, `option "min_expected_rows"`},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			res, err := New().Fit(context.Background(), c.data, c.s, nil)
			if err == nil {
				t.Fatalf("no error; got %+v", res.Report)
			}
			if fitters.CodeOf(err) != c.code {
				t.Errorf("code %v, want %v (%v)", fitters.CodeOf(err), c.code, err)
			}
			if !strings.Contains(err.Error(), c.want) {
				t.Errorf("error %q does not mention %q", err, c.want)
			}
		})
	}
}

// TestLinearlyDependentColumns: a column that is a multiple of another makes
// the default prior unusable; the error says what to do.
func TestLinearlyDependentColumns(t *testing.T) {
	base, _ := generate(100, 2, threeBlobs)
	vals := make([]float64, 0, 300)
	for i := 0; i < base.Rows; i++ {
		r := base.Row(i)
		vals = append(vals, r[0], r[1], 2*r[0])
	}
	_, err := New().Fit(context.Background(), fitters.Data{Rows: 100, Cols: 3, Values: vals}, fitters.Settings{Components: 2}, nil)
	if fitters.CodeOf(err) != fitters.FailedPrecondition || !strings.Contains(err.Error(), "linearly dependent") {
		t.Fatalf("error %v", err)
	}
	// A ridge makes it usable.
	res, err := New().Fit(context.Background(), fitters.Data{Rows: 100, Cols: 3, Values: vals}, fitters.Settings{Components: 2, Ridge: 0.1}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if err := res.Params.Validate(); err != nil {
		t.Fatal(err)
	}
}

// TestDeterminism: the same data, settings and seed give bit-identical
// results, also with a different GOMAXPROCS (the data set is large enough
// for the passes to run in parallel).
func TestDeterminism(t *testing.T) {
	data, _ := generate(2*parallelMinRows+77, 71, threeBlobs)
	s := fitters.Settings{Components: 5, Seed: 99, Restarts: 2, MaxIterations: 60}
	run := func(procs int) *fitters.Result {
		old := runtime.GOMAXPROCS(procs)
		defer runtime.GOMAXPROCS(old)
		res, err := New().Fit(context.Background(), data, s, nil)
		if err != nil {
			t.Fatal(err)
		}
		return res
	}
	a, b, c := run(1), run(2), run(4)
	for _, r := range []*fitters.Result{b, c} {
		if !reflect.DeepEqual(a.Params, r.Params) || !reflect.DeepEqual(a.Report.History, r.Report.History) || a.Report.LogLikelihood != r.Report.LogLikelihood {
			t.Fatal("results differ between GOMAXPROCS settings")
		}
	}
	s.Seed = 100
	d := run(2)
	if reflect.DeepEqual(a.Report.History, d.Report.History) {
		t.Error("a different seed gave the same history")
	}
}

func TestCancellation(t *testing.T) {
	data, _ := generate(3000, 81, threeBlobs)
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := New().Fit(ctx, data, fitters.Settings{Components: 3}, nil); fitters.CodeOf(err) != fitters.Canceled {
		t.Fatalf("pre-cancelled: %v", err)
	}
	ctx, cancel = context.WithCancel(context.Background())
	defer cancel()
	last := 0
	_, err := New().Fit(ctx, data, fitters.Settings{Components: 10, Tolerance: 1e-300, MaxIterations: 100000}, func(p fitters.Progress) {
		last = p.Iteration
		if p.Iteration == 3 {
			cancel()
		}
	})
	if fitters.CodeOf(err) != fitters.Canceled || !errors.Is(err, context.Canceled) {
		t.Fatalf("cancelled during the fit: %v", err)
	}
	if last != 3 {
		t.Errorf("ran to iteration %d after cancelling at 3", last)
	}
	dctx, dcancel := context.WithTimeout(context.Background(), time.Nanosecond)
	defer dcancel()
	time.Sleep(time.Millisecond)
	if _, err := New().Fit(dctx, data, fitters.Settings{Components: 3}, nil); fitters.CodeOf(err) != fitters.DeadlineExceeded {
		t.Fatalf("deadline: %v", err)
	}
}

// TestReport checks the report fields and the served models.
func TestReport(t *testing.T) {
	data := testkit.Faithful(t)
	for _, served := range []string{ServePredictive, ServePlugin} {
		res, post, err := New().FitPosterior(context.Background(), data, fitters.Settings{Components: 6, Seed: 3,
			Options: map[string]string{OptServedModel: served, OptConcentration: "0.001"}}, nil)
		if err != nil {
			t.Fatal(err)
		}
		r := res.Report
		if r.Objective != "variational_bound" || r.Settings[OptServedModel] != served || r.Settings["structure"] != "full" {
			t.Errorf("objective %q, settings %v", r.Objective, r.Settings)
		}
		if r.EffectiveComponents != 2 {
			t.Errorf("%s: effective components %d, want 2 (expected rows %v)", served, r.EffectiveComponents, post.ExpectedRows)
		}
		m, err := mixture.New(res.Params)
		if err != nil {
			t.Fatal(err)
		}
		ll, _ := m.LogLikelihood(data.Values, nil)
		if ll != r.LogLikelihood || r.BIC != m.BIC(ll, 272) || r.AIC != m.AIC(ll) {
			t.Errorf("log-likelihood %v / %v, BIC %v, AIC %v", r.LogLikelihood, ll, r.BIC, r.AIC)
		}
		if !strings.Contains(strings.Join(r.Notes, "\n"), "served model") {
			t.Errorf("notes %q", r.Notes)
		}
		wantFamily := mixture.StudentT
		if served == ServePlugin {
			wantFamily = mixture.Gaussian
		}
		if res.Params.Family != wantFamily {
			t.Errorf("family %v, want %v", res.Params.Family, wantFamily)
		}
		for k, c := range res.Params.Components {
			if served == ServePredictive {
				if want := post.DOF[k] + 1 - 2; c.DF != want {
					t.Errorf("component %d DF %v, want ν+1−D = %v", k, c.DF, want)
				}
				f := (1 + post.MeanStrength[k]) / (c.DF * post.MeanStrength[k])
				for i, v := range post.InverseScale[k] {
					if !relClose(c.Cov[i], f*v, 1e-14, math.Abs(f*v)) {
						t.Errorf("component %d scale[%d] %v, want %v", k, i, c.Cov[i], f*v)
					}
				}
			}
		}
	}
}

// TestDropsNegligibleComponents: a component whose expected weight is below
// MinServedWeight is left out of the served model and the weights renormalised.
func TestDropsNegligibleComponents(t *testing.T) {
	data, _ := generate(400, 91, threeBlobs[:2])
	res, post, err := New().FitPosterior(context.Background(), data, fitters.Settings{Components: 4, Seed: 1,
		Options: map[string]string{OptConcentration: "1e-13"}}, nil)
	if err != nil {
		t.Fatal(err)
	}
	var small int
	for _, w := range post.ExpectedWeights {
		if w < MinServedWeight {
			small++
		}
	}
	if small == 0 {
		t.Fatalf("no negligible component (expected weights %v)", post.ExpectedWeights)
	}
	if got := len(res.Params.Components); got != 4-small {
		t.Errorf("%d served components, want %d", got, 4-small)
	}
	if err := res.Params.Validate(); err != nil {
		t.Error(err)
	}
	if !strings.Contains(strings.Join(res.Report.Notes, "\n"), "left out of the served model") {
		t.Errorf("notes %q", res.Report.Notes)
	}
}

// TestStartAndRange covers starting parameters, no iterations and the
// choice of K over a range.
func TestStartAndRange(t *testing.T) {
	data := testkit.Faithful(t)
	start := mixture.Params{Dim: 2, Family: mixture.Gaussian, Structure: mixture.Full, Components: []mixture.Component{
		{Weight: 0.5, Mean: []float64{2, 55}, Cov: []float64{1.3, 13.9, 13.9, 184.8}},
		{Weight: 0.5, Mean: []float64{4.5, 80}, Cov: []float64{1.3, 13.9, 13.9, 184.8}},
	}}
	res, err := New().Fit(context.Background(), data, fitters.Settings{Start: &start, MaxIterations: NoIterations}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if res.Report.Iterations != 0 || len(res.Report.History) != 0 || res.Report.Settings["start"] != "params" {
		t.Errorf("report %+v", res.Report)
	}
	res, err = New().Fit(context.Background(), data, fitters.Settings{MinComponents: 1, MaxComponents: 3, Seed: 4}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Report.Selection) != 3 {
		t.Fatalf("selection %+v", res.Report.Selection)
	}
	best := res.Report.Selection[0]
	for _, row := range res.Report.Selection {
		if row.BIC < best.BIC {
			best = row
		}
	}
	if res.Report.BIC != best.BIC {
		t.Errorf("kept BIC %v, best row %+v", res.Report.BIC, best)
	}
}

// FuzzOptions feeds arbitrary option values (outside input) to the fitter:
// never a panic, and a fit that succeeds has finite, valid parameters.
func FuzzOptions(f *testing.F) {
	data, _ := generate(60, 5, threeBlobs)
	f.Add(OptConcentration, "0.5", uint8(0))
	f.Add(OptWishartDOF, "1.0000001", uint8(0))
	f.Add(OptInverseScale, "1e-300,0,0,1e300", uint8(0))
	f.Add(OptInverseScale, "4", uint8(2))
	f.Add(OptPriorMean, "1e150,-1e150", uint8(1))
	f.Add(OptMeanStrength, "1e-300", uint8(0))
	f.Add(OptWeightPrior, "stick_breaking", uint8(2))
	f.Add(OptMinRows, "1e308", uint8(1))
	f.Add("x", "y", uint8(0))
	for _, v := range []string{"1e-300", "1e12", "5e-324", "1e308"} {
		for _, name := range []string{OptConcentration, OptMeanStrength, OptWishartDOF} {
			for st := uint8(0); st < 3; st++ {
				f.Add(name, v, st)
			}
		}
	}
	for _, v := range []string{"1e-250,0,0,1e-250", "1e250,0,0,1e250", "1e250,1e250,1e250,1e250", "1e-250", "1e250", "1e-250,1e250"} {
		for st := uint8(0); st < 3; st++ {
			f.Add(OptInverseScale, v, st)
		}
	}
	f.Fuzz(func(t *testing.T, name, value string, structure uint8) {
		st := []mixture.Structure{mixture.Full, mixture.Diagonal, mixture.Spherical}[int(structure)%3]
		opts := map[string]string{name: value}
		if st == mixture.Diagonal && name != OptServedModel {
			opts[OptServedModel] = ServePlugin
		}
		res, err := New().Fit(context.Background(), data, fitters.Settings{Components: 3, Structure: st, MaxIterations: 20, Restarts: 1, Options: opts}, nil)
		if err != nil {
			if fitters.CodeOf(err) == fitters.Internal {
				t.Fatalf("internal error for %q=%q: %v", name, value, err)
			}
			return
		}
		if err := res.Params.Validate(); err != nil {
			t.Fatalf("%q=%q: invalid served parameters: %v", name, value, err)
		}
		for _, v := range append(res.Report.History, res.Report.LogLikelihood, res.Report.BIC) {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				t.Fatalf("%q=%q: non-finite report value %v", name, value, v)
			}
		}
	})
}

// FuzzData fits arbitrary small data matrices (outside input): never a panic
// or an internal error, and a successful fit has valid, finite parameters.
func FuzzData(f *testing.F) {
	f.Add([]byte{1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12}, uint8(2), uint8(0))
	f.Add([]byte{0, 0, 0, 1, 0, 0, 0, 2, 200, 0, 0, 3}, uint8(1), uint8(1))
	f.Add([]byte{255, 1, 255, 2, 0, 1, 0, 2, 128, 7}, uint8(3), uint8(2))
	f.Fuzz(func(t *testing.T, raw []byte, k, structure uint8) {
		if len(raw) < 4 || len(raw) > 400 {
			return
		}
		// Two columns; each value is a byte pair mapped onto a wide range of
		// magnitudes (including values that are nearly equal).
		n := len(raw) / 4
		vals := make([]float64, 2*n)
		for i := range vals {
			hi, lo := raw[2*i], raw[2*i+1]
			vals[i] = (float64(lo) - 128) * math.Pow(10, float64(int(hi%40)-20))
		}
		st := []mixture.Structure{mixture.Full, mixture.Diagonal, mixture.Spherical}[int(structure)%3]
		s := fitters.Settings{Components: int(k%4) + 1, Structure: st, MaxIterations: 15, Restarts: 1}
		if st == mixture.Diagonal {
			s.Options = map[string]string{OptServedModel: ServePlugin}
		}
		res, err := New().Fit(context.Background(), fitters.Data{Rows: n, Cols: 2, Values: vals}, s, nil)
		if err != nil {
			if fitters.CodeOf(err) == fitters.Internal {
				t.Fatalf("internal error: %v (values %v)", err, vals)
			}
			return
		}
		if err := res.Params.Validate(); err != nil {
			t.Fatalf("invalid served parameters: %v", err)
		}
		for _, v := range append(res.Report.History, res.Report.LogLikelihood, res.Report.BIC, res.Report.Bound) {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				t.Fatalf("non-finite report value %v", v)
			}
		}
	})
}

// TestSettingsEchoRoundTrips: the option values echoed in Report.Settings
// are accepted back as options and reproduce the fit bit for bit.
func TestSettingsEchoRoundTrips(t *testing.T) {
	data := testkit.Faithful(t)
	s := fitters.Settings{Components: 3, Seed: 8, Restarts: 1, MaxIterations: 50}
	a, err := New().Fit(context.Background(), data, s, nil)
	if err != nil {
		t.Fatal(err)
	}
	s.Options = map[string]string{}
	for _, name := range optionNames {
		v, ok := a.Report.Settings[name]
		if !ok {
			t.Fatalf("option %q not echoed", name)
		}
		s.Options[name] = v
	}
	b, err := New().Fit(context.Background(), data, s, nil)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(a.Params, b.Params) || a.Report.Bound != b.Report.Bound {
		t.Errorf("refit from the echoed options differs: bound %v vs %v", a.Report.Bound, b.Report.Bound)
	}
	if a.Report.Settings["wishart_inverse_scale_source"] != "data covariance" {
		t.Errorf("source %q", a.Report.Settings["wishart_inverse_scale_source"])
	}
}

// TestFamilyChoosesServedModel: a requested family picks the served model.
func TestFamilyChoosesServedModel(t *testing.T) {
	data := testkit.Faithful(t)
	for _, c := range []struct {
		family mixture.Family
		st     mixture.Structure
		served string
	}{
		{0, mixture.Full, ServePredictive},
		{0, mixture.Diagonal, ServePlugin},
		{mixture.Gaussian, mixture.Full, ServePlugin},
		{mixture.StudentT, mixture.Spherical, ServePredictive},
	} {
		res, err := New().Fit(context.Background(), data, fitters.Settings{Components: 2, Family: c.family, Structure: c.st, Seed: 1}, nil)
		if err != nil {
			t.Fatal(err)
		}
		want := mixture.Gaussian
		if c.served == ServePredictive {
			want = mixture.StudentT
		}
		if res.Report.Settings[OptServedModel] != c.served || res.Params.Family != want || res.Params.Structure != c.st {
			t.Errorf("family %v, %v: served %q, family %v, structure %v", c.family, c.st, res.Report.Settings[OptServedModel], res.Params.Family, res.Params.Structure)
		}
	}
}
