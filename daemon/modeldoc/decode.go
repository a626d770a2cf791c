package modeldoc

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"reflect"
	"strconv"
	"strings"
	"time"
	"unicode/utf8"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
	"google.golang.org/protobuf/types/known/durationpb"
	"google.golang.org/protobuf/types/known/timestamppb"
)

// maxDurationSeconds is the largest elapsed time a document may hold: the
// range of google.protobuf.Duration, about 10,000 years.
const maxDurationSeconds = 315576000000

// Decode parses and fully validates a model document and returns the model
// it describes. It rejects unknown fields, a format_version newer than
// FormatVersion, shapes that disagree with "dimension", non-finite numbers,
// and parameters the model mathematics refuses (weights that do not sum to
// 1, covariances that are not symmetric positive definite or break the
// covariance structure, and so on). The error names the field.
//
// The returned model's Name is "models/{name}".
func Decode(b []byte) (*mixdv1.Model, error) {
	m, err := decode(b)
	if err != nil {
		return nil, fmt.Errorf("model document: %w", err)
	}
	return m, nil
}

func decode(b []byte) (*mixdv1.Model, error) {
	// Look at the format fields first, leniently, so that a document of a
	// newer format version gets a clear message rather than a complaint
	// about a field this build does not know.
	if len(bytes.TrimSpace(b)) == 0 {
		return nil, errors.New("empty input")
	}
	var head struct {
		Format        *string         `json:"format"`
		FormatVersion json.RawMessage `json:"format_version"`
	}
	if err := json.Unmarshal(b, &head); err != nil {
		return nil, jsonError(err, b)
	}
	if head.Format == nil {
		return nil, fmt.Errorf("format: missing (want %q)", Format)
	}
	if *head.Format != Format {
		return nil, fmt.Errorf("format: %q is not a mixd model document (want %q)", *head.Format, Format)
	}
	if head.FormatVersion == nil {
		return nil, fmt.Errorf("format_version: missing (want %d)", FormatVersion)
	}
	var version int64
	if err := json.Unmarshal(head.FormatVersion, &version); err != nil {
		return nil, fmt.Errorf("format_version: %s is not an integer", head.FormatVersion)
	}
	if version > FormatVersion {
		return nil, fmt.Errorf("format_version: %d is newer than this build of mixd reads (up to %d); use a newer mixd", version, FormatVersion)
	}
	if version < 1 {
		return nil, fmt.Errorf("format_version: %d is not a valid version (want %d)", version, FormatVersion)
	}

	if err := scan(b); err != nil {
		return nil, err
	}
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.DisallowUnknownFields()
	var d document
	if err := dec.Decode(&d); err != nil {
		return nil, jsonError(err, b)
	}
	return d.toModel()
}

// jsonError turns an encoding/json error into one that names the field in
// the document's own terms; b is the input, for locating type errors.
func jsonError(err error, b []byte) error {
	var syn *json.SyntaxError
	var typ *json.UnmarshalTypeError
	switch {
	case errors.As(err, &syn):
		return fmt.Errorf("malformed JSON at byte %d: %v", syn.Offset, syn)
	case errors.As(err, &typ):
		field := pathAt(b, typ.Offset)
		if field == "" {
			field = typ.Field
		}
		if field == "" {
			field = "document"
		}
		return fmt.Errorf("%s: got JSON %s, want %s", field, typ.Value, jsonKind(typ.Type))
	}
	msg := strings.TrimPrefix(err.Error(), "json: ")
	return errors.New(msg)
}

// jsonKind describes what JSON value a Go type takes.
func jsonKind(t reflect.Type) string {
	switch t.Kind() {
	case reflect.Float32, reflect.Float64:
		return "a finite number"
	case reflect.Int, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64:
		return fmt.Sprintf("an integer that fits in %d bits", t.Bits())
	case reflect.Uint, reflect.Uint8, reflect.Uint16, reflect.Uint32, reflect.Uint64:
		return fmt.Sprintf("a non-negative integer that fits in %d bits", t.Bits())
	case reflect.String:
		if t == reflect.TypeFor[json.Number]() {
			return "a number"
		}
		return "a string"
	case reflect.Bool:
		return "true or false"
	case reflect.Slice, reflect.Array:
		return "an array"
	case reflect.Map, reflect.Struct, reflect.Pointer:
		return "an object"
	}
	return t.String()
}

// toModel validates d and converts it. Encode runs it too, so that what is
// written is exactly what can be read.
func (d *document) toModel() (*mixdv1.Model, error) {
	if d.Format != Format {
		return nil, fmt.Errorf("format: %q is not a mixd model document (want %q)", d.Format, Format)
	}
	if d.FormatVersion != FormatVersion {
		return nil, fmt.Errorf("format_version: %d is not supported (want %d)", d.FormatVersion, FormatVersion)
	}
	m := &mixdv1.Model{}
	if d.Name == "" {
		return nil, errors.New("name: missing")
	}
	if err := ValidateID(d.Name); err != nil {
		return nil, fmt.Errorf("name: %w", err)
	}
	m.Name = NamePrefix + d.Name
	if d.Version < 0 {
		return nil, fmt.Errorf("version: %d is negative", d.Version)
	}
	m.Version = d.Version
	if d.Created != "" {
		t, err := time.Parse(time.RFC3339Nano, d.Created)
		if err != nil {
			return nil, fmt.Errorf("created: %q is not an RFC 3339 date and time", d.Created)
		}
		ts := timestamppb.New(t)
		if err := ts.CheckValid(); err != nil {
			return nil, fmt.Errorf("created: %q is out of range: %v", d.Created, err)
		}
		m.CreateTime = ts
	}
	params, err := d.parameters()
	if err != nil {
		return nil, err
	}
	m.Parameters = params
	if d.FitReport != nil {
		r, err := d.FitReport.toProto()
		if err != nil {
			return nil, err
		}
		m.Report = r
	}
	if err := checkMath(params); err != nil {
		return nil, err
	}
	return m, nil
}

func (d *document) parameters() (*mixdv1.Parameters, error) {
	if d.Dimension < 1 {
		return nil, fmt.Errorf("dimension: %d, want at least 1", d.Dimension)
	}
	if d.Dimension > math.MaxInt32 {
		return nil, fmt.Errorf("dimension: %d exceeds the limit %d", d.Dimension, math.MaxInt32)
	}
	dim := int(d.Dimension)
	p := &mixdv1.Parameters{Dimension: int32(dim)}

	if len(d.FeatureNames) != 0 && len(d.FeatureNames) != dim {
		return nil, fmt.Errorf("feature_names: %d names, want none or %d (the dimension)", len(d.FeatureNames), dim)
	}
	seen := make(map[string]int, len(d.FeatureNames))
	for i, f := range d.FeatureNames {
		if f == "" {
			return nil, fmt.Errorf("feature_names[%d]: empty name", i)
		}
		if !utf8.ValidString(f) {
			return nil, fmt.Errorf("feature_names[%d]: not valid UTF-8", i)
		}
		if j, ok := seen[f]; ok {
			return nil, fmt.Errorf("feature_names[%d]: %q repeats feature_names[%d]", i, f, j)
		}
		seen[f] = i
	}
	if len(d.FeatureNames) > 0 {
		p.FeatureNames = append([]string(nil), d.FeatureNames...)
	}

	switch d.Family {
	case "gaussian":
		p.Family = mixdv1.Family_FAMILY_GAUSSIAN
	case "student_t":
		p.Family = mixdv1.Family_FAMILY_STUDENT_T
	case "":
		return nil, errors.New(`family: missing (want "gaussian" or "student_t")`)
	default:
		return nil, fmt.Errorf(`family: %q is unknown (want "gaussian" or "student_t")`, d.Family)
	}
	switch d.CovarianceStructure {
	case "full":
		p.CovarianceStructure = mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_FULL
	case "diagonal":
		p.CovarianceStructure = mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_DIAGONAL
	case "spherical":
		p.CovarianceStructure = mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_SPHERICAL
	case "tied":
		p.CovarianceStructure = mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_TIED
	case "":
		return nil, errors.New(`covariance_structure: missing (want "full", "diagonal", "spherical" or "tied")`)
	default:
		return nil, fmt.Errorf(`covariance_structure: %q is unknown (want "full", "diagonal", "spherical" or "tied")`, d.CovarianceStructure)
	}

	if len(d.Components) == 0 {
		return nil, errors.New("components: missing or empty; a model needs at least one component")
	}
	p.Components = make([]*mixdv1.Component, len(d.Components))
	for k := range d.Components {
		c, err := d.Components[k].toProto(dim, d.Family)
		if err != nil {
			return nil, fmt.Errorf("components[%d].%w", k, err)
		}
		p.Components[k] = c
	}
	return p, nil
}

func (c *component) toProto(dim int, family string) (*mixdv1.Component, error) {
	if c.Weight == nil {
		return nil, errors.New("weight: missing")
	}
	w := *c.Weight
	if !finite(w) || w < 0 || w > 1 {
		return nil, fmt.Errorf("weight: %v is outside [0, 1]", w)
	}
	if c.Mean == nil {
		return nil, errors.New("mean: missing")
	}
	if len(c.Mean) != dim {
		return nil, fmt.Errorf("mean: has %d values, want %d (the dimension)", len(c.Mean), dim)
	}
	for i, v := range c.Mean {
		if !finite(v) {
			return nil, fmt.Errorf("mean[%d]: %v is not finite", i, v)
		}
	}
	if c.Covariance == nil {
		return nil, errors.New("covariance: missing")
	}
	if len(c.Covariance) != dim {
		return nil, fmt.Errorf("covariance: has %d rows, want %d (the dimension)", len(c.Covariance), dim)
	}
	cov := make([]float64, 0, dim*dim)
	for i, row := range c.Covariance {
		if len(row) != dim {
			return nil, fmt.Errorf("covariance: row %d has %d values, want %d", i, len(row), dim)
		}
		for j, v := range row {
			if !finite(v) {
				return nil, fmt.Errorf("covariance[%d][%d]: %v is not finite", i, j, v)
			}
		}
		cov = append(cov, row...)
	}
	df := c.DegreesOfFreedom
	switch family {
	case "gaussian":
		if df != 0 {
			return nil, fmt.Errorf("degrees_of_freedom: %v given, but gaussian components have none (leave it out)", df)
		}
	case "student_t":
		if !(df > 0) || !finite(df) {
			return nil, fmt.Errorf("degrees_of_freedom: %v; student_t components need a positive finite value", df)
		}
	}
	return &mixdv1.Component{Weight: w, Mean: append([]float64(nil), c.Mean...), Covariance: cov, DegreesOfFreedom: df}, nil
}

func (r *fitReport) toProto() (*mixdv1.FitReport, error) {
	const at = "fit_report."
	for _, s := range []struct{ field, v string }{
		{"fitter", r.Fitter}, {"fitter_version", r.FitterVersion}, {"objective", r.Objective},
	} {
		if !utf8.ValidString(s.v) {
			return nil, fmt.Errorf("%s%s: not valid UTF-8", at, s.field)
		}
	}
	out := &mixdv1.FitReport{
		Fitter:        r.Fitter,
		FitterVersion: r.FitterVersion,
		Seed:          r.Seed,
		Iterations:    r.Iterations,
		Converged:     r.Converged,
		Objective:     r.Objective,
		LogLikelihood: r.LogLikelihood,
		Bound:         r.Bound,
		Bic:           r.BIC,
		Aic:           r.AIC,
		TrainingRows:  r.TrainingRows,
		FlaggedRows:   r.FlaggedRows,

		OutlierLevel:        r.OutlierLevel,
		EffectiveComponents: r.EffectiveComponents,
	}
	if !(r.OutlierLevel >= 0 && r.OutlierLevel < 1) {
		return nil, fmt.Errorf("%soutlier_level: %v is outside [0, 1)", at, r.OutlierLevel)
	}
	if r.EffectiveComponents < 0 {
		return nil, fmt.Errorf("%seffective_components: %d is negative", at, r.EffectiveComponents)
	}
	if len(r.Settings) > 0 {
		out.Settings = make(map[string]string, len(r.Settings))
		for k, v := range r.Settings {
			if k == "" {
				return nil, fmt.Errorf("%ssettings: empty setting name", at)
			}
			if !utf8.ValidString(k) || !utf8.ValidString(v) {
				return nil, fmt.Errorf("%ssettings[%q]: not valid UTF-8", at, k)
			}
			out.Settings[k] = v
		}
	}
	if r.Iterations < 0 {
		return nil, fmt.Errorf("%siterations: %d is negative", at, r.Iterations)
	}
	for _, f := range []struct {
		field string
		v     float64
	}{{"log_likelihood", r.LogLikelihood}, {"bound", r.Bound}, {"bic", r.BIC}, {"aic", r.AIC}} {
		if !finite(f.v) {
			return nil, fmt.Errorf("%s%s: %v is not finite", at, f.field, f.v)
		}
	}
	if r.ElapsedSeconds != "" {
		d, err := parseSeconds(string(r.ElapsedSeconds))
		if err != nil {
			return nil, fmt.Errorf("%selapsed_seconds: %w", at, err)
		}
		out.Elapsed = d
	}
	if r.TrainingRows < 0 {
		return nil, fmt.Errorf("%straining_rows: %d is negative", at, r.TrainingRows)
	}
	if r.FlaggedRows < 0 {
		return nil, fmt.Errorf("%sflagged_rows: %d is negative", at, r.FlaggedRows)
	}
	for i, v := range r.History {
		if !finite(v) {
			return nil, fmt.Errorf("%shistory[%d]: %v is not finite", at, i, v)
		}
	}
	if len(r.History) > 0 {
		out.History = append([]float64(nil), r.History...)
	}
	for i, s := range r.Selection {
		p := fmt.Sprintf("%sselection[%d].", at, i)
		if s.Components < 1 {
			return nil, fmt.Errorf("%scomponents: %d, want at least 1", p, s.Components)
		}
		if s.Iterations < 0 {
			return nil, fmt.Errorf("%siterations: %d is negative", p, s.Iterations)
		}
		for _, f := range []struct {
			field string
			v     float64
		}{{"log_likelihood", s.LogLikelihood}, {"bic", s.BIC}, {"aic", s.AIC}} {
			if !finite(f.v) {
				return nil, fmt.Errorf("%s%s: %v is not finite", p, f.field, f.v)
			}
		}
		out.Selection = append(out.Selection, &mixdv1.SelectionRow{
			Components: s.Components, LogLikelihood: s.LogLikelihood, Bic: s.BIC, Aic: s.AIC,
			Converged: s.Converged, Iterations: s.Iterations,
		})
	}
	for i, n := range r.Notes {
		if !utf8.ValidString(n) {
			return nil, fmt.Errorf("%snotes[%d]: not valid UTF-8", at, i)
		}
	}
	if len(r.Notes) > 0 {
		out.Notes = append([]string(nil), r.Notes...)
	}
	if q := r.TrainingQuantiles; q != nil {
		pq, err := q.toProto()
		if err != nil {
			return nil, fmt.Errorf("%straining_quantiles.%w", at, err)
		}
		out.TrainingQuantiles = pq
	}
	return out, nil
}

func (q *quantiles) toProto() (*mixdv1.DensityQuantiles, error) {
	if len(q.Levels) != len(q.LogDensities) {
		return nil, fmt.Errorf("log_densities: has %d values, want %d (one per level)", len(q.LogDensities), len(q.Levels))
	}
	for i, l := range q.Levels {
		if !finite(l) || l < 0 || l > 1 {
			return nil, fmt.Errorf("levels[%d]: %v is outside [0, 1]", i, l)
		}
		if i > 0 && !(l > q.Levels[i-1]) {
			return nil, fmt.Errorf("levels[%d]: %v is not greater than levels[%d] = %v (levels must increase)", i, l, i-1, q.Levels[i-1])
		}
	}
	for i, v := range q.LogDensities {
		if !finite(v) {
			return nil, fmt.Errorf("log_densities[%d]: %v is not finite", i, v)
		}
		if i > 0 && v < q.LogDensities[i-1] {
			return nil, fmt.Errorf("log_densities[%d]: %v is less than log_densities[%d] = %v (values must not decrease)", i, v, i-1, q.LogDensities[i-1])
		}
	}
	return &mixdv1.DensityQuantiles{
		Levels:       append([]float64{}, q.Levels...),
		LogDensities: append([]float64{}, q.LogDensities...),
	}, nil
}

// parseSeconds reads a plain non-negative decimal number of seconds with at
// most nine decimal places, exactly.
func parseSeconds(s string) (*durationpb.Duration, error) {
	if strings.HasPrefix(s, "-") {
		return nil, fmt.Errorf("%s is negative", s)
	}
	whole, frac, hasFrac := strings.Cut(s, ".")
	if whole == "" || !allDigits(whole) || (hasFrac && (frac == "" || !allDigits(frac))) {
		return nil, fmt.Errorf("%s is not a plain decimal number of seconds such as 12.5", s)
	}
	if len(frac) > 9 {
		return nil, fmt.Errorf("%s has more than 9 decimal places (the resolution is a nanosecond)", s)
	}
	secs, err := strconv.ParseInt(whole, 10, 64)
	if err != nil || secs > maxDurationSeconds {
		return nil, fmt.Errorf("%s exceeds the limit of %d seconds", s, maxDurationSeconds)
	}
	nanos := int64(0)
	if frac != "" {
		nanos, _ = strconv.ParseInt(frac+strings.Repeat("0", 9-len(frac)), 10, 64)
	}
	if secs == maxDurationSeconds && nanos > 0 {
		return nil, fmt.Errorf("%s exceeds the limit of %d seconds", s, maxDurationSeconds)
	}
	return &durationpb.Duration{Seconds: secs, Nanos: int32(nanos)}, nil
}

// formatSeconds is the inverse of parseSeconds.
func formatSeconds(d *durationpb.Duration) (string, error) {
	if err := d.CheckValid(); err != nil {
		return "", err
	}
	if d.Seconds < 0 || d.Nanos < 0 {
		return "", fmt.Errorf("%v is negative", d.AsDuration())
	}
	s := strconv.FormatInt(d.Seconds, 10)
	if d.Nanos > 0 {
		s += "." + strings.TrimRight(fmt.Sprintf("%09d", d.Nanos), "0")
	}
	return s, nil
}

func allDigits(s string) bool {
	for i := 0; i < len(s); i++ {
		if s[i] < '0' || s[i] > '9' {
			return false
		}
	}
	return true
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
