package daemon

import (
	"context"
	"errors"
	"fmt"

	"google.golang.org/grpc/codes"

	"github.com/mixd-dev/mixd/fitters/mixture"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// predictResponseBytes is the payload of a Predict response of rows rows.
func predictResponseBytes(req *mixdv1.PredictRequest, rows, d, k int64, robust bool) int64 {
	per := d + 1 // means, log-densities
	if req.GetIncludeStandardDeviations() {
		per += d
	}
	if req.GetIncludeCovariances() {
		per += d * d
	}
	if req.GetIncludeComponents() {
		per += k + k*d
		if robust {
			per += k
		}
	}
	if req.GetIncludeComponentScales() {
		per += k * d * d
	}
	per += int64(req.GetDraws()) * d
	return rows * per * 8
}

// Predict returns the conditional distribution of each row's unobserved
// features given its observed ones (mixture.Model.Conditional): the row
// completed with conditional means, and on request standard deviations,
// covariances, per-component parts and seeded draws. One request carries at
// most Limits.MaxRows rows and at most Limits.MaxRows rows × draws; there is
// no streaming variant (clients split larger batches, passing first_row).
func (s *Server) Predict(ctx context.Context, req *mixdv1.PredictRequest) (*mixdv1.PredictResponse, error) {
	draws := req.GetDraws()
	if draws < 0 || draws > mixture.MaxDrawsPerRow {
		return nil, invalidf("draws is %d, must be between 0 and %d", draws, mixture.MaxDrawsPerRow)
	}
	if req.GetFirstRow() < 0 {
		return nil, invalidf("first_row is %d, must not be negative", req.GetFirstRow())
	}
	lm, err := s.loadModel(ctx, "model", req.GetModel(), req.GetVersion())
	if err != nil {
		return nil, err
	}
	x, err := s.rowsFor("rows", lm, req.GetRows())
	if err != nil {
		return nil, err
	}
	mask, err := decodeMask("observed_mask", req.GetObservedMask(), x)
	if err != nil {
		return nil, err
	}
	if n := int64(x.rows) * int64(draws); n > s.limits.MaxRows {
		return nil, exhaustedf("rows × draws is %d × %d = %d, above the limit of %d drawn rows per response (mixd serve --max-rows); send fewer rows per request",
			x.rows, draws, n, s.limits.MaxRows)
	}
	le, err := responseEncoding("response_encoding", req.GetResponseEncoding(), x.littleEndian)
	if err != nil {
		return nil, err
	}
	d, k := lm.m.Dim(), lm.m.K()
	robust := lm.m.Family() == mixture.StudentT
	if err := checkResponseSize(predictResponseBytes(req, int64(x.rows), int64(d), int64(k), robust), s.limits.MaxMessageBytes,
		fmt.Sprintf("the predictions of %d rows", x.rows), "send fewer rows per request, or ask for fewer outputs"); err != nil {
		return nil, err
	}
	res, err := lm.m.Conditional(x.values, mask, mixture.ConditionalOptions{
		StdDev:          req.GetIncludeStandardDeviations(),
		Covariance:      req.GetIncludeCovariances(),
		Components:      req.GetIncludeComponents(),
		ComponentScales: req.GetIncludeComponentScales(),
		Draws:           int(draws),
		Seed:            req.GetSeed(),
		FirstRow:        req.GetFirstRow(),
	})
	switch {
	case errors.Is(err, mixture.ErrNoMoment):
		return nil, statusf(codes.FailedPrecondition, "model %s version %d: %v", lm.name(), lm.version(), err)
	case err != nil:
		return nil, invalidf("rows: model %s version %d: %v", lm.name(), lm.version(), err)
	}
	n := x.rows
	out := &mixdv1.PredictResponse{
		Model: lm.name(), Version: lm.version(),
		Means:        encodeMatrix(n, d, res.Mean, le),
		LogDensities: encodeMatrix(n, 1, res.LogDensity, le),
	}
	if res.StdDev != nil {
		out.StandardDeviations = encodeMatrix(n, d, res.StdDev, le)
	}
	if res.Cov != nil {
		out.Covariances = encodeMatrix(n, d*d, res.Cov, le)
	}
	if req.GetIncludeComponents() {
		out.Posteriors = encodeMatrix(n, k, res.Posteriors, le)
		out.ComponentMeans = encodeMatrix(n, k*d, res.ComponentMeans, le)
		if res.ComponentDF != nil {
			out.ComponentDegreesOfFreedom = encodeMatrix(n, k, res.ComponentDF, le)
		}
	}
	if res.ComponentScales != nil {
		out.ComponentScales = encodeMatrix(n, k*d*d, res.ComponentScales, le)
	}
	if res.Draws != nil {
		out.Draws = encodeMatrix(n*int(draws), d, res.Draws, le)
	}
	return out, nil
}
