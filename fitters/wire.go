package fitters

import (
	"fmt"
	"math"
	"time"

	"github.com/mixd-dev/mixd/fitters/internal/wire"
	fitterv1 "github.com/mixd-dev/mixd/proto/mixd/fitter/v1"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// The conversions in this file carry the contract's types across the plugin
// protocol. Package fitters/pbconv exports the same conversions for the rest
// of the program; it cannot be used here because it imports this package.
// Both are checked against each other by the round-trip tests of the plugin
// glue (every field of a fully populated value must survive).

func criterionToProto(c Criterion) mixdv1.Criterion {
	switch c {
	case 0:
		return mixdv1.Criterion_CRITERION_UNSPECIFIED
	case BIC:
		return mixdv1.Criterion_CRITERION_BIC
	case AIC:
		return mixdv1.Criterion_CRITERION_AIC
	}
	return mixdv1.Criterion(to32(int(c)))
}

func criterionFromProto(c mixdv1.Criterion, field string) (Criterion, error) {
	switch c {
	case mixdv1.Criterion_CRITERION_UNSPECIFIED:
		return 0, nil
	case mixdv1.Criterion_CRITERION_BIC:
		return BIC, nil
	case mixdv1.Criterion_CRITERION_AIC:
		return AIC, nil
	}
	return 0, fmt.Errorf("%s: unknown criterion value %d", field, int32(c))
}

// settingsToProto converts s; the caller fills rows, cols and has_weights.
// Labels travel in the data chunks, so only has_labels is set here.
func settingsToProto(s Settings) (*fitterv1.Settings, error) {
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
		Criterion:           criterionToProto(s.Criterion),
		Family:              wire.FamilyToProto(s.Family),
		CovarianceStructure: wire.StructureToProto(s.Structure),
		Seed:                s.Seed,
		MaxIterations:       int32(s.MaxIterations),
		Tolerance:           s.Tolerance,
		Restarts:            int32(s.Restarts),
		Ridge:               s.Ridge,
		HasLabels:           s.Labels != nil,
	}
	if s.Start != nil {
		pb.Start = wire.ParamsToProto(*s.Start)
	}
	if s.Options != nil {
		pb.Options = make(map[string]string, len(s.Options))
		for k, v := range s.Options {
			pb.Options[k] = v
		}
	}
	return pb, nil
}

// settingsFromProto converts pb; Labels stay nil (they arrive in chunks).
func settingsFromProto(pb *fitterv1.Settings) (Settings, error) {
	if pb == nil {
		return Settings{}, fmt.Errorf("settings: missing")
	}
	s := Settings{
		Components:    int(pb.GetComponents()),
		MinComponents: int(pb.GetComponentsMin()),
		MaxComponents: int(pb.GetComponentsMax()),
		Seed:          pb.GetSeed(),
		MaxIterations: int(pb.GetMaxIterations()),
		Tolerance:     pb.GetTolerance(),
		Restarts:      int(pb.GetRestarts()),
		Ridge:         pb.GetRidge(),
	}
	var err error
	if s.Criterion, err = criterionFromProto(pb.GetCriterion(), "settings.criterion"); err != nil {
		return Settings{}, err
	}
	if s.Family, err = wire.FamilyFromProto(pb.GetFamily(), "settings.family"); err != nil {
		return Settings{}, err
	}
	if s.Structure, err = wire.StructureFromProto(pb.GetCovarianceStructure(), "settings.covariance_structure"); err != nil {
		return Settings{}, err
	}
	if math.IsNaN(s.Tolerance) || math.IsInf(s.Tolerance, 0) {
		return Settings{}, fmt.Errorf("settings.tolerance: not a finite number (%v)", s.Tolerance)
	}
	if math.IsNaN(s.Ridge) || math.IsInf(s.Ridge, 0) {
		return Settings{}, fmt.Errorf("settings.ridge: not a finite number (%v)", s.Ridge)
	}
	if pb.GetStart() != nil {
		p, err := wire.ParamsFromProto(pb.GetStart(), "settings.start")
		if err != nil {
			return Settings{}, err
		}
		s.Start = &p
	}
	if pb.GetOptions() != nil {
		s.Options = make(map[string]string, len(pb.GetOptions()))
		for k, v := range pb.GetOptions() {
			s.Options[k] = v
		}
	}
	return s, nil
}

func reportToProto(r Report) *fitterv1.Report {
	pb := &fitterv1.Report{
		Iterations:          to32(r.Iterations),
		Converged:           r.Converged,
		Objective:           r.Objective,
		LogLikelihood:       r.LogLikelihood,
		Bound:               r.Bound,
		Bic:                 r.BIC,
		Aic:                 r.AIC,
		History:             append([]float64(nil), r.History...),
		FlaggedRows:         int64(r.FlaggedRows),
		OutlierLevel:        r.OutlierLevel,
		EffectiveComponents: to32(r.EffectiveComponents),
		Notes:               append([]string(nil), r.Notes...),
	}
	for _, row := range r.Selection {
		pb.Selection = append(pb.Selection, &mixdv1.SelectionRow{
			Components:    to32(row.Components),
			LogLikelihood: row.LogLikelihood,
			Bic:           row.BIC,
			Aic:           row.AIC,
			Converged:     row.Converged,
			Iterations:    to32(row.Iterations),
		})
	}
	if r.Settings != nil {
		pb.Settings = make(map[string]string, len(r.Settings))
		for k, v := range r.Settings {
			pb.Settings[k] = v
		}
	}
	return pb
}

func reportFromProto(pb *fitterv1.Report) (Report, error) {
	if pb == nil {
		return Report{}, fmt.Errorf("report: missing")
	}
	r := Report{
		Iterations:          int(pb.GetIterations()),
		Converged:           pb.GetConverged(),
		Objective:           pb.GetObjective(),
		LogLikelihood:       pb.GetLogLikelihood(),
		Bound:               pb.GetBound(),
		BIC:                 pb.GetBic(),
		AIC:                 pb.GetAic(),
		History:             append([]float64(nil), pb.GetHistory()...),
		FlaggedRows:         int(pb.GetFlaggedRows()),
		OutlierLevel:        pb.GetOutlierLevel(),
		EffectiveComponents: int(pb.GetEffectiveComponents()),
		Notes:               append([]string(nil), pb.GetNotes()...),
	}
	for i, row := range pb.GetSelection() {
		if row == nil {
			return Report{}, fmt.Errorf("report.selection[%d]: missing", i)
		}
		r.Selection = append(r.Selection, SelectionRow{
			Components:    int(row.GetComponents()),
			LogLikelihood: row.GetLogLikelihood(),
			BIC:           row.GetBic(),
			AIC:           row.GetAic(),
			Converged:     row.GetConverged(),
			Iterations:    int(row.GetIterations()),
		})
	}
	if pb.GetSettings() != nil {
		r.Settings = make(map[string]string, len(pb.GetSettings()))
		for k, v := range pb.GetSettings() {
			r.Settings[k] = v
		}
	}
	return r, nil
}

func progressToProto(p Progress) *fitterv1.Progress {
	return &fitterv1.Progress{
		Components:   to32(p.Components),
		Restart:      to32(p.Restart),
		Iteration:    to32(p.Iteration),
		Objective:    p.Objective,
		ElapsedNanos: int64(p.Elapsed),
	}
}

func progressFromProto(pb *fitterv1.Progress) Progress {
	return Progress{
		Components: int(pb.GetComponents()),
		Restart:    int(pb.GetRestart()),
		Iteration:  int(pb.GetIteration()),
		Objective:  pb.GetObjective(),
		Elapsed:    time.Duration(pb.GetElapsedNanos()),
	}
}

func resultToProto(r *Result) *fitterv1.Result {
	return &fitterv1.Result{
		Parameters: wire.ParamsToProto(r.Params),
		Report:     reportToProto(r.Report),
	}
}

func resultFromProto(pb *fitterv1.Result) (*Result, error) {
	if pb == nil {
		return nil, fmt.Errorf("result: missing")
	}
	p, err := wire.ParamsFromProto(pb.GetParameters(), "result.parameters")
	if err != nil {
		return nil, err
	}
	r, err := reportFromProto(pb.GetReport())
	if err != nil {
		return nil, fmt.Errorf("result.%w", err)
	}
	return &Result{Params: p, Report: r}, nil
}

func infoToDescribe(in Info) *fitterv1.DescribeResponse {
	pb := &fitterv1.DescribeResponse{
		Name:        in.Name,
		Version:     in.Version,
		Description: in.Description,
	}
	for _, f := range in.Families {
		pb.Families = append(pb.Families, wire.FamilyToProto(f))
	}
	for _, s := range in.Structures {
		pb.CovarianceStructures = append(pb.CovarianceStructures, wire.StructureToProto(s))
	}
	for _, o := range in.Options {
		pb.Options = append(pb.Options, &mixdv1.FitterOption{Name: o.Name, Description: o.Description, DefaultValue: o.Default})
	}
	return pb
}

func infoFromDescribe(pb *fitterv1.DescribeResponse) (Info, error) {
	in := Info{Name: pb.GetName(), Version: pb.GetVersion(), Description: pb.GetDescription()}
	for i, f := range pb.GetFamilies() {
		v, err := wire.FamilyFromProto(f, fmt.Sprintf("describe.families[%d]", i))
		if err != nil {
			return Info{}, err
		}
		in.Families = append(in.Families, v)
	}
	for i, s := range pb.GetCovarianceStructures() {
		v, err := wire.StructureFromProto(s, fmt.Sprintf("describe.covariance_structures[%d]", i))
		if err != nil {
			return Info{}, err
		}
		in.Structures = append(in.Structures, v)
	}
	for i, o := range pb.GetOptions() {
		if o == nil {
			return Info{}, fmt.Errorf("describe.options[%d]: missing", i)
		}
		in.Options = append(in.Options, OptionInfo{Name: o.GetName(), Description: o.GetDescription(), Default: o.GetDefaultValue()})
	}
	return in, nil
}

// to32 converts n to int32, saturating at the int32 limits.
func to32(n int) int32 {
	switch {
	case n > math.MaxInt32:
		return math.MaxInt32
	case n < math.MinInt32:
		return math.MinInt32
	}
	return int32(n)
}
