package modeldoc

import "encoding/json"

// The Go shape of the document. Field order here is the order in which
// Encode writes the keys. FORMAT.md describes every field; keep the two in
// step.

// document is the top-level object.
type document struct {
	Format              string      `json:"format"`
	FormatVersion       int64       `json:"format_version"`
	Name                string      `json:"name"`
	Version             int64       `json:"version,omitempty"`
	Created             string      `json:"created,omitempty"`
	Dimension           int64       `json:"dimension"`
	FeatureNames        []string    `json:"feature_names"`
	Family              string      `json:"family"`
	CovarianceStructure string      `json:"covariance_structure"`
	Components          []component `json:"components"`
	FitReport           *fitReport  `json:"fit_report,omitempty"`
}

// component is one term of the mixture. Pointers and nil slices tell an
// absent field from a zero one.
type component struct {
	Weight           *float64    `json:"weight"`
	Mean             []float64   `json:"mean"`
	Covariance       [][]float64 `json:"covariance"`
	DegreesOfFreedom float64     `json:"degrees_of_freedom,omitempty"`
}

// fitReport says how the model was fitted. Every field is optional and
// defaults to its zero value.
type fitReport struct {
	Fitter            string            `json:"fitter"`
	FitterVersion     string            `json:"fitter_version"`
	Settings          map[string]string `json:"settings"`
	Seed              uint64            `json:"seed"`
	Iterations        int32             `json:"iterations"`
	Converged         bool              `json:"converged"`
	Objective         string            `json:"objective"`
	LogLikelihood     float64           `json:"log_likelihood"`
	Bound             float64           `json:"bound"`
	BIC               float64           `json:"bic"`
	AIC               float64           `json:"aic"`
	ElapsedSeconds    json.Number       `json:"elapsed_seconds,omitempty"`
	TrainingRows      int64             `json:"training_rows"`
	History           []float64         `json:"history"`
	Selection         []selectionRow    `json:"selection"`
	FlaggedRows       int64             `json:"flagged_rows"`
	Notes             []string          `json:"notes"`
	TrainingQuantiles *quantiles        `json:"training_quantiles,omitempty"`
	// OutlierLevel is the level of the outlier rule (Student-t fitters).
	OutlierLevel float64 `json:"outlier_level,omitempty"`
	// EffectiveComponents is reported by variational fitters.
	EffectiveComponents int32 `json:"effective_components,omitempty"`
}

// selectionRow is one line of a fit over a range of component counts.
type selectionRow struct {
	Components    int32   `json:"components"`
	LogLikelihood float64 `json:"log_likelihood"`
	BIC           float64 `json:"bic"`
	AIC           float64 `json:"aic"`
	Converged     bool    `json:"converged"`
	Iterations    int32   `json:"iterations"`
}

// quantiles are the training log-density quantiles.
type quantiles struct {
	Levels       []float64 `json:"levels"`
	LogDensities []float64 `json:"log_densities"`
}
