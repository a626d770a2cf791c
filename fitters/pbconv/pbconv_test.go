package pbconv_test

import (
	"math"
	"reflect"
	"strings"
	"testing"
	"time"

	"google.golang.org/protobuf/proto"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/mixture"
	"github.com/mixd-dev/mixd/fitters/pbconv"
	fitterv1 "github.com/mixd-dev/mixd/proto/mixd/fitter/v1"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// pumpParams is a two-component model of pumping-station readings
// (flow, motor current, vibration); the numbers are made up for the test.
func pumpParams() mixture.Params {
	return mixture.Params{
		Dim:       3,
		Features:  []string{"flow", "motor_current", "vibration"},
		Family:    mixture.StudentT,
		Structure: mixture.Full,
		Components: []mixture.Component{
			{Weight: 0.625, Mean: []float64{41.5, 12.25, 0.75}, Cov: []float64{4, 0.5, 0, 0.5, 1, 0.125, 0, 0.125, 0.0625}, DF: 7.5},
			{Weight: 0.375, Mean: []float64{18, 6.5, 2.25}, Cov: []float64{9, -1, 0, -1, 2, 0.25, 0, 0.25, 0.5}, DF: 3},
		},
	}
}

// requireAllFieldsSet fails when a field of v (a struct) is the zero value:
// the fixtures below must exercise every field, so a field added to the
// contract later without a conversion shows up as a failed round trip.
func requireAllFieldsSet(t *testing.T, v any) {
	t.Helper()
	rv := reflect.ValueOf(v)
	for i := 0; i < rv.NumField(); i++ {
		if rv.Field(i).IsZero() {
			t.Fatalf("fixture %T leaves field %s unset; set it so the round trip covers it", v, rv.Type().Field(i).Name)
		}
	}
}

func fullSettings() fitters.Settings {
	start := pumpParams()
	start.Family = mixture.Gaussian
	for i := range start.Components {
		start.Components[i].DF = 0
	}
	return fitters.Settings{
		Components: 2, MinComponents: 1, MaxComponents: 4, Criterion: fitters.AIC,
		Family: mixture.StudentT, Structure: mixture.Diagonal, Seed: 1<<63 + 12345,
		MaxIterations: 250, Tolerance: 1e-7, Restarts: 3, Ridge: 1e-6,
		Start: &start, Labels: []int{0, 1, 1}, Options: map[string]string{"df_update": "per_component"},
	}
}

func fullReport() fitters.Report {
	return fitters.Report{
		Iterations: 17, Converged: true, Objective: "log_likelihood",
		LogLikelihood: -1234.5, Bound: -1240.25, BIC: 2530.75, AIC: 2499.5,
		History: []float64{-1500, -1300, -1234.5},
		Selection: []fitters.SelectionRow{
			{Components: 1, LogLikelihood: -1400, BIC: 2850, AIC: 2820, Converged: true, Iterations: 3},
			{Components: 2, LogLikelihood: -1234.5, BIC: 2530.75, AIC: 2499.5, Converged: false, Iterations: 17},
		},
		FlaggedRows:         4,
		OutlierLevel:        0.001,
		EffectiveComponents: 2,
		Notes:               []string{"component 1 collapsed at iteration 5 and was re-seeded at row 88"},
		Settings:            map[string]string{"tolerance": "1e-07", "restarts": "3"},
	}
}

func fullInfo() fitters.Info {
	return fitters.Info{
		Name: "em", Version: "1.2.0", Description: "expectation-maximisation",
		Families:   []mixture.Family{mixture.Gaussian, mixture.StudentT},
		Structures: []mixture.Structure{mixture.Full, mixture.Diagonal, mixture.Spherical, mixture.Tied},
		Options:    []fitters.OptionInfo{{Name: "df_update", Description: "how degrees of freedom are updated", Default: "per_component"}},
	}
}

func TestFixturesCoverEveryField(t *testing.T) {
	requireAllFieldsSet(t, fullSettings())
	requireAllFieldsSet(t, fullReport())
	requireAllFieldsSet(t, fullReport().Selection[0])
	requireAllFieldsSet(t, fullInfo())
	requireAllFieldsSet(t, fullInfo().Options[0])
	requireAllFieldsSet(t, pumpParams())
	requireAllFieldsSet(t, pumpParams().Components[0])
}

func TestParamsRoundTrip(t *testing.T) {
	tests := []struct {
		name string
		p    mixture.Params
	}{
		{"student-t full with features", pumpParams()},
		{"gaussian spherical no features", mixture.Params{Dim: 1, Family: mixture.Gaussian, Structure: mixture.Spherical,
			Components: []mixture.Component{{Weight: 1, Mean: []float64{-3.5}, Cov: []float64{0.25}}}}},
		{"tied with extreme values", mixture.Params{Dim: 2, Family: mixture.Gaussian, Structure: mixture.Tied,
			Components: []mixture.Component{
				{Weight: math.SmallestNonzeroFloat64, Mean: []float64{math.MaxFloat64, -0.0}, Cov: []float64{1e300, 0, 0, 1e-300}},
				{Weight: 1, Mean: []float64{1, 2}, Cov: []float64{1e300, 0, 0, 1e-300}},
			}}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			pb := pbconv.ParamsToProto(tt.p)
			// Through the wire format, as the daemon and plugins see it.
			b, err := proto.Marshal(pb)
			if err != nil {
				t.Fatal(err)
			}
			var back mixdv1.Parameters
			if err := proto.Unmarshal(b, &back); err != nil {
				t.Fatal(err)
			}
			got, err := pbconv.ParamsFromProto(&back)
			if err != nil {
				t.Fatalf("ParamsFromProto: %v", err)
			}
			if !reflect.DeepEqual(got, tt.p) {
				t.Fatalf("round trip changed the parameters:\n got %+v\nwant %+v", got, tt.p)
			}
		})
	}
}

func TestParamsToProtoCopies(t *testing.T) {
	p := pumpParams()
	pb := pbconv.ParamsToProto(p)
	pb.Components[0].Mean[0] = 999
	pb.FeatureNames[0] = "changed"
	if p.Components[0].Mean[0] == 999 || p.Features[0] == "changed" {
		t.Fatal("ParamsToProto shares slices with its input")
	}
	back, err := pbconv.ParamsFromProto(pbconv.ParamsToProto(p))
	if err != nil {
		t.Fatal(err)
	}
	back.Components[1].Cov[0] = -1
	if p.Components[1].Cov[0] == -1 {
		t.Fatal("ParamsFromProto shares slices with the message")
	}
}

func TestParamsFromProtoErrors(t *testing.T) {
	valid := func() *mixdv1.Parameters { return pbconv.ParamsToProto(pumpParams()) }
	tests := []struct {
		name   string
		mutate func(pb *mixdv1.Parameters) *mixdv1.Parameters
		want   string
	}{
		{"nil", func(*mixdv1.Parameters) *mixdv1.Parameters { return nil }, "parameters: missing"},
		{"zero dimension", func(pb *mixdv1.Parameters) *mixdv1.Parameters { pb.Dimension = 0; return pb }, "parameters.dimension: must be at least 1, got 0"},
		{"negative dimension", func(pb *mixdv1.Parameters) *mixdv1.Parameters { pb.Dimension = -2; return pb }, "parameters.dimension"},
		{"feature count", func(pb *mixdv1.Parameters) *mixdv1.Parameters { pb.FeatureNames = pb.FeatureNames[:2]; return pb }, "parameters.feature_names: has 2 names, want 0 or dimension = 3"},
		{"empty feature", func(pb *mixdv1.Parameters) *mixdv1.Parameters { pb.FeatureNames[1] = ""; return pb }, "parameters.feature_names[1]: empty name"},
		{"duplicate feature", func(pb *mixdv1.Parameters) *mixdv1.Parameters { pb.FeatureNames[2] = "flow"; return pb }, `parameters.feature_names[2]: "flow" repeats feature_names[0]`},
		{"family unset", func(pb *mixdv1.Parameters) *mixdv1.Parameters { pb.Family = 0; return pb }, "parameters.family: not set"},
		{"family unknown", func(pb *mixdv1.Parameters) *mixdv1.Parameters { pb.Family = 9; return pb }, "parameters.family: unknown family value 9"},
		{"structure unset", func(pb *mixdv1.Parameters) *mixdv1.Parameters { pb.CovarianceStructure = 0; return pb }, "parameters.covariance_structure: not set"},
		{"structure unknown", func(pb *mixdv1.Parameters) *mixdv1.Parameters { pb.CovarianceStructure = 5; return pb }, "parameters.covariance_structure: unknown covariance structure value 5"},
		{"no components", func(pb *mixdv1.Parameters) *mixdv1.Parameters { pb.Components = nil; return pb }, "parameters.components: at least one component is required"},
		{"nil component", func(pb *mixdv1.Parameters) *mixdv1.Parameters { pb.Components[1] = nil; return pb }, "parameters.components[1]: missing"},
		{"mean length", func(pb *mixdv1.Parameters) *mixdv1.Parameters {
			pb.Components[1].Mean = pb.Components[1].Mean[:2]
			return pb
		}, "parameters.components[1].mean: has 2 values, want dimension = 3"},
		{"cov length", func(pb *mixdv1.Parameters) *mixdv1.Parameters {
			pb.Components[0].Covariance = pb.Components[0].Covariance[:8]
			return pb
		}, "parameters.components[0].covariance: has 8 values, want dimension² = 9"},
		{"NaN mean", func(pb *mixdv1.Parameters) *mixdv1.Parameters { pb.Components[1].Mean[2] = math.NaN(); return pb }, "parameters.components[1].mean[2]: not a finite number (NaN)"},
		{"Inf cov", func(pb *mixdv1.Parameters) *mixdv1.Parameters {
			pb.Components[0].Covariance[4] = math.Inf(1)
			return pb
		}, "parameters.components[0].covariance[4]: not a finite number (+Inf)"},
		{"NaN weight", func(pb *mixdv1.Parameters) *mixdv1.Parameters { pb.Components[0].Weight = math.NaN(); return pb }, "parameters.components[0].weight: not a finite number"},
		{"Inf df", func(pb *mixdv1.Parameters) *mixdv1.Parameters {
			pb.Components[1].DegreesOfFreedom = math.Inf(-1)
			return pb
		}, "parameters.components[1].degrees_of_freedom: not a finite number"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := pbconv.ParamsFromProto(tt.mutate(valid()))
			if err == nil || !strings.Contains(err.Error(), tt.want) {
				t.Fatalf("error = %v, want it to contain %q", err, tt.want)
			}
		})
	}
}

func TestEnums(t *testing.T) {
	for _, f := range []mixture.Family{0, mixture.Gaussian, mixture.StudentT} {
		got, err := pbconv.FamilyFromProto(pbconv.FamilyToProto(f))
		if err != nil || got != f {
			t.Errorf("family %v: round trip gave %v, %v", f, got, err)
		}
	}
	for _, s := range []mixture.Structure{0, mixture.Full, mixture.Diagonal, mixture.Spherical, mixture.Tied} {
		got, err := pbconv.StructureFromProto(pbconv.StructureToProto(s))
		if err != nil || got != s {
			t.Errorf("structure %v: round trip gave %v, %v", s, got, err)
		}
	}
	for _, c := range []fitters.Criterion{0, fitters.BIC, fitters.AIC} {
		got, err := pbconv.CriterionFromProto(pbconv.CriterionToProto(c))
		if err != nil || got != c {
			t.Errorf("criterion %v: round trip gave %v, %v", c, got, err)
		}
	}
	// The enum numbers are part of the public API: pin them.
	if pbconv.FamilyToProto(mixture.StudentT) != mixdv1.Family_FAMILY_STUDENT_T ||
		pbconv.StructureToProto(mixture.Tied) != mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_TIED ||
		pbconv.CriterionToProto(fitters.AIC) != mixdv1.Criterion_CRITERION_AIC {
		t.Error("enum mapping changed")
	}
	// Unknown Go values are passed through and rejected on the way back.
	errs := []struct {
		err  error
		want string
	}{
		{second(pbconv.FamilyFromProto(pbconv.FamilyToProto(mixture.Family(7)))), "family: unknown family value 7"},
		{second(pbconv.StructureFromProto(pbconv.StructureToProto(mixture.Structure(-1)))), "covariance_structure: unknown covariance structure value -1"},
		{second(pbconv.CriterionFromProto(pbconv.CriterionToProto(fitters.Criterion(3)))), "criterion: unknown criterion value 3"},
	}
	for _, e := range errs {
		if e.err == nil || e.err.Error() != e.want {
			t.Errorf("error = %v, want %q", e.err, e.want)
		}
	}
}

func second[T any](_ T, err error) error { return err }

func TestSettingsRoundTrip(t *testing.T) {
	s := fullSettings()
	pb, err := pbconv.SettingsToProto(s)
	if err != nil {
		t.Fatal(err)
	}
	if !pb.GetHasLabels() {
		t.Error("has_labels not set for settings with labels")
	}
	b, err := proto.Marshal(pb)
	if err != nil {
		t.Fatal(err)
	}
	var back fitterv1.Settings
	if err := proto.Unmarshal(b, &back); err != nil {
		t.Fatal(err)
	}
	got, err := pbconv.SettingsFromProto(&back)
	if err != nil {
		t.Fatal(err)
	}
	want := s
	want.Labels = nil // labels travel with the data chunks
	if !reflect.DeepEqual(got, want) {
		t.Fatalf("round trip changed the settings:\n got %+v\nwant %+v", got, want)
	}
	// Zero settings stay zero ("fitter's default").
	zero, err := pbconv.SettingsToProto(fitters.Settings{})
	if err != nil {
		t.Fatal(err)
	}
	if got, err := pbconv.SettingsFromProto(zero); err != nil || !reflect.DeepEqual(got, fitters.Settings{}) {
		t.Fatalf("zero settings round trip = %+v, %v", got, err)
	}
}

func TestSettingsErrors(t *testing.T) {
	valid := func() *fitterv1.Settings {
		pb, err := pbconv.SettingsToProto(fullSettings())
		if err != nil {
			t.Fatal(err)
		}
		return pb
	}
	tests := []struct {
		name string
		pb   func() *fitterv1.Settings
		want string
	}{
		{"nil", func() *fitterv1.Settings { return nil }, "settings: missing"},
		{"criterion", func() *fitterv1.Settings { pb := valid(); pb.Criterion = 4; return pb }, "settings.criterion: unknown criterion value 4"},
		{"family", func() *fitterv1.Settings { pb := valid(); pb.Family = 3; return pb }, "settings.family: unknown family value 3"},
		{"structure", func() *fitterv1.Settings { pb := valid(); pb.CovarianceStructure = 8; return pb }, "settings.covariance_structure: unknown covariance structure value 8"},
		{"tolerance", func() *fitterv1.Settings { pb := valid(); pb.Tolerance = math.NaN(); return pb }, "settings.tolerance: not a finite number (NaN)"},
		{"ridge", func() *fitterv1.Settings { pb := valid(); pb.Ridge = math.Inf(1); return pb }, "settings.ridge: not a finite number (+Inf)"},
		{"start", func() *fitterv1.Settings { pb := valid(); pb.Start.Components[1].Mean[0] = math.NaN(); return pb },
			"settings.start.components[1].mean[0]: not a finite number"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := pbconv.SettingsFromProto(tt.pb())
			if err == nil || !strings.Contains(err.Error(), tt.want) {
				t.Fatalf("error = %v, want it to contain %q", err, tt.want)
			}
		})
	}
	for _, tt := range []struct {
		s    fitters.Settings
		want string
	}{
		{fitters.Settings{Components: math.MaxInt32 + 1}, "settings.components: 2147483648 is outside the 32-bit range"},
		{fitters.Settings{Restarts: math.MinInt32 - 1}, "settings.restarts"},
		{fitters.Settings{MaxIterations: 1 << 40}, "settings.max_iterations"},
	} {
		if _, err := pbconv.SettingsToProto(tt.s); err == nil || !strings.Contains(err.Error(), tt.want) {
			t.Errorf("SettingsToProto(%+v) error = %v, want %q", tt.s, err, tt.want)
		}
	}
}

func TestReportRoundTrip(t *testing.T) {
	for _, r := range []fitters.Report{fullReport(), {}} {
		b, err := proto.Marshal(pbconv.ReportToProto(r))
		if err != nil {
			t.Fatal(err)
		}
		var back fitterv1.Report
		if err := proto.Unmarshal(b, &back); err != nil {
			t.Fatal(err)
		}
		got, err := pbconv.ReportFromProto(&back)
		if err != nil {
			t.Fatal(err)
		}
		if !reflect.DeepEqual(got, r) {
			t.Fatalf("round trip changed the report:\n got %+v\nwant %+v", got, r)
		}
	}
	if _, err := pbconv.ReportFromProto(nil); err == nil || err.Error() != "report: missing" {
		t.Errorf("nil report error = %v", err)
	}
	pb := pbconv.ReportToProto(fullReport())
	pb.Selection[1] = nil
	if _, err := pbconv.ReportFromProto(pb); err == nil || err.Error() != "report.selection[1]: missing" {
		t.Errorf("nil selection row error = %v", err)
	}
	if got := pbconv.ReportToProto(fitters.Report{Iterations: math.MaxInt32 + 5}).GetIterations(); got != math.MaxInt32 {
		t.Errorf("iterations beyond 32 bits = %d, want saturation at %d", got, math.MaxInt32)
	}
}

func TestInfoRoundTrip(t *testing.T) {
	in := fullInfo()
	pb := pbconv.InfoToProto(in)
	if pb.GetSource() != "" || pb.GetSha256() != "" {
		t.Error("InfoToProto must leave source and sha256 to the caller")
	}
	got, err := pbconv.InfoFromProto(pb)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(got, in) {
		t.Fatalf("round trip changed the info:\n got %+v\nwant %+v", got, in)
	}
	tests := []struct {
		mutate func(*mixdv1.FitterInfo) *mixdv1.FitterInfo
		want   string
	}{
		{func(*mixdv1.FitterInfo) *mixdv1.FitterInfo { return nil }, "fitter_info: missing"},
		{func(pb *mixdv1.FitterInfo) *mixdv1.FitterInfo { pb.Families[1] = 5; return pb }, "fitter_info.families[1]: unknown family value 5"},
		{func(pb *mixdv1.FitterInfo) *mixdv1.FitterInfo { pb.CovarianceStructures[3] = 9; return pb }, "fitter_info.covariance_structures[3]: unknown covariance structure value 9"},
		{func(pb *mixdv1.FitterInfo) *mixdv1.FitterInfo { pb.Options[0] = nil; return pb }, "fitter_info.options[0]: missing"},
	}
	for _, tt := range tests {
		if _, err := pbconv.InfoFromProto(tt.mutate(pbconv.InfoToProto(in))); err == nil || err.Error() != tt.want {
			t.Errorf("error = %v, want %q", err, tt.want)
		}
	}
}

func TestProgressToProto(t *testing.T) {
	pb := pbconv.ProgressToProto(fitters.Progress{Components: 3, Restart: 1, Iteration: 12, Objective: -88.5, Elapsed: 1500 * time.Millisecond})
	if pb.GetComponents() != 3 || pb.GetRestart() != 1 || pb.GetIteration() != 12 || pb.GetObjective() != -88.5 || pb.GetElapsed().AsDuration() != 1500*time.Millisecond {
		t.Fatalf("ProgressToProto = %v", pb)
	}
}

func TestLittleEndian(t *testing.T) {
	vs := []float64{0, -0.0, 1.5, math.Inf(-1), math.MaxFloat64, math.SmallestNonzeroFloat64}
	b := pbconv.EncodeFloat64s(vs)
	// 1.5 is 0x3FF8000000000000; little-endian puts the low byte first
	// (IEEE 754 binary64 layout, common practice).
	if want := []byte{0, 0, 0, 0, 0, 0, 0xF8, 0x3F}; string(b[16:24]) != string(want) {
		t.Fatalf("encoding of 1.5 = % x, want % x", b[16:24], want)
	}
	got, err := pbconv.DecodeFloat64s(b)
	if err != nil {
		t.Fatal(err)
	}
	for i := range vs {
		if math.Float64bits(got[i]) != math.Float64bits(vs[i]) {
			t.Fatalf("value %d: got %v want %v", i, got[i], vs[i])
		}
	}
	is := []int32{0, -1, 7, math.MaxInt32, math.MinInt32}
	bi := pbconv.EncodeInt32s(is)
	if want := []byte{0xFF, 0xFF, 0xFF, 0xFF}; string(bi[4:8]) != string(want) {
		t.Fatalf("encoding of -1 = % x", bi[4:8])
	}
	goti, err := pbconv.DecodeInt32s(bi)
	if err != nil || !reflect.DeepEqual(goti, is) {
		t.Fatalf("int32 round trip = %v, %v", goti, err)
	}
	if _, err := pbconv.DecodeFloat64s(make([]byte, 13)); err == nil || !strings.Contains(err.Error(), "13 bytes, not a multiple of 8") {
		t.Errorf("DecodeFloat64s(13 bytes) error = %v", err)
	}
	if _, err := pbconv.DecodeInt32s(make([]byte, 6)); err == nil || !strings.Contains(err.Error(), "6 bytes, not a multiple of 4") {
		t.Errorf("DecodeInt32s(6 bytes) error = %v", err)
	}
}

// FuzzParamsFromProto feeds arbitrary bytes through the wire format: decoding
// must never panic, and whatever it accepts must survive a round trip.
func FuzzParamsFromProto(f *testing.F) {
	b, _ := proto.Marshal(pbconv.ParamsToProto(pumpParams()))
	f.Add(b)
	f.Add([]byte{})
	f.Fuzz(func(t *testing.T, b []byte) {
		var pb mixdv1.Parameters
		if proto.Unmarshal(b, &pb) != nil {
			return
		}
		p, err := pbconv.ParamsFromProto(&pb)
		if err != nil {
			return
		}
		back, err := pbconv.ParamsFromProto(pbconv.ParamsToProto(p))
		if err != nil {
			t.Fatalf("accepted parameters fail a round trip: %v", err)
		}
		if !reflect.DeepEqual(back, p) {
			t.Fatal("accepted parameters change in a round trip")
		}
	})
}

// FuzzSettingsFromProto checks that no settings message makes the decoder panic.
func FuzzSettingsFromProto(f *testing.F) {
	pb, _ := pbconv.SettingsToProto(fullSettings())
	b, _ := proto.Marshal(pb)
	f.Add(b)
	f.Fuzz(func(t *testing.T, b []byte) {
		var pb fitterv1.Settings
		if proto.Unmarshal(b, &pb) != nil {
			return
		}
		_, _ = pbconv.SettingsFromProto(&pb)
	})
}

// FuzzDecodeFloat64s checks decode(encode(x)) == x bit for bit for any bytes
// of a valid length, and an error otherwise.
func FuzzDecodeFloat64s(f *testing.F) {
	f.Add([]byte{0, 0, 0, 0, 0, 0, 0xF8, 0x3F})
	f.Fuzz(func(t *testing.T, b []byte) {
		vs, err := pbconv.DecodeFloat64s(b)
		if (err != nil) != (len(b)%8 != 0) {
			t.Fatalf("len %d: error %v", len(b), err)
		}
		if err == nil && string(pbconv.EncodeFloat64s(vs)) != string(b) {
			t.Fatal("re-encoding differs")
		}
	})
}
