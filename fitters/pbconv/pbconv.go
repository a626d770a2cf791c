// Package pbconv converts between the protocol-buffer messages of the mixd
// APIs (packages mixdv1 and fitterv1) and the Go types of the fitter contract
// (packages fitters and fitters/mixture). Conversions from messages check
// what the message alone can tell (lengths, known enum values, finite
// numbers) and return errors that name the offending field; the mathematics
// of a mixture (weights summing to 1, positive-definite matrices) is checked
// by package mixture.
package pbconv

import (
	"fmt"
	"math"

	"google.golang.org/protobuf/types/known/durationpb"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/internal/wire"
	"github.com/mixd-dev/mixd/fitters/mixture"
	fitterv1 "github.com/mixd-dev/mixd/proto/mixd/fitter/v1"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// FamilyToProto maps a family to its enum value; the zero Family ("not set")
// gives FAMILY_UNSPECIFIED. An unknown value is passed through unchanged, so
// that FamilyFromProto rejects it instead of it changing silently.
func FamilyToProto(f mixture.Family) mixdv1.Family { return wire.FamilyToProto(f) }

// FamilyFromProto maps an enum value to a family; FAMILY_UNSPECIFIED gives the
// zero Family, an unknown value an error naming the field "family".
func FamilyFromProto(f mixdv1.Family) (mixture.Family, error) {
	return wire.FamilyFromProto(f, "family")
}

// StructureToProto maps a covariance structure to its enum value, like FamilyToProto.
func StructureToProto(s mixture.Structure) mixdv1.CovarianceStructure {
	return wire.StructureToProto(s)
}

// StructureFromProto maps an enum value to a covariance structure, like
// FamilyFromProto; errors name the field "covariance_structure".
func StructureFromProto(s mixdv1.CovarianceStructure) (mixture.Structure, error) {
	return wire.StructureFromProto(s, "covariance_structure")
}

// CriterionToProto maps a criterion to its enum value, like FamilyToProto.
func CriterionToProto(c fitters.Criterion) mixdv1.Criterion {
	switch c {
	case 0:
		return mixdv1.Criterion_CRITERION_UNSPECIFIED
	case fitters.BIC:
		return mixdv1.Criterion_CRITERION_BIC
	case fitters.AIC:
		return mixdv1.Criterion_CRITERION_AIC
	}
	return mixdv1.Criterion(clamp32(int(c)))
}

// CriterionFromProto maps an enum value to a criterion; CRITERION_UNSPECIFIED
// gives the zero Criterion, an unknown value an error naming the field "criterion".
func CriterionFromProto(c mixdv1.Criterion) (fitters.Criterion, error) {
	return criterionFromProto(c, "criterion")
}

func criterionFromProto(c mixdv1.Criterion, field string) (fitters.Criterion, error) {
	switch c {
	case mixdv1.Criterion_CRITERION_UNSPECIFIED:
		return 0, nil
	case mixdv1.Criterion_CRITERION_BIC:
		return fitters.BIC, nil
	case mixdv1.Criterion_CRITERION_AIC:
		return fitters.AIC, nil
	}
	return 0, fmt.Errorf("%s: unknown criterion value %d", field, int32(c))
}

// ParamsToProto converts mixture parameters to their message; slices are copied.
func ParamsToProto(p mixture.Params) *mixdv1.Parameters { return wire.ParamsToProto(p) }

// ParamsFromProto converts a message to mixture parameters. It checks the
// message's shape: dimension at least 1; feature names empty or one unique
// non-empty name per dimension; family and structure set and known; at least
// one component; mean and covariance lengths matching the dimension; every
// number finite. Errors name the field, e.g. "parameters.components[1].mean: has
// 2 values, want dimension = 3".
func ParamsFromProto(pb *mixdv1.Parameters) (mixture.Params, error) {
	return wire.ParamsFromProto(pb, "parameters")
}

// SettingsToProto converts fit settings to the plugin protocol's message.
// Rows, cols and has_weights describe the data and are left for the caller;
// labels travel with the data chunks, so only has_labels is set. It fails
// (naming the field) when an integer setting does not fit in 32 bits.
func SettingsToProto(s fitters.Settings) (*fitterv1.Settings, error) {
	ints := []struct {
		name string
		v    int
	}{
		{"settings.components", s.Components},
		{"settings.components_min", s.MinComponents},
		{"settings.components_max", s.MaxComponents},
		{"settings.max_iterations", s.MaxIterations},
		{"settings.restarts", s.Restarts},
	}
	for _, f := range ints {
		if f.v > math.MaxInt32 || f.v < math.MinInt32 {
			return nil, fmt.Errorf("%s: %d is outside the 32-bit range", f.name, f.v)
		}
	}
	pb := &fitterv1.Settings{
		Components:          int32(s.Components),
		ComponentsMin:       int32(s.MinComponents),
		ComponentsMax:       int32(s.MaxComponents),
		Criterion:           CriterionToProto(s.Criterion),
		Family:              FamilyToProto(s.Family),
		CovarianceStructure: StructureToProto(s.Structure),
		Seed:                s.Seed,
		MaxIterations:       int32(s.MaxIterations),
		Tolerance:           s.Tolerance,
		Restarts:            int32(s.Restarts),
		Ridge:               s.Ridge,
		Options:             copyMap(s.Options),
		HasLabels:           s.Labels != nil,
	}
	if s.Start != nil {
		pb.Start = ParamsToProto(*s.Start)
	}
	return pb, nil
}

// SettingsFromProto converts the plugin protocol's settings message. Labels
// stay nil (they arrive with the data chunks); rows, cols, has_weights and
// has_labels are not part of fitters.Settings. Errors name the field, e.g.
// "settings.start.components[0].covariance: ...".
func SettingsFromProto(pb *fitterv1.Settings) (fitters.Settings, error) {
	if pb == nil {
		return fitters.Settings{}, fmt.Errorf("settings: missing")
	}
	s := fitters.Settings{
		Components:    int(pb.GetComponents()),
		MinComponents: int(pb.GetComponentsMin()),
		MaxComponents: int(pb.GetComponentsMax()),
		Seed:          pb.GetSeed(),
		MaxIterations: int(pb.GetMaxIterations()),
		Tolerance:     pb.GetTolerance(),
		Restarts:      int(pb.GetRestarts()),
		Ridge:         pb.GetRidge(),
		Options:       copyMap(pb.GetOptions()),
	}
	var err error
	if s.Criterion, err = criterionFromProto(pb.GetCriterion(), "settings.criterion"); err != nil {
		return fitters.Settings{}, err
	}
	if s.Family, err = wire.FamilyFromProto(pb.GetFamily(), "settings.family"); err != nil {
		return fitters.Settings{}, err
	}
	if s.Structure, err = wire.StructureFromProto(pb.GetCovarianceStructure(), "settings.covariance_structure"); err != nil {
		return fitters.Settings{}, err
	}
	if math.IsNaN(s.Tolerance) || math.IsInf(s.Tolerance, 0) {
		return fitters.Settings{}, fmt.Errorf("settings.tolerance: not a finite number (%v)", s.Tolerance)
	}
	if math.IsNaN(s.Ridge) || math.IsInf(s.Ridge, 0) {
		return fitters.Settings{}, fmt.Errorf("settings.ridge: not a finite number (%v)", s.Ridge)
	}
	if pb.GetStart() != nil {
		p, err := wire.ParamsFromProto(pb.GetStart(), "settings.start")
		if err != nil {
			return fitters.Settings{}, err
		}
		s.Start = &p
	}
	return s, nil
}

// SelectionToProto converts a model-selection table.
func SelectionToProto(rows []fitters.SelectionRow) []*mixdv1.SelectionRow {
	var out []*mixdv1.SelectionRow
	for _, r := range rows {
		out = append(out, &mixdv1.SelectionRow{
			Components:    clamp32(r.Components),
			LogLikelihood: r.LogLikelihood,
			Bic:           r.BIC,
			Aic:           r.AIC,
			Converged:     r.Converged,
			Iterations:    clamp32(r.Iterations),
		})
	}
	return out
}

// SelectionFromProto converts a model-selection table; field prefixes the
// name of a missing row in the error, e.g. "report.selection".
func SelectionFromProto(rows []*mixdv1.SelectionRow, field string) ([]fitters.SelectionRow, error) {
	var out []fitters.SelectionRow
	for i, r := range rows {
		if r == nil {
			return nil, fmt.Errorf("%s[%d]: missing", field, i)
		}
		out = append(out, fitters.SelectionRow{
			Components:    int(r.GetComponents()),
			LogLikelihood: r.GetLogLikelihood(),
			BIC:           r.GetBic(),
			AIC:           r.GetAic(),
			Converged:     r.GetConverged(),
			Iterations:    int(r.GetIterations()),
		})
	}
	return out, nil
}

// ReportToProto converts a fit report to the plugin protocol's message.
// Integer counts beyond 32 bits saturate.
func ReportToProto(r fitters.Report) *fitterv1.Report {
	return &fitterv1.Report{
		Iterations:          clamp32(r.Iterations),
		Converged:           r.Converged,
		Objective:           r.Objective,
		LogLikelihood:       r.LogLikelihood,
		Bound:               r.Bound,
		Bic:                 r.BIC,
		Aic:                 r.AIC,
		History:             append([]float64(nil), r.History...),
		Selection:           SelectionToProto(r.Selection),
		FlaggedRows:         int64(r.FlaggedRows),
		OutlierLevel:        r.OutlierLevel,
		EffectiveComponents: clamp32(r.EffectiveComponents),
		Notes:               append([]string(nil), r.Notes...),
		Settings:            copyMap(r.Settings),
	}
}

// ReportFromProto converts the plugin protocol's report message.
func ReportFromProto(pb *fitterv1.Report) (fitters.Report, error) {
	if pb == nil {
		return fitters.Report{}, fmt.Errorf("report: missing")
	}
	sel, err := SelectionFromProto(pb.GetSelection(), "report.selection")
	if err != nil {
		return fitters.Report{}, err
	}
	return fitters.Report{
		Iterations:          int(pb.GetIterations()),
		Converged:           pb.GetConverged(),
		Objective:           pb.GetObjective(),
		LogLikelihood:       pb.GetLogLikelihood(),
		Bound:               pb.GetBound(),
		BIC:                 pb.GetBic(),
		AIC:                 pb.GetAic(),
		History:             append([]float64(nil), pb.GetHistory()...),
		Selection:           sel,
		FlaggedRows:         int(pb.GetFlaggedRows()),
		OutlierLevel:        pb.GetOutlierLevel(),
		EffectiveComponents: int(pb.GetEffectiveComponents()),
		Notes:               append([]string(nil), pb.GetNotes()...),
		Settings:            copyMap(pb.GetSettings()),
	}, nil
}

// InfoToProto converts a fitter description to the public API's message.
// Source and SHA-256, which depend on where the host found the fitter, are
// left for the caller.
func InfoToProto(in fitters.Info) *mixdv1.FitterInfo {
	pb := &mixdv1.FitterInfo{Name: in.Name, Version: in.Version, Description: in.Description}
	for _, f := range in.Families {
		pb.Families = append(pb.Families, FamilyToProto(f))
	}
	for _, s := range in.Structures {
		pb.CovarianceStructures = append(pb.CovarianceStructures, StructureToProto(s))
	}
	for _, o := range in.Options {
		pb.Options = append(pb.Options, &mixdv1.FitterOption{Name: o.Name, Description: o.Description, DefaultValue: o.Default})
	}
	return pb
}

// InfoFromProto converts the public API's fitter description (ignoring
// source and sha256). Errors name the field, e.g. "fitter_info.families[1]".
func InfoFromProto(pb *mixdv1.FitterInfo) (fitters.Info, error) {
	if pb == nil {
		return fitters.Info{}, fmt.Errorf("fitter_info: missing")
	}
	in := fitters.Info{Name: pb.GetName(), Version: pb.GetVersion(), Description: pb.GetDescription()}
	for i, f := range pb.GetFamilies() {
		v, err := wire.FamilyFromProto(f, fmt.Sprintf("fitter_info.families[%d]", i))
		if err != nil {
			return fitters.Info{}, err
		}
		in.Families = append(in.Families, v)
	}
	for i, s := range pb.GetCovarianceStructures() {
		v, err := wire.StructureFromProto(s, fmt.Sprintf("fitter_info.covariance_structures[%d]", i))
		if err != nil {
			return fitters.Info{}, err
		}
		in.Structures = append(in.Structures, v)
	}
	for i, o := range pb.GetOptions() {
		if o == nil {
			return fitters.Info{}, fmt.Errorf("fitter_info.options[%d]: missing", i)
		}
		in.Options = append(in.Options, fitters.OptionInfo{Name: o.GetName(), Description: o.GetDescription(), Default: o.GetDefaultValue()})
	}
	return in, nil
}

// ProgressToProto converts a progress event to the public API's message.
func ProgressToProto(p fitters.Progress) *mixdv1.FitProgress {
	return &mixdv1.FitProgress{
		Components: clamp32(p.Components),
		Restart:    clamp32(p.Restart),
		Iteration:  clamp32(p.Iteration),
		Objective:  p.Objective,
		Elapsed:    durationpb.New(p.Elapsed),
	}
}

// EncodeFloat64s returns the little-endian IEEE-754 encoding of vs, 8 bytes
// per value (the `little_endian` fields of the API).
func EncodeFloat64s(vs []float64) []byte {
	return wire.AppendFloat64s(make([]byte, 0, 8*len(vs)), vs)
}

// DecodeFloat64s decodes little-endian float64 values; the length of b must
// be a multiple of 8.
func DecodeFloat64s(b []byte) ([]float64, error) {
	if len(b)%8 != 0 {
		return nil, fmt.Errorf("little-endian float64 data has %d bytes, not a multiple of 8", len(b))
	}
	out := make([]float64, len(b)/8)
	if err := wire.DecodeFloat64s(out, b, "little-endian float64 data"); err != nil {
		return nil, err
	}
	return out, nil
}

// EncodeInt32s returns the little-endian encoding of vs, 4 bytes per value.
func EncodeInt32s(vs []int32) []byte {
	return wire.AppendInt32s(make([]byte, 0, 4*len(vs)), vs)
}

// DecodeInt32s decodes little-endian int32 values; the length of b must be a
// multiple of 4.
func DecodeInt32s(b []byte) ([]int32, error) {
	if len(b)%4 != 0 {
		return nil, fmt.Errorf("little-endian int32 data has %d bytes, not a multiple of 4", len(b))
	}
	out := make([]int32, len(b)/4)
	if err := wire.DecodeInt32s(out, b, "little-endian int32 data"); err != nil {
		return nil, err
	}
	return out, nil
}

func copyMap(m map[string]string) map[string]string {
	if m == nil {
		return nil
	}
	out := make(map[string]string, len(m))
	for k, v := range m {
		out[k] = v
	}
	return out
}

func clamp32(n int) int32 {
	switch {
	case n > math.MaxInt32:
		return math.MaxInt32
	case n < math.MinInt32:
		return math.MinInt32
	}
	return int32(n)
}
