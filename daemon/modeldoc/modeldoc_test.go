package modeldoc

import (
	"bytes"
	"encoding/json"
	"flag"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/types/known/durationpb"
)

var update = flag.Bool("update", false, "rewrite the golden files in testdata/")

func TestGolden(t *testing.T) {
	for _, tc := range []struct {
		file  string
		model *mixdv1.Model
	}{
		{"pump-station.json", pumpModel()},
		{"pump-station-robust.json", robustModel()},
	} {
		t.Run(tc.file, func(t *testing.T) {
			got, err := Encode(tc.model)
			if err != nil {
				t.Fatalf("Encode: %v", err)
			}
			golden := filepath.Join("testdata", tc.file)
			if *update {
				if err := os.WriteFile(golden, got, 0o644); err != nil {
					t.Fatal(err)
				}
			}
			want, err := os.ReadFile(golden)
			if err != nil {
				t.Fatalf("%v (run go test -update to create it)", err)
			}
			if !bytes.Equal(got, want) {
				t.Errorf("Encode differs from %s (run go test -update if the change is intended)\ngot:\n%s\nwant:\n%s", golden, got, want)
			}
			back, err := Decode(want)
			if err != nil {
				t.Fatalf("Decode(%s): %v", golden, err)
			}
			if !proto.Equal(back, tc.model) {
				t.Errorf("Decode(%s) = %v, want %v", golden, back, tc.model)
			}
		})
	}
}

// TestFormatExample keeps the example in FORMAT.md a valid document of the
// pump-station model.
func TestFormatExample(t *testing.T) {
	md, err := os.ReadFile("FORMAT.md")
	if err != nil {
		t.Fatal(err)
	}
	blocks := regexp.MustCompile("(?s)```json\n(.*?)```").FindAllSubmatch(md, -1)
	if len(blocks) == 0 {
		t.Fatal("FORMAT.md has no ```json block")
	}
	m, err := Decode(blocks[0][1])
	if err != nil {
		t.Fatalf("FORMAT.md example: %v", err)
	}
	if !proto.Equal(m, pumpModel()) {
		t.Errorf("FORMAT.md example decodes to %v, want the pump-station fixture", m)
	}
	golden, err := os.ReadFile(filepath.Join("testdata", "pump-station.json"))
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(blocks[0][1], golden) {
		t.Errorf("FORMAT.md example differs from testdata/pump-station.json; paste the golden file into FORMAT.md")
	}
}

// TestFloatRoundTrip checks that every finite float64 survives
// Encode/Decode bit for bit, including -0, subnormals and the extremes.
func TestFloatRoundTrip(t *testing.T) {
	special := []float64{
		0, math.Copysign(0, -1), math.SmallestNonzeroFloat64, -math.SmallestNonzeroFloat64,
		0x1p-1022, math.MaxFloat64, -math.MaxFloat64, 0.1, 1.0 / 3, 2.0 / 3, 1e21, 1e-7,
		123456789012345678, 9007199254740993, math.Pi, math.Nextafter(1, 2), math.Nextafter(1, 0),
	}
	rng := rand.New(rand.NewPCG(1, 2))
	values := append([]float64(nil), special...)
	for len(values) < 20000 {
		f := math.Float64frombits(rng.Uint64())
		if finite(f) {
			values = append(values, f)
		}
	}
	const chunk = 500
	for start := 0; start < len(values); start += chunk {
		vals := values[start:min(start+chunk, len(values))]
		m := pumpModel()
		m.Report.History = vals
		m.Report.LogLikelihood = vals[0]
		m.Report.Bic = vals[1]
		m.Report.Aic = vals[2]
		m.Report.Bound = vals[3]
		b, err := Encode(m)
		if err != nil {
			t.Fatalf("Encode: %v", err)
		}
		back, err := Decode(b)
		if err != nil {
			t.Fatalf("Decode: %v", err)
		}
		got := back.Report.History
		if len(got) != len(vals) {
			t.Fatalf("history has %d values, want %d", len(got), len(vals))
		}
		for i := range vals {
			if math.Float64bits(got[i]) != math.Float64bits(vals[i]) {
				t.Errorf("history[%d] = %v (bits %x), want %v (bits %x)", i, got[i], math.Float64bits(got[i]), vals[i], math.Float64bits(vals[i]))
			}
		}
		r := back.Report
		if r.LogLikelihood != vals[0] || r.Bic != vals[1] || r.Aic != vals[2] || r.Bound != vals[3] {
			t.Errorf("scalar report fields changed: %v %v %v %v, want %v", r.LogLikelihood, r.Bic, r.Aic, r.Bound, vals[:4])
		}
	}
}

// TestParameterRoundTrip builds random valid models (random 53-bit
// mantissas in every parameter) and checks Decode(Encode(m)) == m exactly.
func TestParameterRoundTrip(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for trial := range 300 {
		dim := 1 + rng.IntN(4)
		k := 1 + rng.IntN(3)
		m := &mixdv1.Model{
			Name: "models/random",
			Parameters: &mixdv1.Parameters{
				Dimension:           int32(dim),
				Family:              mixdv1.Family_FAMILY_STUDENT_T,
				CovarianceStructure: mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_FULL,
			},
		}
		rest := 1.0
		for c := range k {
			w := rest
			if c < k-1 {
				w = rest * rng.Float64()
			}
			rest -= w
			mean := make([]float64, dim)
			for i := range mean {
				mean[i] = (rng.Float64() - 0.5) * math.Pow(10, float64(rng.IntN(20)-10))
			}
			// A = B Bᵀ + D: symmetric positive definite with random mantissas.
			bm := make([]float64, dim*dim)
			for i := range bm {
				bm[i] = rng.Float64() - 0.5
			}
			cov := make([]float64, dim*dim)
			for i := range dim {
				for j := 0; j <= i; j++ {
					s := 0.0
					for l := range dim {
						s += bm[i*dim+l] * bm[j*dim+l]
					}
					if i == j {
						s += 0.5 + rng.Float64()
					}
					cov[i*dim+j], cov[j*dim+i] = s, s
				}
			}
			m.Parameters.Components = append(m.Parameters.Components, &mixdv1.Component{
				Weight: w, Mean: mean, Covariance: cov, DegreesOfFreedom: 0.5 + 100*rng.Float64(),
			})
		}
		b, err := Encode(m)
		if err != nil {
			t.Fatalf("trial %d: Encode: %v", trial, err)
		}
		back, err := Decode(b)
		if err != nil {
			t.Fatalf("trial %d: Decode: %v\n%s", trial, err, b)
		}
		if !proto.Equal(back, m) {
			t.Fatalf("trial %d: round trip changed the model\nwant %v\n got %v", trial, m, back)
		}
	}
}

func TestElapsedSeconds(t *testing.T) {
	for _, tc := range []struct {
		text    string
		seconds int64
		nanos   int32
	}{
		{"0", 0, 0},
		{"0.000000001", 0, 1},
		{"12.5", 12, 500_000_000},
		{"315576000000", 315576000000, 0},
		{"86400.123456789", 86400, 123456789},
	} {
		d, err := parseSeconds(tc.text)
		if err != nil {
			t.Errorf("parseSeconds(%q): %v", tc.text, err)
			continue
		}
		if d.Seconds != tc.seconds || d.Nanos != tc.nanos {
			t.Errorf("parseSeconds(%q) = %ds %dns, want %ds %dns", tc.text, d.Seconds, d.Nanos, tc.seconds, tc.nanos)
		}
		s, err := formatSeconds(d)
		if err != nil || s != tc.text {
			t.Errorf("formatSeconds(%v) = %q, %v; want %q", d, s, err, tc.text)
		}
	}
	if _, err := formatSeconds(durationpb.New(-1)); err == nil {
		t.Error("formatSeconds accepted a negative duration")
	}
}

func TestEncodeErrors(t *testing.T) {
	for _, tc := range []struct {
		name   string
		mutate func(m *mixdv1.Model)
		want   string
	}{
		{"nil parameters", func(m *mixdv1.Model) { m.Parameters = nil }, "parameters: missing"},
		{"bad name", func(m *mixdv1.Model) { m.Name = "models/a b" }, `name: model id "a b": character ' '`},
		{"family unset", func(m *mixdv1.Model) { m.Parameters.Family = 0 }, "family: FAMILY_UNSPECIFIED"},
		{"structure unset", func(m *mixdv1.Model) { m.Parameters.CovarianceStructure = 0 }, "covariance_structure: COVARIANCE_STRUCTURE_UNSPECIFIED"},
		{"flat covariance length", func(m *mixdv1.Model) { m.Parameters.Components[1].Covariance = []float64{1, 0, 0, 1} }, "components[1].covariance: has 4 values, want 9"},
		{"NaN mean", func(m *mixdv1.Model) { m.Parameters.Components[0].Mean[2] = math.NaN() }, "components[0].mean[2]: NaN is not finite"},
		{"infinite covariance", func(m *mixdv1.Model) { m.Parameters.Components[0].Covariance[3] = math.Inf(1) }, "components[0].covariance[1][0]: +Inf is not finite"},
		{"NaN history", func(m *mixdv1.Model) { m.Report.History[1] = math.NaN() }, "fit_report.history[1]: NaN is not finite"},
		{"infinite bic", func(m *mixdv1.Model) { m.Report.Bic = math.Inf(-1) }, "fit_report.bic: -Inf is not finite"},
		{"negative elapsed", func(m *mixdv1.Model) { m.Report.Elapsed = durationpb.New(-5) }, "fit_report.elapsed_seconds:"},
		{"invalid UTF-8 note", func(m *mixdv1.Model) { m.Report.Notes = []string{"ok", "\xff"} }, "fit_report.notes[1]: not valid UTF-8"},
		{"invalid UTF-8 feature name", func(m *mixdv1.Model) { m.Parameters.FeatureNames[1] = "amp\xe8res" }, "feature_names[1]: not valid UTF-8"},
		{"invalid UTF-8 setting", func(m *mixdv1.Model) { m.Report.Settings["\xc3"] = "1" }, "fit_report.settings[\"\\xc3\"]: not valid UTF-8"},
		{"invalid UTF-8 fitter", func(m *mixdv1.Model) { m.Report.Fitter = "\xff" }, "fit_report.fitter: not valid UTF-8"},
		{"invalid create time", func(m *mixdv1.Model) { m.CreateTime.Nanos = 2_000_000_000 }, "created:"},
		{"nil component", func(m *mixdv1.Model) { m.Parameters.Components[1] = nil }, "components[1]: missing"},
		{"nil selection row", func(m *mixdv1.Model) { m.Report.Selection = []*mixdv1.SelectionRow{nil} }, "fit_report.selection[0]: missing"},
		{"NaN selection bic", func(m *mixdv1.Model) {
			m.Report.Selection = []*mixdv1.SelectionRow{{Components: 2, Bic: math.NaN()}}
		}, "fit_report.selection[0].bic: NaN is not finite"},
		{"NaN quantile", func(m *mixdv1.Model) { m.Report.TrainingQuantiles.LogDensities[0] = math.NaN() }, "fit_report.training_quantiles.log_densities[0]: NaN is not finite"},
		{"NaN weight", func(m *mixdv1.Model) { m.Parameters.Components[0].Weight = math.NaN() }, "components[0].weight: NaN is outside [0, 1]"},
		{"infinite degrees of freedom", func(m *mixdv1.Model) {
			m.Parameters.Family = mixdv1.Family_FAMILY_STUDENT_T
			m.Parameters.Components[0].DegreesOfFreedom = 3
			m.Parameters.Components[1].DegreesOfFreedom = math.Inf(1)
		}, "components[1].degrees_of_freedom: +Inf; student_t components need a positive finite value"},
		{"weights do not sum to 1", func(m *mixdv1.Model) { m.Parameters.Components[0].Weight = 0.5 }, "weights: sum to"},
		{"not positive definite", func(m *mixdv1.Model) {
			m.Parameters.Components[1].Covariance = []float64{1, 2, 0, 2, 1, 0, 0, 0, 1}
		}, "component 1"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			m := pumpModel()
			tc.mutate(m)
			_, err := Encode(m)
			if err == nil {
				t.Fatalf("Encode accepted the model; want an error containing %q", tc.want)
			}
			if !strings.Contains(err.Error(), tc.want) {
				t.Errorf("Encode error %q does not contain %q", err, tc.want)
			}
		})
	}
	if _, err := Encode(nil); err == nil {
		t.Error("Encode(nil) succeeded")
	}
}

// docMap decodes the golden pump-station document into a generic tree that
// a test can edit; numbers stay json.Number so nothing is lost.
func docMap(t *testing.T) map[string]any {
	t.Helper()
	b, err := Encode(pumpModel())
	if err != nil {
		t.Fatal(err)
	}
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.UseNumber()
	var m map[string]any
	if err := dec.Decode(&m); err != nil {
		t.Fatal(err)
	}
	return m
}

func comp(d map[string]any, k int) map[string]any {
	return d["components"].([]any)[k].(map[string]any)
}

func report(d map[string]any) map[string]any { return d["fit_report"].(map[string]any) }

func quant(d map[string]any) map[string]any {
	return report(d)["training_quantiles"].(map[string]any)
}

func num(s string) json.Number { return json.Number(s) }

func TestDecodeErrors(t *testing.T) {
	type doc = map[string]any
	for _, tc := range []struct {
		name   string
		mutate func(d doc)
		want   string
	}{
		// Format and version.
		{"format missing", func(d doc) { delete(d, "format") }, `format: missing (want "mixd-model")`},
		{"format wrong", func(d doc) { d["format"] = "tabular" }, `format: "tabular" is not a mixd model document`},
		{"format_version missing", func(d doc) { delete(d, "format_version") }, "format_version: missing"},
		{"format_version newer", func(d doc) { d["format_version"] = num("2") }, "format_version: 2 is newer than this build of mixd reads (up to 1)"},
		{"format_version newer with new fields", func(d doc) { d["format_version"] = num("7"); d["future"] = true }, "format_version: 7 is newer"},
		{"format_version zero", func(d doc) { d["format_version"] = num("0") }, "format_version: 0 is not a valid version"},
		{"format_version string", func(d doc) { d["format_version"] = "1" }, `format_version: "1" is not an integer`},
		{"format_version fraction", func(d doc) { d["format_version"] = num("1.5") }, "format_version: 1.5 is not an integer"},
		// Strict decoding.
		{"unknown top-level field", func(d doc) { d["colour"] = "blue" }, `unknown field "colour"`},
		{"unknown component field", func(d doc) { comp(d, 1)["variance"] = num("1") }, `unknown field "variance"`},
		{"unknown report field", func(d doc) { report(d)["score"] = num("1") }, `unknown field "score"`},
		{"field in other case", func(d doc) { d["Dimension"] = d["dimension"]; delete(d, "dimension") }, `unknown field "Dimension"`},
		{"field matching only by case folding", func(d doc) { comp(d, 0)["ſeed"] = num("1") }, `components[0]: unknown field "ſeed"`},
		{"null value", func(d doc) { comp(d, 1)["mean"].([]any)[2] = nil }, "components[1].mean[2]: null is not allowed"},
		{"null report", func(d doc) { d["fit_report"] = nil }, "fit_report: null is not allowed"},
		{"wrong type", func(d doc) { comp(d, 0)["weight"] = "0.7" }, "components[0].weight: got JSON string, want a finite number"},
		{"dimension not integer", func(d doc) { d["dimension"] = num("2.5") }, "dimension: got JSON number 2.5, want an integer"},
		{"number too large", func(d doc) { comp(d, 0)["mean"].([]any)[0] = num("1e400") }, "components[0].mean[0]: got JSON number 1e400, want a finite number"},
		// Identity.
		{"name missing", func(d doc) { delete(d, "name") }, "name: missing"},
		{"name with slash", func(d doc) { d["name"] = "models/pump" }, `name: model id "models/pump": character '/' at byte 6 is not allowed`},
		{"name too long", func(d doc) { d["name"] = strings.Repeat("p", 129) }, "name: model id has 129 characters, at most 128 allowed"},
		{"name dot-dot", func(d doc) { d["name"] = ".." }, `name: model id ".." is not allowed`},
		{"version negative", func(d doc) { d["version"] = num("-1") }, "version: -1 is negative"},
		{"created not a time", func(d doc) { d["created"] = "last tuesday" }, `created: "last tuesday" is not an RFC 3339 date and time`},
		{"created out of range", func(d doc) { d["created"] = "0000-06-01T00:00:00Z" }, "created: \"0000-06-01T00:00:00Z\" is out of range"},
		// Parameters.
		{"dimension missing", func(d doc) { delete(d, "dimension") }, "dimension: 0, want at least 1"},
		{"dimension negative", func(d doc) { d["dimension"] = num("-3") }, "dimension: -3, want at least 1"},
		{"dimension huge", func(d doc) { d["dimension"] = num("4000000000") }, "dimension: 4000000000 exceeds the limit 2147483647"},
		{"dimension disagrees", func(d doc) { d["dimension"] = num("2") }, "feature_names: 3 names, want none or 2 (the dimension)"},
		{"feature name empty", func(d doc) { d["feature_names"].([]any)[1] = "" }, "feature_names[1]: empty name"},
		{"feature name repeated", func(d doc) { d["feature_names"].([]any)[2] = "flow_lps" }, `feature_names[2]: "flow_lps" repeats feature_names[0]`},
		{"family missing", func(d doc) { delete(d, "family") }, "family: missing"},
		{"family unknown", func(d doc) { d["family"] = "laplace" }, `family: "laplace" is unknown`},
		{"structure missing", func(d doc) { delete(d, "covariance_structure") }, "covariance_structure: missing"},
		{"structure unknown", func(d doc) { d["covariance_structure"] = "banded" }, `covariance_structure: "banded" is unknown`},
		{"no components", func(d doc) { d["components"] = []any{} }, "components: missing or empty"},
		{"weight missing", func(d doc) { delete(comp(d, 1), "weight") }, "components[1].weight: missing"},
		{"weight above 1", func(d doc) { comp(d, 0)["weight"] = num("1.5") }, "components[0].weight: 1.5 is outside [0, 1]"},
		{"weight negative", func(d doc) { comp(d, 1)["weight"] = num("-0.2875") }, "components[1].weight: -0.2875 is outside [0, 1]"},
		{"mean missing", func(d doc) { delete(comp(d, 1), "mean") }, "components[1].mean: missing"},
		{"mean short", func(d doc) { comp(d, 1)["mean"] = []any{num("1"), num("2")} }, "components[1].mean: has 2 values, want 3 (the dimension)"},
		{"covariance missing", func(d doc) { delete(comp(d, 0), "covariance") }, "components[0].covariance: missing"},
		{"covariance rows", func(d doc) { c := comp(d, 0); c["covariance"] = c["covariance"].([]any)[:2] }, "components[0].covariance: has 2 rows, want 3 (the dimension)"},
		{"covariance row not square", func(d doc) {
			rows := comp(d, 1)["covariance"].([]any)
			rows[1] = rows[1].([]any)[:2]
		}, "components[1].covariance: row 1 has 2 values, want 3"},
		{"covariance not a matrix", func(d doc) { comp(d, 1)["covariance"] = []any{num("1"), num("2"), num("3")} }, "components[1].covariance[0]: got JSON number, want an array"},
		{"gaussian with degrees of freedom", func(d doc) { comp(d, 1)["degrees_of_freedom"] = num("5") }, "components[1].degrees_of_freedom: 5 given, but gaussian components have none"},
		{"student_t without degrees of freedom", func(d doc) { d["family"] = "student_t"; comp(d, 0)["degrees_of_freedom"] = num("3") }, "components[1].degrees_of_freedom: 0; student_t components need a positive finite value"},
		{"student_t negative degrees of freedom", func(d doc) {
			d["family"] = "student_t"
			comp(d, 0)["degrees_of_freedom"] = num("3")
			comp(d, 1)["degrees_of_freedom"] = num("-3")
		}, "components[1].degrees_of_freedom: -3; student_t components need a positive finite value"},
		// Model mathematics (fitters/mixture).
		{"weights do not sum to 1", func(d doc) { comp(d, 1)["weight"] = num("0.3") }, "weights: sum to"},
		{"covariance not symmetric", func(d doc) {
			comp(d, 0)["covariance"].([]any)[0].([]any)[1] = num("1.3")
		}, "component 0"},
		{"covariance not positive definite", func(d doc) {
			comp(d, 1)["covariance"] = []any{
				[]any{num("1"), num("2"), num("0")}, []any{num("2"), num("1"), num("0")}, []any{num("0"), num("0"), num("1")},
			}
		}, "component 1"},
		{"diagonal structure with off-diagonal entries", func(d doc) { d["covariance_structure"] = "diagonal" }, "diagonal structure needs zero off-diagonal entries"},
		{"tied structure with different matrices", func(d doc) { d["covariance_structure"] = "tied" }, "tied structure needs every covariance equal"},
		// Fit report.
		{"settings empty key", func(d doc) { report(d)["settings"].(map[string]any)[""] = "x" }, "fit_report.settings: empty setting name"},
		{"settings value not a string", func(d doc) { report(d)["settings"].(map[string]any)["restarts"] = num("4") }, "fit_report.settings.restarts: got JSON number, want a string"},
		{"settings repeated key", nil, "fit_report.settings.restarts: the field appears more than once"},
		{"seed negative", func(d doc) { report(d)["seed"] = num("-1") }, "fit_report.seed: got JSON number -1, want a non-negative integer"},
		{"iterations negative", func(d doc) { report(d)["iterations"] = num("-2") }, "fit_report.iterations: -2 is negative"},
		{"training_rows negative", func(d doc) { report(d)["training_rows"] = num("-2000") }, "fit_report.training_rows: -2000 is negative"},
		{"flagged_rows negative", func(d doc) { report(d)["flagged_rows"] = num("-1") }, "fit_report.flagged_rows: -1 is negative"},
		{"outlier_level one", func(d doc) { report(d)["outlier_level"] = num("1") }, "fit_report.outlier_level: 1 is outside [0, 1)"},
		{"effective_components negative", func(d doc) { report(d)["effective_components"] = num("-3") }, "fit_report.effective_components: -3 is negative"},
		{"elapsed negative", func(d doc) { report(d)["elapsed_seconds"] = num("-0.5") }, "fit_report.elapsed_seconds: -0.5 is negative"},
		{"elapsed exponent", func(d doc) { report(d)["elapsed_seconds"] = num("1e3") }, "fit_report.elapsed_seconds: 1e3 is not a plain decimal number of seconds"},
		{"elapsed too precise", func(d doc) { report(d)["elapsed_seconds"] = num("0.1234567891") }, "fit_report.elapsed_seconds: 0.1234567891 has more than 9 decimal places"},
		{"elapsed too long", func(d doc) { report(d)["elapsed_seconds"] = num("315576000000.5") }, "fit_report.elapsed_seconds: 315576000000.5 exceeds the limit"},
		{"selection components zero", func(d doc) {
			report(d)["selection"] = []any{map[string]any{"components": num("0"), "log_likelihood": num("-1")}}
		}, "fit_report.selection[0].components: 0, want at least 1"},
		{"selection iterations negative", func(d doc) {
			report(d)["selection"] = []any{
				map[string]any{"components": num("1"), "iterations": num("3")},
				map[string]any{"components": num("2"), "iterations": num("-3")},
			}
		}, "fit_report.selection[1].iterations: -3 is negative"},
		{"quantile lengths differ", func(d doc) { quant(d)["levels"] = []any{num("0.5")} }, "fit_report.training_quantiles.log_densities: has 4 values, want 1 (one per level)"},
		{"quantile level above 1", func(d doc) { quant(d)["levels"].([]any)[3] = num("1.5") }, "fit_report.training_quantiles.levels[3]: 1.5 is outside [0, 1]"},
		{"quantile level negative", func(d doc) { quant(d)["levels"].([]any)[0] = num("-0.001") }, "fit_report.training_quantiles.levels[0]: -0.001 is outside [0, 1]"},
		{"quantile levels not increasing", func(d doc) { quant(d)["levels"].([]any)[2] = num("0.01") }, "fit_report.training_quantiles.levels[2]: 0.01 is not greater than levels[1] = 0.01"},
		{"quantile values decreasing", func(d doc) { quant(d)["log_densities"].([]any)[1] = num("-20") }, "fit_report.training_quantiles.log_densities[1]: -20 is less than log_densities[0] = -14.75"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			var b []byte
			if tc.mutate == nil {
				// A repeated key cannot be built from a map; edit the text.
				good, err := Encode(pumpModel())
				if err != nil {
					t.Fatal(err)
				}
				b = bytes.Replace(good, []byte(`"restarts": "4"`), []byte(`"restarts": "4", "restarts": "5"`), 1)
				if bytes.Equal(b, good) {
					t.Fatal("test document lacks the restarts setting")
				}
			} else {
				d := docMap(t)
				tc.mutate(d)
				var err error
				if b, err = json.Marshal(d); err != nil {
					t.Fatal(err)
				}
			}
			m, err := Decode(b)
			if err == nil {
				t.Fatalf("Decode accepted the document (%v); want an error containing %q", m, tc.want)
			}
			if !strings.Contains(err.Error(), tc.want) {
				t.Errorf("Decode error\n  %q\ndoes not contain\n  %q", err, tc.want)
			}
			if !strings.HasPrefix(err.Error(), "model document: ") {
				t.Errorf("Decode error %q lacks the \"model document: \" prefix", err)
			}
		})
	}
}

func TestDecodeMalformed(t *testing.T) {
	good, err := Encode(pumpModel())
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name string
		in   []byte
		want string
	}{
		{"empty", nil, "empty input"},
		{"blank", []byte(" \n"), "empty input"},
		{"truncated", good[:len(good)/2], "malformed JSON"},
		{"trailing data", append(append([]byte{}, good...), "{}"...), "malformed JSON"},
		{"array", []byte(`[1, 2]`), "got JSON array, want an object"},
		{"NaN literal", bytes.Replace(good, []byte("42.5"), []byte("NaN"), 1), "malformed JSON"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Decode(tc.in)
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("Decode error = %v, want one containing %q", err, tc.want)
			}
		})
	}
}

func TestDecodeAcceptsOptionalFieldsLeftOut(t *testing.T) {
	b := []byte(`{"format": "mixd-model", "format_version": 1, "name": "p", "dimension": 1,
		"family": "gaussian", "covariance_structure": "spherical",
		"components": [{"weight": 1, "mean": [0], "covariance": [[1]]}]}`)
	m, err := Decode(b)
	if err != nil {
		t.Fatalf("Decode: %v", err)
	}
	if m.Name != "models/p" || m.Version != 0 || m.CreateTime != nil || m.Report != nil || len(m.Parameters.FeatureNames) != 0 {
		t.Errorf("Decode = %v", m)
	}
	// A created time with an offset is the same instant in UTC.
	b = bytes.Replace(b, []byte(`"dimension"`), []byte(`"created": "2026-03-14T08:30:00+02:00", "dimension"`), 1)
	m, err = Decode(b)
	if err != nil {
		t.Fatalf("Decode: %v", err)
	}
	if got := m.CreateTime.AsTime().Format("2006-01-02T15:04:05Z07:00"); got != "2026-03-14T06:30:00Z" {
		t.Errorf("created = %s, want 2026-03-14T06:30:00Z", got)
	}
}

func TestNames(t *testing.T) {
	for _, tc := range []struct {
		in, id string
		ok     bool
	}{
		{"pumps", "pumps", true},
		{"models/pumps", "pumps", true},
		{"Pump_Station-3.v2", "Pump_Station-3.v2", true},
		{strings.Repeat("a", 128), strings.Repeat("a", 128), true},
		{"...", "...", true},
		{"", "", false},
		{"models/", "", false},
		{".", "", false},
		{"..", "", false},
		{"models/..", "", false},
		{strings.Repeat("a", 129), "", false},
		{"a/b", "", false},
		{"models/a/b", "", false},
		{"pump station", "", false},
		{"pompe-é", "", false},
		{"a\x00", "", false},
	} {
		id, err := ParseName(tc.in)
		if tc.ok && (err != nil || id != tc.id) {
			t.Errorf("ParseName(%q) = %q, %v; want %q", tc.in, id, err, tc.id)
		}
		if !tc.ok && err == nil {
			t.Errorf("ParseName(%q) = %q, want an error", tc.in, id)
		}
	}
}

// TestReportFieldsOfLaterFitters checks that the report fields the Student-t
// and variational fitters add survive a round trip.
func TestReportFieldsOfLaterFitters(t *testing.T) {
	m := robustModel()
	m.Report = &mixdv1.FitReport{Fitter: "tmix", FitterVersion: "1.0.0", Objective: "log_likelihood",
		FlaggedRows: 4, OutlierLevel: 0.995, EffectiveComponents: 2}
	b, err := Encode(m)
	if err != nil {
		t.Fatal(err)
	}
	got, err := Decode(b)
	if err != nil {
		t.Fatal(err)
	}
	if r := got.GetReport(); r.GetOutlierLevel() != 0.995 || r.GetEffectiveComponents() != 2 || r.GetFlaggedRows() != 4 {
		t.Fatalf("report after round trip: %v", r)
	}
}
