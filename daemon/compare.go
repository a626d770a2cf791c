package daemon

import (
	"context"
	"slices"

	"github.com/mixd-dev/mixd/fitters/mixture"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// componentDistanceName names the distance CompareModels matches components by.
const componentDistanceName = "bhattacharyya"

// CompareModels compares two model versions over the same features with
// mixture.Compare: Monte Carlo KL divergences in both directions with
// standard errors, and a matching of components by Bhattacharyya distance.
// samples is at most Limits.MaxSampleCount per direction; the call checks
// its context between blocks of draws, so a deadline or cancellation stops
// it promptly.
func (s *Server) CompareModels(ctx context.Context, req *mixdv1.CompareModelsRequest) (*mixdv1.CompareModelsResponse, error) {
	n := req.GetSamples()
	switch {
	case n < 0:
		return nil, invalidf("samples is %d, must not be negative (0 means %d)", n, mixture.DefaultCompareSamples)
	case n == 0:
		n = mixture.DefaultCompareSamples
	case n < 2:
		return nil, invalidf("samples is %d, must be at least 2 (a standard error needs two draws)", n)
	}
	if n > s.limits.MaxSampleCount {
		return nil, exhaustedf("samples is %d, above the limit of %d draws per call (mixd serve --max-sample-count)", n, s.limits.MaxSampleCount)
	}
	if v := req.GetOtherVersion(); v < 0 {
		return nil, invalidf("other_version is %d, must be positive (or 0 for the newest)", v)
	}
	p, err := s.loadModel(ctx, "model", req.GetModel(), req.GetVersion())
	if err != nil {
		return nil, err
	}
	otherField, otherName := "other_model", req.GetOtherModel()
	if otherName == "" {
		otherField, otherName = "model", req.GetModel()
	}
	q, err := s.loadModel(ctx, otherField, otherName, req.GetOtherVersion())
	if err != nil {
		return nil, err
	}
	if dp, dq := p.m.Dim(), q.m.Dim(); dp != dq {
		return nil, invalidf("model %s version %d has dimension %d but other_model %s version %d has dimension %d; they must describe the same features",
			p.name(), p.version(), dp, q.name(), q.version(), dq)
	}
	fp, fq := p.pb.GetParameters().GetFeatureNames(), q.pb.GetParameters().GetFeatureNames()
	if len(fp) > 0 && len(fq) > 0 && !slices.Equal(fp, fq) {
		return nil, invalidf("model %s version %d has features %v but other_model %s version %d has %v; they must describe the same features",
			p.name(), p.version(), fp, q.name(), q.version(), fq)
	}
	res, err := mixture.Compare(ctx, p.m, q.m, mixture.CompareOptions{Samples: int(n), Seed: req.GetSeed()})
	if err != nil {
		return nil, toStatus(err)
	}
	out := &mixdv1.CompareModelsResponse{
		Model: p.name(), Version: p.version(),
		OtherModel: q.name(), OtherVersion: q.version(),
		Samples:   int64(res.Samples),
		KlForward: res.Forward, KlForwardStandardError: res.ForwardSE,
		KlBackward: res.Backward, KlBackwardStandardError: res.BackwardSE,
		ComponentDistance: componentDistanceName,
	}
	for _, m := range res.Matches {
		out.Matches = append(out.Matches, &mixdv1.ComponentMatch{
			Component: int32(m.P), OtherComponent: int32(m.Q), Distance: m.Distance,
			Weight: m.WeightP, OtherWeight: m.WeightQ,
		})
	}
	for _, c := range res.UnmatchedP {
		out.UnmatchedComponents = append(out.UnmatchedComponents, int32(c))
	}
	for _, c := range res.UnmatchedQ {
		out.UnmatchedOtherComponents = append(out.UnmatchedOtherComponents, int32(c))
	}
	return out, nil
}
