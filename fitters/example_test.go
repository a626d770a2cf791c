package fitters_test

import (
	"context"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

// meanOnly is a minimal fitter for the example: one Gaussian component at
// the column means, with unit covariance.
type meanOnly struct{}

func (meanOnly) Describe(context.Context) (fitters.Info, error) {
	return fitters.Info{
		Name: "mean-only", Version: "0.1.0", Description: "one component at the column means",
		Families: []mixture.Family{mixture.Gaussian}, Structures: []mixture.Structure{mixture.Spherical},
	}, nil
}

func (meanOnly) Fit(ctx context.Context, d fitters.Data, _ fitters.Settings, _ func(fitters.Progress)) (*fitters.Result, error) {
	if err := fitters.ContextError(ctx); err != nil {
		return nil, err
	}
	if d.Rows < 1 || d.Cols < 1 {
		return nil, fitters.Errorf(fitters.InvalidArgument, "data: need at least one row and one column, got %d×%d", d.Rows, d.Cols)
	}
	mean := make([]float64, d.Cols)
	cov := make([]float64, d.Cols*d.Cols)
	for i := 0; i < d.Rows; i++ {
		for j, v := range d.Row(i) {
			mean[j] += v / float64(d.Rows)
		}
	}
	for j := 0; j < d.Cols; j++ {
		cov[j*d.Cols+j] = 1
	}
	return &fitters.Result{
		Params: mixture.Params{Dim: d.Cols, Family: mixture.Gaussian, Structure: mixture.Spherical,
			Components: []mixture.Component{{Weight: 1, Mean: mean, Cov: cov}}},
		Report: fitters.Report{Objective: "log_likelihood"},
	}, nil
}

// The main function of an external fitter plugin: build the fitter and hand
// it to Serve. Copy the executable into the daemon's plugin directory.
// (Not run here: Serve waits for a host.)
func ExampleServe() {
	fitters.Serve(meanOnly{})
}
