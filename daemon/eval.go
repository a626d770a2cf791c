package daemon

import (
	"context"
	"errors"
	"fmt"
	"io"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"

	"github.com/mixd-dev/mixd/fitters/mixture"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// defaultSampleChunkBytes is the payload SampleStream aims at per response
// when chunk_rows is 0.
const defaultSampleChunkBytes = 1 << 20

// rowsFor decodes a request's rows for model lm.
func (s *Server) rowsFor(field string, lm *loadedModel, in *mixdv1.Matrix) (matrix, error) {
	x, err := decodeMatrix(field, in, rowLimit{s.limits.MaxRows, "--max-rows"}, s.limits.MaxDimension)
	if err != nil {
		return matrix{}, err
	}
	if d := lm.m.Dim(); (x.rows > 0 || x.cols > 0) && x.cols != d {
		return matrix{}, invalidf("%s.cols is %d but model %s version %d has dimension %d", field, x.cols, lm.name(), lm.version(), d)
	}
	return x, nil
}

// scored is the result of scoring one batch.
type scored struct {
	logDens, percentiles, components *mixdv1.Matrix
	logLik                           float64
	outlierStats                     *mixdv1.Matrix
	outliers                         []bool
}

// outlierLevel resolves the level of the outlier rule for a request: the
// request's own (field names it in errors), else the level stored with the
// model, else mixture.DefaultOutlierLevel.
func outlierLevel(field string, requested float64, lm *loadedModel) (float64, error) {
	if requested != 0 {
		if !(requested > 0 && requested < 1) {
			return 0, invalidf("%s is %v; want a tail probability level strictly between 0 and 1, or 0 for the model's level", field, requested)
		}
		return requested, nil
	}
	if l := lm.pb.GetReport().GetOutlierLevel(); l > 0 && l < 1 {
		return l, nil
	}
	return mixture.DefaultOutlierLevel, nil
}

// score evaluates x under lm.
//
// For Student-t models it also returns each row's outlier statistic and flag
// by the rule the fitter used (mixture.Model.Outliers) at level. A non-nil
// mask marks unobserved values (see scoreMasked).
func (s *Server) score(lm *loadedModel, x matrix, mask []bool, withComponents bool, le bool, level float64, instead string) (scored, error) {
	k := lm.m.K()
	robust := lm.m.Family() == mixture.StudentT
	bytes := int64(x.rows) * 16
	if robust {
		bytes += int64(x.rows) * 10
	}
	if withComponents {
		bytes += int64(x.rows) * int64(k) * 8
	}
	if err := checkResponseSize(bytes, s.limits.MaxMessageBytes, fmt.Sprintf("the scores of %d rows", x.rows), instead); err != nil {
		return scored{}, err
	}
	if mask != nil {
		return s.scoreMasked(lm, x, mask, withComponents, le, level)
	}
	var out scored
	ld := make([]float64, x.rows)
	if x.rows > 0 {
		if err := lm.m.LogDensity(x.values, ld); err != nil {
			return scored{}, statusf(codes.Internal, "score: %v", err)
		}
	}
	for _, v := range ld {
		out.logLik += v
	}
	out.logDens = encodeMatrix(x.rows, 1, ld, le)
	if lm.quantiles != nil {
		pct := make([]float64, x.rows)
		for i, v := range ld {
			pct[i] = percentile(lm.quantiles, v)
		}
		out.percentiles = encodeMatrix(x.rows, 1, pct, le)
	}
	if withComponents {
		comp := make([]float64, x.rows*k)
		if x.rows > 0 {
			if err := lm.m.ComponentLogDensity(x.values, comp); err != nil {
				return scored{}, statusf(codes.Internal, "score: %v", err)
			}
		}
		out.components = encodeMatrix(x.rows, k, comp, le)
	}
	if robust {
		stat := make([]float64, x.rows)
		out.outliers = make([]bool, x.rows)
		if x.rows > 0 {
			if err := lm.m.Outliers(x.values, level, stat, out.outliers); err != nil {
				return scored{}, statusf(codes.Internal, "score: outliers: %v", err)
			}
		}
		out.outlierStats = encodeMatrix(x.rows, 1, stat, le)
	}
	return out, nil
}

// Score returns each row's log-density, its percentile among the training
// rows' log-densities (omitted for models without training quantiles), the
// component log-densities when asked for, and the total log-likelihood.
func (s *Server) Score(ctx context.Context, req *mixdv1.ScoreRequest) (*mixdv1.ScoreResponse, error) {
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
	le, err := responseEncoding("response_encoding", req.GetResponseEncoding(), x.littleEndian)
	if err != nil {
		return nil, err
	}
	level, err := outlierLevel("outlier_level", req.GetOutlierLevel(), lm)
	if err != nil {
		return nil, err
	}
	sc, err := s.score(lm, x, mask, req.GetIncludeComponentLogDensities(), le, level, "send fewer rows per request or use ScoreStream")
	if err != nil {
		return nil, err
	}
	return &mixdv1.ScoreResponse{
		Model: lm.name(), Version: lm.version(),
		LogDensities: sc.logDens, Percentiles: sc.percentiles, ComponentLogDensities: sc.components,
		LogLikelihood: sc.logLik, OutlierStatistics: sc.outlierStats, Outliers: sc.outliers,
	}, nil
}

// streamModel tracks the model fixed by a stream's first message.
type streamModel struct {
	lm      *loadedModel
	le      bool // response encoding, when fixed
	leFixed bool
}

// open resolves the model of the first message (msg 0) or checks that a
// later message names the same model.
func (sm *streamModel) open(ctx context.Context, s *Server, msg int, name string, version int64, enc mixdv1.MatrixEncoding) error {
	if sm.lm == nil {
		lm, err := s.loadModel(ctx, "model", name, version)
		if err != nil {
			return err
		}
		switch enc {
		case mixdv1.MatrixEncoding_MATRIX_ENCODING_UNSPECIFIED:
		default:
			le, err := responseEncoding("response_encoding", enc, false)
			if err != nil {
				return err
			}
			sm.le, sm.leFixed = le, true
		}
		sm.lm = lm
		return nil
	}
	if name != "" {
		n, err := modelName(fmt.Sprintf("messages[%d].model", msg), name)
		if err != nil {
			return err
		}
		if n != sm.lm.name() {
			return invalidf("messages[%d].model is %s but the stream's first message chose %s", msg, n, sm.lm.name())
		}
	}
	if version != 0 && version != sm.lm.version() {
		return invalidf("messages[%d].version is %d but the stream serves version %d, chosen by its first message", msg, version, sm.lm.version())
	}
	return nil
}

// encoding returns the response encoding for a chunk whose input used
// littleEndian.
func (sm *streamModel) encoding(inputLE bool) bool {
	if sm.leFixed {
		return sm.le
	}
	return inputLE
}

// recvOrEOF maps the end of a client stream to (nil, nil) results.
func recvOrEOF[M any](recv func() (M, error)) (M, bool, error) {
	m, err := recv()
	if errors.Is(err, io.EOF) {
		var zero M
		return zero, true, nil
	}
	return m, false, err
}

// ScoreStream scores chunks of rows, one response per request, in order.
// The model, version, flags and encoding come from the first message.
func (s *Server) ScoreStream(stream grpc.BidiStreamingServer[mixdv1.ScoreStreamRequest, mixdv1.ScoreStreamResponse]) error {
	ctx := stream.Context()
	var sm streamModel
	var withComponents bool
	var level float64
	for msg := 0; ; msg++ {
		req, eof, err := recvOrEOF(stream.Recv)
		if eof {
			return nil
		}
		if err != nil {
			return toStatus(err)
		}
		if err := sm.open(ctx, s, msg, req.GetModel(), req.GetVersion(), req.GetResponseEncoding()); err != nil {
			return err
		}
		if msg == 0 {
			withComponents = req.GetIncludeComponentLogDensities()
			if level, err = outlierLevel("messages[0].outlier_level", req.GetOutlierLevel(), sm.lm); err != nil {
				return err
			}
		}
		x, err := s.rowsFor(fmt.Sprintf("messages[%d].rows", msg), sm.lm, req.GetRows())
		if err != nil {
			return err
		}
		mask, err := decodeMask(fmt.Sprintf("messages[%d].observed_mask", msg), req.GetObservedMask(), x)
		if err != nil {
			return err
		}
		sc, err := s.score(sm.lm, x, mask, withComponents, sm.encoding(x.littleEndian), level, "send fewer rows per message")
		if err != nil {
			return err
		}
		if err := stream.Send(&mixdv1.ScoreStreamResponse{
			Model: sm.lm.name(), Version: sm.lm.version(),
			LogDensities: sc.logDens, Percentiles: sc.percentiles, ComponentLogDensities: sc.components,
			LogLikelihood: sc.logLik, OutlierStatistics: sc.outlierStats, Outliers: sc.outliers,
		}); err != nil {
			return err
		}
	}
}

// classified is the result of classifying one batch.
type classified struct {
	labels        *mixdv1.Labels
	maxPost, post *mixdv1.Matrix
	confident     []bool
}

// checkMinPosterior validates a confidence threshold.
func checkMinPosterior(field string, v float64) error {
	if !(v >= 0 && v <= 1) {
		return invalidf("%s is %v, must be in [0, 1] (0 disables the check)", field, v)
	}
	return nil
}

// classify assigns the rows of x to components of lm. A non-nil mask marks
// unobserved values (see classifyMasked).
func (s *Server) classify(lm *loadedModel, x matrix, mask []bool, minPost float64, withPost, le bool, instead string) (classified, error) {
	k := lm.m.K()
	bytes := int64(x.rows) * 14
	if withPost {
		bytes += int64(x.rows) * int64(k) * 8
	}
	if err := checkResponseSize(bytes, s.limits.MaxMessageBytes, fmt.Sprintf("the assignments of %d rows", x.rows), instead); err != nil {
		return classified{}, err
	}
	if mask != nil {
		return s.classifyMasked(lm, x, mask, minPost, withPost, le)
	}
	labels := make([]int, x.rows)
	maxPost := make([]float64, x.rows)
	if x.rows > 0 {
		if err := lm.m.Assign(x.values, labels, maxPost); err != nil {
			return classified{}, statusf(codes.Internal, "classify: %v", err)
		}
	}
	out := classified{
		labels:    encodeLabels(labels, le),
		maxPost:   encodeMatrix(x.rows, 1, maxPost, le),
		confident: make([]bool, x.rows),
	}
	for i, p := range maxPost {
		out.confident[i] = p >= minPost
	}
	if withPost {
		post := make([]float64, x.rows*k)
		if x.rows > 0 {
			if err := lm.m.Posteriors(x.values, nil, post, nil); err != nil {
				return classified{}, statusf(codes.Internal, "classify: %v", err)
			}
		}
		out.post = encodeMatrix(x.rows, k, post, le)
	}
	return out, nil
}

// Classify returns each row's most probable component (ties go to the lower
// index), its posterior probability, whether it reaches min_posterior, and
// all posteriors when asked for.
func (s *Server) Classify(ctx context.Context, req *mixdv1.ClassifyRequest) (*mixdv1.ClassifyResponse, error) {
	if err := checkMinPosterior("min_posterior", req.GetMinPosterior()); err != nil {
		return nil, err
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
	le, err := responseEncoding("response_encoding", req.GetResponseEncoding(), x.littleEndian)
	if err != nil {
		return nil, err
	}
	c, err := s.classify(lm, x, mask, req.GetMinPosterior(), req.GetIncludePosteriors(), le, "send fewer rows per request or use ClassifyStream")
	if err != nil {
		return nil, err
	}
	return &mixdv1.ClassifyResponse{
		Model: lm.name(), Version: lm.version(),
		Components: c.labels, MaxPosteriors: c.maxPost, Posteriors: c.post, Confident: c.confident,
	}, nil
}

// ClassifyStream classifies chunks of rows, one response per request, in
// order. The model, version, threshold, flags and encoding come from the
// first message.
func (s *Server) ClassifyStream(stream grpc.BidiStreamingServer[mixdv1.ClassifyStreamRequest, mixdv1.ClassifyStreamResponse]) error {
	ctx := stream.Context()
	var sm streamModel
	var minPost float64
	var withPost bool
	for msg := 0; ; msg++ {
		req, eof, err := recvOrEOF(stream.Recv)
		if eof {
			return nil
		}
		if err != nil {
			return toStatus(err)
		}
		if msg == 0 {
			if err := checkMinPosterior("messages[0].min_posterior", req.GetMinPosterior()); err != nil {
				return err
			}
			minPost, withPost = req.GetMinPosterior(), req.GetIncludePosteriors()
		}
		if err := sm.open(ctx, s, msg, req.GetModel(), req.GetVersion(), req.GetResponseEncoding()); err != nil {
			return err
		}
		x, err := s.rowsFor(fmt.Sprintf("messages[%d].rows", msg), sm.lm, req.GetRows())
		if err != nil {
			return err
		}
		mask, err := decodeMask(fmt.Sprintf("messages[%d].observed_mask", msg), req.GetObservedMask(), x)
		if err != nil {
			return err
		}
		c, err := s.classify(sm.lm, x, mask, minPost, withPost, sm.encoding(x.littleEndian), "send fewer rows per message")
		if err != nil {
			return err
		}
		if err := stream.Send(&mixdv1.ClassifyStreamResponse{
			Model: sm.lm.name(), Version: sm.lm.version(),
			Components: c.labels, MaxPosteriors: c.maxPost, Posteriors: c.post, Confident: c.confident,
		}); err != nil {
			return err
		}
	}
}

// sampleRowBytes is the response payload of one sampled row.
func sampleRowBytes(dim int) int64 { return int64(dim)*8 + 4 }

// Sample draws count rows with the seed; the same seed gives the same rows.
func (s *Server) Sample(ctx context.Context, req *mixdv1.SampleRequest) (*mixdv1.SampleResponse, error) {
	n := req.GetCount()
	if n < 0 {
		return nil, invalidf("count is %d, must not be negative", n)
	}
	if n > s.limits.MaxRows {
		return nil, exhaustedf("count is %d, above the limit of %d rows per response (mixd serve --max-rows); use SampleStream", n, s.limits.MaxRows)
	}
	le, err := responseEncoding("response_encoding", req.GetResponseEncoding(), false)
	if err != nil {
		return nil, err
	}
	lm, err := s.loadModel(ctx, "model", req.GetModel(), req.GetVersion())
	if err != nil {
		return nil, err
	}
	d := lm.m.Dim()
	if err := checkResponseSize(n*sampleRowBytes(d), s.limits.MaxMessageBytes, fmt.Sprintf("%d sampled rows", n), "use SampleStream"); err != nil {
		return nil, err
	}
	x, labels := lm.m.Sample(int(n), req.GetSeed())
	return &mixdv1.SampleResponse{
		Model: lm.name(), Version: lm.version(),
		Rows:       encodeMatrix(int(n), d, x, le),
		Components: encodeLabels(labels, le),
	}, nil
}

// SampleStream draws count rows in chunks of chunk_rows rows (0: about 1 MiB
// of rows per response). The rows, concatenated, equal Sample's for the same
// model version and seed. A count of 0 sends no response.
func (s *Server) SampleStream(req *mixdv1.SampleStreamRequest, stream grpc.ServerStreamingServer[mixdv1.SampleStreamResponse]) error {
	n, chunk := req.GetCount(), req.GetChunkRows()
	if n < 0 {
		return invalidf("count is %d, must not be negative", n)
	}
	if n > s.limits.MaxSampleCount {
		return exhaustedf("count is %d, above the limit of %d rows per call (mixd serve --max-sample-count)", n, s.limits.MaxSampleCount)
	}
	if chunk < 0 {
		return invalidf("chunk_rows is %d, must not be negative (0 lets the server choose)", chunk)
	}
	if chunk > s.limits.MaxRows {
		return exhaustedf("chunk_rows is %d, above the limit of %d rows per response (mixd serve --max-rows)", chunk, s.limits.MaxRows)
	}
	le, err := responseEncoding("response_encoding", req.GetResponseEncoding(), false)
	if err != nil {
		return err
	}
	ctx := stream.Context()
	lm, err := s.loadModel(ctx, "model", req.GetModel(), req.GetVersion())
	if err != nil {
		return err
	}
	d := lm.m.Dim()
	if chunk == 0 {
		chunk = max(1, min(s.limits.MaxRows, defaultSampleChunkBytes/sampleRowBytes(d)))
	}
	if err := checkResponseSize(chunk*sampleRowBytes(d), s.limits.MaxMessageBytes, fmt.Sprintf("chunks of %d sampled rows", chunk), "use a smaller chunk_rows"); err != nil {
		return err
	}
	sampler := lm.m.Sampler(req.GetSeed())
	for done := int64(0); done < n; {
		if err := ctx.Err(); err != nil {
			return toStatus(err)
		}
		c := int(min(chunk, n-done))
		x := make([]float64, c*d)
		labels := make([]int, c)
		sampler.Next(x, labels)
		if err := stream.Send(&mixdv1.SampleStreamResponse{
			Model: lm.name(), Version: lm.version(),
			Rows:       encodeMatrix(c, d, x, le),
			Components: encodeLabels(labels, le),
		}); err != nil {
			return err
		}
		done += int64(c)
	}
	return nil
}
