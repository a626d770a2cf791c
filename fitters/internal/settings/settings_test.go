package settings

import (
	"context"
	"errors"
	"math"
	"reflect"
	"strings"
	"testing"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/internal/prep"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

var all = []mixture.Structure{mixture.Full, mixture.Diagonal, mixture.Spherical, mixture.Tied}

func method(style Style, structures ...mixture.Structure) Method {
	return Method{Name: "demo", Structures: structures, Defaults: Defaults{MaxIterations: 500, Tolerance: 1e-7, Restarts: 4}, Style: style}
}

func TestBasicsDefaults(t *testing.T) {
	b, err := method(Plain, all...).Basics(fitters.Settings{})
	want := Basics{Structure: mixture.Full, Criterion: fitters.BIC, MaxIter: 500, Tol: 1e-7, Restarts: 4}
	if err != nil || b != want {
		t.Fatalf("got %+v, %v; want %+v", b, err, want)
	}
	start := &mixture.Params{Structure: mixture.Spherical}
	b, err = method(Plain, all...).Basics(fitters.Settings{Start: start, Criterion: fitters.AIC, MaxIterations: NoIterations, Tolerance: 0.5, Restarts: 2})
	want = Basics{Structure: mixture.Spherical, Criterion: fitters.AIC, MaxIter: 0, Tol: 0.5, Restarts: 2}
	if err != nil || b != want {
		t.Fatalf("got %+v, %v; want %+v", b, err, want)
	}
}

// TestBasicsErrors: every message names the setting, in the method's style,
// and the settings are checked in a fixed order.
func TestBasicsErrors(t *testing.T) {
	cases := []struct {
		name  string
		s     fitters.Settings
		code  fitters.Code
		plain string
		label string
	}{
		{"structure", fitters.Settings{Structure: 9}, fitters.InvalidArgument, "structure 9 is not a known covariance structure", "structure: 9 is not a known covariance structure"},
		{"unsupported", fitters.Settings{Structure: mixture.Tied}, fitters.Unimplemented,
			"structure tied is not supported by the demo fitter (supported: full, diagonal, spherical)",
			"structure: tied is not supported by the demo fitter (supported: full, diagonal, spherical)"},
		{"criterion", fitters.Settings{Criterion: 7, Restarts: -1}, fitters.InvalidArgument, "criterion 7 is not known (want bic or aic)", "criterion: 7 is not known"},
		{"iterations", fitters.Settings{MaxIterations: -2}, fitters.InvalidArgument,
			"max iterations -2 is negative (use -1 for no iterations, 0 for the default 500)", "max iterations: -2 is negative"},
		{"tolerance NaN", fitters.Settings{Tolerance: math.NaN()}, fitters.InvalidArgument, "tolerance NaN must be a finite non-negative number", "tolerance: NaN must be"},
		{"tolerance negative", fitters.Settings{Tolerance: -1}, fitters.InvalidArgument, "tolerance -1 must be", "tolerance: -1 must be"},
		{"restarts", fitters.Settings{Restarts: -1}, fitters.InvalidArgument, "restarts -1 is negative", "restarts: -1 is negative"},
	}
	for _, c := range cases {
		for _, style := range []Style{Plain, Labelled} {
			_, err := method(style, mixture.Full, mixture.Diagonal, mixture.Spherical).Basics(c.s)
			want := c.plain
			if style == Labelled {
				want = c.label
			}
			if err == nil || fitters.CodeOf(err) != c.code || !strings.HasPrefix(err.Error(), want) {
				t.Errorf("%s (style %d): error %v, want code %d and %q", c.name, style, err, c.code, want)
			}
		}
	}
}

func TestComponents(t *testing.T) {
	m := method(Plain, all...)
	start := &mixture.Params{Components: make([]mixture.Component, 3)}
	ok := []struct {
		s    fitters.Settings
		want Range
	}{
		{fitters.Settings{Components: 2}, Range{Min: 2, Max: 2}},
		{fitters.Settings{MaxComponents: 4}, Range{Min: 1, Max: 4, Selecting: true}},
		{fitters.Settings{MinComponents: 2, MaxComponents: 4, Components: 9}, Range{Min: 2, Max: 4, Selecting: true}},
		{fitters.Settings{Start: start}, Range{Min: 3, Max: 3}},
		{fitters.Settings{Labels: []int{0, 4, 1}}, Range{Min: 5, Max: 5}},
		{fitters.Settings{Labels: []int{0, 1}, Components: 3}, Range{Min: 3, Max: 3}},
	}
	for _, c := range ok {
		if got, err := m.Components(c.s); err != nil || got != c.want {
			t.Errorf("%+v: got %+v, %v; want %+v", c.s, got, err, c.want)
		}
	}
	bad := []struct {
		s    fitters.Settings
		want string
	}{
		{fitters.Settings{Start: start, Labels: []int{0}}, "start and labels are both set; give at most one"},
		{fitters.Settings{MaxComponents: -1}, "component range [0, -1] has a negative bound"},
		{fitters.Settings{MaxComponents: 3, Labels: []int{0}}, "max components is set (choosing K) but start or labels fix K; give one or the other"},
		{fitters.Settings{MinComponents: 4, MaxComponents: 2}, "min components 4 exceeds max components 2"},
		{fitters.Settings{Start: start, Components: 2}, "components is 2 but start has 3 components"},
		{fitters.Settings{}, "components 0 must be at least 1"},
		{fitters.Settings{Components: -3}, "components -3 must be at least 1"},
	}
	for _, c := range bad {
		if _, err := m.Components(c.s); err == nil || fitters.CodeOf(err) != fitters.InvalidArgument || err.Error() != c.want {
			t.Errorf("%+v: error %v, want %q", c.s, err, c.want)
		}
	}
	if _, err := method(Labelled).Components(fitters.Settings{}); err == nil || err.Error() != "components: 0 must be at least 1" {
		t.Errorf("labelled: %v", err)
	}
}

func TestResolveStart(t *testing.T) {
	start := mixture.Params{Dim: 1, Family: mixture.Gaussian, Structure: mixture.Full,
		Components: []mixture.Component{{Weight: 1, Mean: []float64{0}, Cov: []float64{1}}}}
	st, err := ResolveStart(fitters.Settings{Start: &start}, 4, 1, 1, StartRules{Family: mixture.Gaussian, Structure: mixture.Full})
	if err != nil || st.Kind != KindParams || !st.Given() || !reflect.DeepEqual(*st.Params, start) {
		t.Fatalf("start %+v, %v", st, err)
	}
	st.Params.Components[0].Mean[0] = 5
	if start.Components[0].Mean[0] != 0 {
		t.Fatal("the resolved start shares memory with the caller's")
	}
	labels := []int{0, 1, 1, 0}
	st, err = ResolveStart(fitters.Settings{Labels: labels}, 4, 1, 2, StartRules{})
	if err != nil || st.Kind != KindLabels || !reflect.DeepEqual(st.Labels, labels) {
		t.Fatalf("labels %+v, %v", st, err)
	}
	st.Labels[0] = 1
	if labels[0] != 0 {
		t.Fatal("the resolved labels share memory with the caller's")
	}
	if st, err := ResolveStart(fitters.Settings{}, 4, 1, 2, StartRules{}); err != nil || st.Kind != KindSeeded || st.Given() {
		t.Fatalf("seeded %+v, %v", st, err)
	}

	tStart := start.Clone()
	tStart.Family = mixture.StudentT
	tStart.Components[0].DF = 4
	bad := []struct {
		s     fitters.Settings
		d     int
		rules StartRules
		want  string
	}{
		{fitters.Settings{Start: &start}, 2, StartRules{}, "start: dim 1 differs from the data's 2 columns"},
		{fitters.Settings{Start: &tStart}, 1, StartRules{Family: mixture.Gaussian}, "start: family student_t, want gaussian"},
		{fitters.Settings{Start: &start}, 1, StartRules{Structure: mixture.Tied}, "start: structure full differs from the requested tied"},
		{fitters.Settings{Labels: []int{0, 1}}, 1, StartRules{}, "labels: 2 labels for 4 rows"},
		{fitters.Settings{Labels: []int{0, 1, 2, 0}}, 1, StartRules{}, "labels: row 2 has label 2, want 0..1"},
		{fitters.Settings{Labels: []int{0, -1, 1, 0}}, 1, StartRules{}, "labels: row 1 has label -1, want 0..1"},
	}
	for _, c := range bad {
		if _, err := ResolveStart(c.s, 4, c.d, 2, c.rules); err == nil || fitters.CodeOf(err) != fitters.InvalidArgument || err.Error() != c.want {
			t.Errorf("error %v, want %q", err, c.want)
		}
	}
	// Invalid parameters are reported with the model's own reason.
	broken := start.Clone()
	broken.Components[0].Weight = 0.5
	err = CheckStart(&broken, 1, StartRules{})
	var fe *fitters.Error
	if !errors.As(err, &fe) || fe.Code != fitters.InvalidArgument || fe.Msg != "start" || fe.Err == nil {
		t.Fatalf("error %#v", err)
	}
}

// TestStarts: the number of components, then the distinct rows, then the
// start; a caller's start leaves one restart.
func TestStarts(t *testing.T) {
	m := method(Plain, all...)
	rows := &prep.Rows{N: 4, D: 1, X: []float64{1, 2, 2, 3}}
	b := Basics{Restarts: 5}
	if _, _, err := m.Starts(fitters.Settings{Components: 4, Labels: []int{0, 1, 2, 9}}, rows, StartRules{}, &b); err == nil ||
		err.Error() != "4 components requested but the data has only 3 distinct rows with positive weight" {
		t.Fatalf("error %v", err)
	}
	if _, _, err := m.Starts(fitters.Settings{Components: 2, Labels: []int{0, 1, 2, 0}}, rows, StartRules{}, &b); err == nil ||
		!strings.Contains(err.Error(), "row 2 has label 2") {
		t.Fatalf("error %v", err)
	}
	k, st, err := m.Starts(fitters.Settings{MaxComponents: 3}, rows, StartRules{}, &b)
	if err != nil || k != (Range{Min: 1, Max: 3, Selecting: true}) || st.Kind != KindSeeded || b.Restarts != 5 {
		t.Fatalf("%+v %+v %v restarts %d", k, st, err, b.Restarts)
	}
	k, st, err = m.Starts(fitters.Settings{Labels: []int{0, 1, 1, 0}}, rows, StartRules{}, &b)
	if err != nil || k != (Range{Min: 2, Max: 2}) || st.Kind != KindLabels || b.Restarts != 1 {
		t.Fatalf("%+v %+v %v restarts %d", k, st, err, b.Restarts)
	}
}

func TestRidge(t *testing.T) {
	m := method(Plain, all...)
	variance := []float64{4, 16}
	r, text, err := m.Ridge(-1, mixture.Full, variance, 1e-6)
	if err != nil || r[0] != 4e-6 || r[1] != 16e-6 || text != "1e-06 x feature variance = 4e-06,1.6e-05" {
		t.Fatalf("full default: %v %q %v", r, text, err)
	}
	r, text, err = m.Ridge(-1, mixture.Spherical, variance, 1e-6)
	frac := 1e-6 // a variable: the constant expression 1e-6 * 10 is exact, the run-time product is not
	if mv := frac * 10; err != nil || r[0] != mv || r[1] != mv || text != "1e-06 x mean feature variance = "+Float(mv) {
		t.Fatalf("spherical default: %v %q %v", r, text, err)
	}
	r, text, err = m.Ridge(0.25, mixture.Diagonal, variance, 1e-6)
	if err != nil || r[0] != 0.25 || r[1] != 0.25 || text != "0.25" {
		t.Fatalf("given: %v %q %v", r, text, err)
	}
	if r, text, err := m.Ridge(0, mixture.Tied, variance, 1e-6); err != nil || r[0] != 0 || r[1] != 0 || text != "0" {
		t.Fatalf("zero: %v %q %v", r, text, err)
	}
	if _, _, err := m.Ridge(math.Inf(1), mixture.Full, variance, 1e-6); err == nil || err.Error() != "ridge +Inf must be finite" {
		t.Fatalf("error %v", err)
	}
	if _, _, err := method(Labelled).Ridge(math.NaN(), mixture.Full, variance, 1e-6); err == nil || err.Error() != "ridge: NaN must be finite" {
		t.Fatalf("error %v", err)
	}
}

func TestMinRows(t *testing.T) {
	for s, want := range map[mixture.Structure]float64{mixture.Full: 4, mixture.Diagonal: 2, mixture.Spherical: 2, mixture.Tied: 1} {
		if got := MinRows(s, 3); got != want {
			t.Errorf("%s: %v, want %v", s, got, want)
		}
	}
}

func TestOptionParsing(t *testing.T) {
	if names := OptionNames(map[string]string{"b": "", "a": "", "c": ""}); !reflect.DeepEqual(names, []string{"a", "b", "c"}) {
		t.Fatalf("names %v", names)
	}
	if v, err := Number("o", " -2.5 "); err != nil || v != -2.5 {
		t.Fatalf("number %v %v", v, err)
	}
	if _, err := Number("o", "Inf"); err == nil || err.Error() != `option "o": value "Inf" is not a finite number` {
		t.Fatalf("error %v", err)
	}
	if _, err := Positive("o", "0"); err == nil || err.Error() != `option "o": value "0" must be positive` {
		t.Fatalf("error %v", err)
	}
	if _, err := Positive("o", "x"); err == nil || err.Error() != `option "o": value "x" is not a finite number` {
		t.Fatalf("error %v", err)
	}
	if v, err := RowCount("o", "7.5"); err != nil || v != 7.5 {
		t.Fatalf("rows %v %v", v, err)
	}
	for _, raw := range []string{"x", "0", "-1", "NaN"} {
		if _, err := RowCount("o", raw); err == nil || err.Error() != `option "o": value "`+raw+`" must be a positive number` {
			t.Fatalf("%q: error %v", raw, err)
		}
	}
}

func TestEcho(t *testing.T) {
	b := Basics{Structure: mixture.Diagonal, Criterion: fitters.AIC, MaxIter: 0, Tol: 1e-8, Restarts: 3}
	m := Echo(mixture.Gaussian, b, 2, 42, "0.5", KindLabels)
	want := map[string]string{
		"family": "gaussian", "structure": "diagonal", "components": "2", "seed": "42",
		"max_iterations": "0 (evaluate the start only)", "tolerance": "1e-08", "restarts": "3",
		"ridge": "0.5", "start": "labels",
	}
	if !reflect.DeepEqual(m, want) {
		t.Fatalf("echo %v", m)
	}
	EchoRange(m, Range{Min: 2, Max: 2}, b.Criterion)
	if len(m) != len(want) {
		t.Fatalf("a fixed K added %v", m)
	}
	EchoRange(m, Range{Min: 1, Max: 4, Selecting: true}, b.Criterion)
	if m["criterion"] != "aic" || m["components_min"] != "1" || m["components_max"] != "4" {
		t.Fatalf("range echo %v", m)
	}
	if got := (Range{Min: 1, Max: 4, Selecting: true}).Chosen(3, fitters.BIC); !reflect.DeepEqual(got, []string{"K=3 has the lowest BIC of K=1..4"}) {
		t.Fatalf("note %q", got)
	}
	if got := (Range{Min: 3, Max: 3}).Chosen(3, fitters.BIC); got != nil {
		t.Fatalf("note for a fixed K: %q", got)
	}
}

func TestDescribe(t *testing.T) {
	m := method(Plain, mixture.Full, mixture.Spherical)
	info, err := m.Describe(context.Background(), fitters.Info{Version: "1", Families: []mixture.Family{mixture.Gaussian}})
	if err != nil || info.Name != "demo" || info.Version != "1" || !reflect.DeepEqual(info.Structures, []mixture.Structure{mixture.Full, mixture.Spherical}) {
		t.Fatalf("info %+v, %v", info, err)
	}
	info.Structures[0] = mixture.Tied
	if m.Structures[0] != mixture.Full {
		t.Fatal("Describe shares the method's structures")
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := m.Describe(ctx, fitters.Info{}); fitters.CodeOf(err) != fitters.Canceled {
		t.Fatalf("cancelled: %v", err)
	}
}
