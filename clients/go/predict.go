package mixdclient

import (
	"context"
	"fmt"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// checkObserved checks that an observation mask has one flag per value.
func checkObserved(observed []bool, rows Matrix) error {
	if observed != nil && len(observed) != rows.Rows*rows.Cols {
		return fmt.Errorf("mixdclient: observed has %d flags, want one per value, %d×%d = %d",
			len(observed), rows.Rows, rows.Cols, rows.Rows*rows.Cols)
	}
	return nil
}

// maskWidth is the request bytes per row that a mask adds.
func maskWidth(observed []bool, rows Matrix) int {
	if observed == nil {
		return 0
	}
	return rows.Cols
}

// maskBytes encodes the flags of rows [lo, hi) as observed_mask bytes (1
// observed, 0 unobserved); nil when observed is nil.
func maskBytes(observed []bool, rows Matrix, lo, hi int) []byte {
	if observed == nil {
		return nil
	}
	flags := observed[lo*rows.Cols : hi*rows.Cols]
	b := make([]byte, len(flags))
	for i, o := range flags {
		if o {
			b[i] = 1
		}
	}
	return b
}

// PredictOptions tune Predict.
type PredictOptions struct {
	// Version of the model; 0 means the newest (resolved once, so every
	// chunk of a large batch uses the same version).
	Version int64
	// StdDevs asks for the conditional standard deviation of every feature.
	StdDevs bool
	// Covariances asks for each row's conditional covariance matrix.
	Covariances bool
	// Components asks for the conditional weights (posteriors), the
	// components' conditional means and, for Student-t models, their degrees
	// of freedom.
	Components bool
	// ComponentScales asks for the components' conditional covariance
	// (Gaussian) or scale (Student-t) matrices.
	ComponentScales bool
	// Draws is the number of completed rows drawn per row (multiple
	// imputation); Seed fixes them. Row i of the batch always gets the same
	// draws for the same model version and seed, however the batch is split.
	Draws int
	Seed  uint64
}

// PredictResult holds the conditional distribution of each row's unobserved
// features given its observed ones.
type PredictResult struct {
	// Model and Version used.
	Model   string
	Version int64
	// Means is rows×D: each row with its unobserved features replaced by
	// their conditional mean (observed values copied).
	Means Matrix
	// StdDevs is rows×D (0 for observed features), when asked for.
	StdDevs Matrix
	// Covariances is rows×(D·D), one row-major D×D block per row, when asked for.
	Covariances Matrix
	// LogDensities holds the log-density of each row's observed features
	// under the marginal mixture.
	LogDensities []float64
	// Posteriors (rows×K), ComponentMeans (rows×(K·D)) and, for Student-t
	// models, ComponentDF (rows×K), with Components.
	Posteriors, ComponentMeans, ComponentDF Matrix
	// ComponentScales is rows×(K·D·D), with ComponentScales.
	ComponentScales Matrix
	// Draws is (rows·Draws)×D: row i's draws are rows i·Draws … (i+1)·Draws−1.
	Draws Matrix
}

// Predict returns the conditional distribution of the unobserved features
// of every row given its observed ones: observed marks the observed values
// (rows×cols flags, row-major; nil means all, leaving nothing to predict).
// Values at unobserved positions are ignored but must be finite. Large
// batches are split into several Predict calls, sized so that requests and
// responses stay within the client's chunk size.
func (c *Client) Predict(ctx context.Context, model string, rows Matrix, observed []bool, opts PredictOptions) (*PredictResult, error) {
	if err := rows.check("rows"); err != nil {
		return nil, err
	}
	if err := checkObserved(observed, rows); err != nil {
		return nil, err
	}
	if opts.Draws < 0 {
		return nil, fmt.Errorf("mixdclient: predict: draws %d is negative", opts.Draws)
	}
	k, version, err := c.components(ctx, model, opts.Version)
	if err != nil {
		return nil, fmt.Errorf("mixdclient: predict %s: %w", model, err)
	}
	d := rows.Cols
	per := d + 1 + opts.Draws*d // means, log-densities, draws
	if opts.StdDevs {
		per += d
	}
	if opts.Covariances {
		per += d * d
	}
	if opts.Components {
		per += 2*k + k*d
	}
	if opts.ComponentScales {
		per += k * d * d
	}
	step := c.rowsPerChunk(max(8*per, 9*d))
	res := &PredictResult{}
	for lo := 0; lo < rows.Rows || (lo == 0 && rows.Rows == 0); lo += step {
		hi := min(lo+step, rows.Rows)
		uctx, cancel := c.unaryContext(ctx)
		resp, err := c.svc.Predict(uctx, &mixdv1.PredictRequest{
			Model:                     model,
			Version:                   version,
			Rows:                      rows.slice(lo, hi).ToProto(),
			ObservedMask:              maskBytes(observed, rows, lo, hi),
			IncludeStandardDeviations: opts.StdDevs,
			IncludeCovariances:        opts.Covariances,
			IncludeComponents:         opts.Components,
			IncludeComponentScales:    opts.ComponentScales,
			Draws:                     int32(opts.Draws),
			Seed:                      opts.Seed,
			FirstRow:                  int64(lo),
			ResponseEncoding:          mixdv1.MatrixEncoding_MATRIX_ENCODING_LITTLE_ENDIAN,
		})
		cancel()
		if err != nil {
			return nil, fmt.Errorf("mixdclient: predict %s: rows %d to %d: %w", model, lo, hi, err)
		}
		if err := res.add(resp, hi-lo, opts); err != nil {
			return nil, fmt.Errorf("mixdclient: predict %s: rows %d to %d: %w", model, lo, hi, err)
		}
		if rows.Rows == 0 {
			break
		}
	}
	return res, nil
}

// add appends one response (n rows) to r.
func (r *PredictResult) add(resp *mixdv1.PredictResponse, n int, opts PredictOptions) error {
	r.Model, r.Version = resp.GetModel(), resp.GetVersion()
	if err := appendRows(&r.Means, resp.GetMeans(), "means", n); err != nil {
		return err
	}
	ld, err := column(resp.GetLogDensities(), "log_densities", n)
	if err != nil {
		return err
	}
	r.LogDensities = append(r.LogDensities, ld...)
	for _, o := range []struct {
		want  bool
		dst   *Matrix
		pb    *mixdv1.Matrix
		field string
		rows  int
	}{
		{opts.StdDevs, &r.StdDevs, resp.GetStandardDeviations(), "standard_deviations", n},
		{opts.Covariances, &r.Covariances, resp.GetCovariances(), "covariances", n},
		{opts.Components, &r.Posteriors, resp.GetPosteriors(), "posteriors", n},
		{opts.Components, &r.ComponentMeans, resp.GetComponentMeans(), "component_means", n},
		{opts.Components && resp.GetComponentDegreesOfFreedom() != nil, &r.ComponentDF, resp.GetComponentDegreesOfFreedom(), "component_degrees_of_freedom", n},
		{opts.ComponentScales, &r.ComponentScales, resp.GetComponentScales(), "component_scales", n},
		{opts.Draws > 0, &r.Draws, resp.GetDraws(), "draws", n * opts.Draws},
	} {
		if !o.want {
			continue
		}
		if err := appendRows(o.dst, o.pb, o.field, o.rows); err != nil {
			return err
		}
	}
	return nil
}

// CompareOptions tune CompareModels.
type CompareOptions struct {
	// Samples is the number of draws per direction; 0 lets the daemon
	// choose (20000).
	Samples int64
	// Seed fixes the draws.
	Seed uint64
}

// CompareModels compares model@version (p) with other@otherVersion (q) over
// the same features: Monte Carlo estimates of KL(p‖q) and KL(q‖p) with
// standard errors, and their components matched by Bhattacharyya distance.
// other "" means the same model (two versions of one model); versions 0
// mean the newest. The KL numbers say how differently the two models spread
// probability over the features, not why and not whether it matters.
func (c *Client) CompareModels(ctx context.Context, model string, version int64, other string, otherVersion int64, opts CompareOptions) (*mixdv1.CompareModelsResponse, error) {
	uctx, cancel := c.unaryContext(ctx)
	defer cancel()
	resp, err := c.svc.CompareModels(uctx, &mixdv1.CompareModelsRequest{
		Model: model, Version: version, OtherModel: other, OtherVersion: otherVersion,
		Samples: opts.Samples, Seed: opts.Seed,
	})
	if err != nil {
		return nil, fmt.Errorf("mixdclient: compare %s with %s: %w", model, other, err)
	}
	return resp, nil
}
