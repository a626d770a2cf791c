package daemon

import (
	"math"

	"google.golang.org/grpc/codes"

	"github.com/mixd-dev/mixd/fitters/mixture"
)

// decodeMask validates an observed_mask field for the decoded rows x: empty
// (every value observed), or one byte per value, row-major, each 0
// (unobserved) or 1 (observed). It returns nil when every value is
// observed, so that such requests take the unmasked path. field names the
// mask in errors ("observed_mask", "messages[3].observed_mask").
func decodeMask(field string, b []byte, x matrix) ([]bool, error) {
	if len(b) == 0 {
		return nil, nil
	}
	n := x.rows * x.cols
	if len(b) != n {
		return nil, invalidf("%s has %d bytes, want one per value, rows*cols = %d*%d = %d (1 observed, 0 unobserved), or none when every value is observed",
			field, len(b), x.rows, x.cols, n)
	}
	all := true
	for i, v := range b {
		switch v {
		case 1:
		case 0:
			all = false
		default:
			return nil, invalidf("%s: byte for row %d, column %d is %d; want 1 (observed) or 0 (unobserved)", field, i/x.cols, i%x.cols, v)
		}
	}
	if all {
		return nil, nil
	}
	mask := make([]bool, n)
	for i, v := range b {
		mask[i] = v == 1
	}
	return mask, nil
}

// scoreMasked is score for rows with unobserved features: log-densities,
// component log-densities and the outlier rule of the marginal mixture over
// each row's observed features. The percentile of a row with an unobserved
// feature is NaN: the training quantiles are of full log-densities, which a
// marginal log-density cannot be compared with.
func (s *Server) scoreMasked(lm *loadedModel, x matrix, mask []bool, withComponents, le bool, level float64) (scored, error) {
	k, d := lm.m.K(), lm.m.Dim()
	robust := lm.m.Family() == mixture.StudentT
	out := mixture.MarginalOutput{
		LogDensity: make([]float64, x.rows),
		Observed:   make([]int, x.rows),
	}
	if withComponents {
		out.ComponentLogDensity = make([]float64, x.rows*k)
	}
	var stat []float64
	var flags []bool
	if robust {
		stat, flags = make([]float64, x.rows), make([]bool, x.rows)
		out.OutlierStatistic, out.Outlier, out.OutlierLevel = stat, flags, level
	}
	if err := lm.m.Marginal(x.values, mask, &out); err != nil {
		return scored{}, statusf(codes.Internal, "score: model %s version %d: %v", lm.name(), lm.version(), err)
	}
	var res scored
	for _, v := range out.LogDensity {
		res.logLik += v
	}
	res.logDens = encodeMatrix(x.rows, 1, out.LogDensity, le)
	if lm.quantiles != nil {
		pct := make([]float64, x.rows)
		for i, v := range out.LogDensity {
			if out.Observed[i] == d {
				pct[i] = percentile(lm.quantiles, v)
			} else {
				pct[i] = math.NaN()
			}
		}
		res.percentiles = encodeMatrix(x.rows, 1, pct, le)
	}
	if withComponents {
		res.components = encodeMatrix(x.rows, k, out.ComponentLogDensity, le)
	}
	if robust {
		res.outlierStats = encodeMatrix(x.rows, 1, stat, le)
		res.outliers = flags
	}
	return res, nil
}

// classifyMasked is classify for rows with unobserved features: the
// assignment and posteriors given each row's observed features.
func (s *Server) classifyMasked(lm *loadedModel, x matrix, mask []bool, minPost float64, withPost, le bool) (classified, error) {
	k := lm.m.K()
	out := mixture.MarginalOutput{
		Labels:       make([]int, x.rows),
		MaxPosterior: make([]float64, x.rows),
	}
	if withPost {
		out.Posteriors = make([]float64, x.rows*k)
	}
	if err := lm.m.Marginal(x.values, mask, &out); err != nil {
		return classified{}, statusf(codes.Internal, "classify: model %s version %d: %v", lm.name(), lm.version(), err)
	}
	res := classified{
		labels:    encodeLabels(out.Labels, le),
		maxPost:   encodeMatrix(x.rows, 1, out.MaxPosterior, le),
		confident: make([]bool, x.rows),
	}
	for i, p := range out.MaxPosterior {
		res.confident[i] = p >= minPost
	}
	if withPost {
		res.post = encodeMatrix(x.rows, k, out.Posteriors, le)
	}
	return res, nil
}
