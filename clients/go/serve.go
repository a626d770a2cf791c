package mixdclient

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"

	"google.golang.org/grpc"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// ScoreOptions tune Score.
type ScoreOptions struct {
	// Version of the model; 0 means the newest.
	Version int64
	// ComponentLogDensities asks for each component's log-density too.
	ComponentLogDensities bool
	// OutlierLevel is the level of the outlier rule for Student-t models;
	// 0 means the level stored with the model.
	OutlierLevel float64
	// Observed marks which values of the rows are observed (rows×cols flags,
	// row-major; nil means all). Rows are then scored under the marginal
	// mixture of their observed features; values at unobserved positions are
	// ignored but must be finite. Rows with an unobserved feature get a NaN
	// percentile.
	Observed []bool
}

// ScoreResult holds per-row scores.
type ScoreResult struct {
	// Model and Version that scored (every chunk uses the same version).
	Model   string
	Version int64
	// LogDensities holds the mixture log-density of each row.
	LogDensities []float64
	// Percentiles holds each row's percentile in [0, 100] among the training
	// rows' log-densities: 0.1 means rarer than 99.9% of the training rows.
	// It is NaN for models stored without training quantiles.
	Percentiles []float64
	// ComponentLogDensities is rows×K when asked for (without the weights).
	ComponentLogDensities Matrix
	// LogLikelihood is the sum of the log-densities.
	LogLikelihood float64
	// OutlierStatistics and Outliers are set for Student-t models only: each
	// row's squared Mahalanobis distance to its most probable component over
	// the dimension, and whether its F(dimension, nu) distribution function
	// exceeds the outlier level. A flag marks statistical rarity under the
	// model, not a diagnosis.
	OutlierStatistics []float64
	Outliers          []bool
}

// Score returns the log-density and training percentile of every row.
// Batches larger than one message go through ScoreStream in chunks; the
// result is the same as one call's.
func (c *Client) Score(ctx context.Context, model string, rows Matrix, opts ScoreOptions) (*ScoreResult, error) {
	step, err := c.chunkRows(ctx, "score", model, rows, opts.Observed, opts.ComponentLogDensities, &opts.Version)
	if err != nil {
		return nil, err
	}
	if rows.Rows <= step {
		uctx, cancel := c.unaryContext(ctx)
		defer cancel()
		resp, err := c.svc.Score(uctx, &mixdv1.ScoreRequest{
			ObservedMask:                 maskBytes(opts.Observed, rows, 0, rows.Rows),
			Model:                        model,
			Version:                      opts.Version,
			Rows:                         rows.ToProto(),
			IncludeComponentLogDensities: opts.ComponentLogDensities,
			ResponseEncoding:             mixdv1.MatrixEncoding_MATRIX_ENCODING_LITTLE_ENDIAN,
			OutlierLevel:                 opts.OutlierLevel,
		})
		if err != nil {
			return nil, fmt.Errorf("mixdclient: score %s: %w", model, err)
		}
		res := &ScoreResult{Model: resp.GetModel(), Version: resp.GetVersion(), LogLikelihood: resp.GetLogLikelihood()}
		if err := res.add(rows.Rows, resp, opts.ComponentLogDensities); err != nil {
			return nil, fmt.Errorf("mixdclient: score %s: %w", model, err)
		}
		return res, nil
	}

	res := &ScoreResult{}
	err = streamChunks(ctx, "score", model, rows.Rows, step, c.svc.ScoreStream,
		func(lo, hi int, first bool) *mixdv1.ScoreStreamRequest {
			req := &mixdv1.ScoreStreamRequest{Rows: rows.slice(lo, hi).ToProto(), ObservedMask: maskBytes(opts.Observed, rows, lo, hi)}
			if first {
				req.Model = model
				req.Version = opts.Version
				req.IncludeComponentLogDensities = opts.ComponentLogDensities
				req.ResponseEncoding = mixdv1.MatrixEncoding_MATRIX_ENCODING_LITTLE_ENDIAN
				req.OutlierLevel = opts.OutlierLevel
			}
			return req
		},
		func(i, n int, resp *mixdv1.ScoreStreamResponse) error {
			if i == 0 {
				res.Model, res.Version = resp.GetModel(), resp.GetVersion()
			}
			res.LogLikelihood += resp.GetLogLikelihood()
			return res.add(n, scoreColumns(resp), opts.ComponentLogDensities)
		})
	if err != nil {
		return nil, err
	}
	return res, nil
}

// streamChunks sends rows [0, total) in chunks of at most step rows on a
// bidirectional stream opened by open, and hands the response to each chunk,
// in order, to take (i is the chunk index, n its row count). build makes the
// request for rows [lo, hi); first is set on the first chunk, which carries
// the call's settings. Sending runs concurrently with receiving; the stream
// is cancelled when streamChunks returns. Errors name op and model, and a
// server that answers a different number of responses than chunks sent is an
// error.
func streamChunks[Req, Resp any](
	ctx context.Context, op, model string, total, step int,
	open func(context.Context, ...grpc.CallOption) (grpc.BidiStreamingClient[Req, Resp], error),
	build func(lo, hi int, first bool) *Req,
	take func(i, n int, resp *Resp) error,
) error {
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	stream, err := open(ctx)
	if err != nil {
		return fmt.Errorf("mixdclient: %s %s: %w", op, model, err)
	}
	chunks := chunkSizes(total, step)
	sendDone := make(chan error, 1)
	go func() {
		lo := 0
		sendDone <- sendAll(len(chunks), func(i int, first bool) error {
			req := build(lo, lo+chunks[i], first)
			lo += chunks[i]
			return stream.Send(req)
		}, stream.CloseSend)
	}()
	for i := 0; ; i++ {
		resp, err := stream.Recv()
		if err == io.EOF {
			if serr := <-sendDone; serr != nil {
				return fmt.Errorf("mixdclient: %s %s: upload: %w", op, model, serr)
			}
			if i != len(chunks) {
				return fmt.Errorf("mixdclient: %s %s: %d responses for %d chunks", op, model, i, len(chunks))
			}
			return nil
		}
		if err != nil {
			return fmt.Errorf("mixdclient: %s %s: %w", op, model, err)
		}
		if i >= len(chunks) {
			return fmt.Errorf("mixdclient: %s %s: more responses than the %d chunks sent", op, model, len(chunks))
		}
		if err := take(i, chunks[i], resp); err != nil {
			return fmt.Errorf("mixdclient: %s %s: chunk %d: %w", op, model, i, err)
		}
	}
}

// scoreResponse is what ScoreResponse and ScoreStreamResponse share.
type scoreResponse interface {
	GetLogDensities() *mixdv1.Matrix
	GetPercentiles() *mixdv1.Matrix
	GetComponentLogDensities() *mixdv1.Matrix
	GetOutlierStatistics() *mixdv1.Matrix
	GetOutliers() []bool
}

// scoreColumns adapts a stream response to scoreResponse.
func scoreColumns(r *mixdv1.ScoreStreamResponse) scoreResponse { return r }

// add appends one response's columns (n rows) to r.
func (r *ScoreResult) add(n int, resp scoreResponse, wantComp bool) error {
	l, err := column(resp.GetLogDensities(), "log_densities", n)
	if err != nil {
		return err
	}
	var p []float64
	if resp.GetPercentiles() == nil {
		// A model without training quantiles (imported without a fit
		// report) has no percentiles: NaN marks them as missing.
		p = make([]float64, n)
		for i := range p {
			p[i] = math.NaN()
		}
	} else if p, err = column(resp.GetPercentiles(), "percentiles", n); err != nil {
		return err
	}
	r.LogDensities = append(r.LogDensities, l...)
	r.Percentiles = append(r.Percentiles, p...)
	if wantComp {
		if err := appendRows(&r.ComponentLogDensities, resp.GetComponentLogDensities(), "component_log_densities", n); err != nil {
			return err
		}
	}
	if resp.GetOutlierStatistics() != nil {
		st, err := column(resp.GetOutlierStatistics(), "outlier_statistics", n)
		if err != nil {
			return err
		}
		if len(resp.GetOutliers()) != n {
			return fmt.Errorf("mixdclient: outliers has %d values, want %d", len(resp.GetOutliers()), n)
		}
		r.OutlierStatistics = append(r.OutlierStatistics, st...)
		r.Outliers = append(r.Outliers, resp.GetOutliers()...)
	}
	return nil
}

// appendRows decodes pb (n rows) and appends it to dst.
func appendRows(dst *Matrix, pb *mixdv1.Matrix, field string, n int) error {
	m, err := DecodeMatrix(pb)
	if err != nil {
		return fmt.Errorf("%s: %w", field, err)
	}
	return appendMatrix(dst, m, field, n)
}

// appendMatrix appends m (which must have n rows) to dst.
func appendMatrix(dst *Matrix, m Matrix, field string, n int) error {
	if m.Rows != n {
		return fmt.Errorf("mixdclient: %s has %d rows, want %d", field, m.Rows, n)
	}
	if n == 0 {
		return nil
	}
	if dst.Rows > 0 && m.Cols != dst.Cols {
		return fmt.Errorf("mixdclient: %s has %d columns, earlier chunks had %d", field, m.Cols, dst.Cols)
	}
	dst.Cols = m.Cols
	dst.Rows += m.Rows
	dst.Values = append(dst.Values, m.Values...)
	return nil
}

// chunkRows checks rows and their mask and returns how many rows go in one
// message of a score or classify call. With perComponent set each response
// row carries K+2 values, so the chunks are sized by the wider of request and
// response: the model's K is looked up and *version pinned to the version
// that answered, so that every chunk uses it.
func (c *Client) chunkRows(ctx context.Context, op, model string, rows Matrix, observed []bool, perComponent bool, version *int64) (int, error) {
	if err := rows.check("rows"); err != nil {
		return 0, err
	}
	if err := checkObserved(observed, rows); err != nil {
		return 0, err
	}
	width := rows.Cols
	if perComponent {
		k, v, err := c.components(ctx, model, *version)
		if err != nil {
			return 0, fmt.Errorf("mixdclient: %s %s: %w", op, model, err)
		}
		width, *version = max(width, k+2), v
	}
	return c.rowsPerChunk(8*width + maskWidth(observed, rows)), nil
}

// components returns the number of components of a model version and the
// version itself (resolving 0 to the newest), so that later calls use it.
func (c *Client) components(ctx context.Context, model string, version int64) (int, int64, error) {
	uctx, cancel := c.unaryContext(ctx)
	defer cancel()
	resp, err := c.svc.GetModel(uctx, &mixdv1.GetModelRequest{Name: model, Version: version})
	if err != nil {
		return 0, 0, err
	}
	return len(resp.GetModel().GetParameters().GetComponents()), resp.GetModel().GetVersion(), nil
}

// chunkSizes splits n rows into chunks of at most step rows.
func chunkSizes(n, step int) []int {
	var out []int
	for n > 0 {
		k := min(n, step)
		out = append(out, k)
		n -= k
	}
	return out
}

// ClassifyOptions tune Classify.
type ClassifyOptions struct {
	// Version of the model; 0 means the newest.
	Version int64
	// MinPosterior marks rows whose largest posterior is below it as not
	// confident; 0 disables.
	MinPosterior float64
	// Posteriors asks for every component's posterior probability.
	Posteriors bool
	// Observed marks which values of the rows are observed (see
	// ScoreOptions.Observed); posteriors are then given the observed
	// features only.
	Observed []bool
}

// ClassifyResult holds per-row assignments.
type ClassifyResult struct {
	// Model and Version that classified.
	Model   string
	Version int64
	// Components holds each row's most probable component (0-based).
	Components []int
	// MaxPosteriors holds each row's largest posterior probability.
	MaxPosteriors []float64
	// Confident is false where the largest posterior is below MinPosterior.
	Confident []bool
	// Posteriors is rows×K when asked for.
	Posteriors Matrix
}

// Classify returns the most probable component of every row. Batches larger
// than one message go through ClassifyStream in chunks.
func (c *Client) Classify(ctx context.Context, model string, rows Matrix, opts ClassifyOptions) (*ClassifyResult, error) {
	step, err := c.chunkRows(ctx, "classify", model, rows, opts.Observed, opts.Posteriors, &opts.Version)
	if err != nil {
		return nil, err
	}
	if rows.Rows <= step {
		uctx, cancel := c.unaryContext(ctx)
		defer cancel()
		resp, err := c.svc.Classify(uctx, &mixdv1.ClassifyRequest{
			ObservedMask:      maskBytes(opts.Observed, rows, 0, rows.Rows),
			Model:             model,
			Version:           opts.Version,
			Rows:              rows.ToProto(),
			MinPosterior:      opts.MinPosterior,
			IncludePosteriors: opts.Posteriors,
			ResponseEncoding:  mixdv1.MatrixEncoding_MATRIX_ENCODING_LITTLE_ENDIAN,
		})
		if err != nil {
			return nil, fmt.Errorf("mixdclient: classify %s: %w", model, err)
		}
		res := &ClassifyResult{Model: resp.GetModel(), Version: resp.GetVersion()}
		if err := res.add(rows.Rows, resp.GetComponents(), resp.GetMaxPosteriors(), resp.GetPosteriors(), resp.GetConfident(), opts.Posteriors); err != nil {
			return nil, fmt.Errorf("mixdclient: classify %s: %w", model, err)
		}
		return res, nil
	}

	res := &ClassifyResult{}
	err = streamChunks(ctx, "classify", model, rows.Rows, step, c.svc.ClassifyStream,
		func(lo, hi int, first bool) *mixdv1.ClassifyStreamRequest {
			req := &mixdv1.ClassifyStreamRequest{Rows: rows.slice(lo, hi).ToProto(), ObservedMask: maskBytes(opts.Observed, rows, lo, hi)}
			if first {
				req.Model = model
				req.Version = opts.Version
				req.MinPosterior = opts.MinPosterior
				req.IncludePosteriors = opts.Posteriors
				req.ResponseEncoding = mixdv1.MatrixEncoding_MATRIX_ENCODING_LITTLE_ENDIAN
			}
			return req
		},
		func(i, n int, resp *mixdv1.ClassifyStreamResponse) error {
			if i == 0 {
				res.Model, res.Version = resp.GetModel(), resp.GetVersion()
			}
			return res.add(n, resp.GetComponents(), resp.GetMaxPosteriors(), resp.GetPosteriors(), resp.GetConfident(), opts.Posteriors)
		})
	if err != nil {
		return nil, err
	}
	return res, nil
}

// add appends one response's columns to r.
func (r *ClassifyResult) add(n int, labels *mixdv1.Labels, maxPost, post *mixdv1.Matrix, confident []bool, wantPost bool) error {
	comp, err := DecodeLabels(labels)
	if err != nil {
		return fmt.Errorf("components: %w", err)
	}
	if len(comp) != n {
		return fmt.Errorf("mixdclient: components has %d labels, want %d", len(comp), n)
	}
	mp, err := column(maxPost, "max_posteriors", n)
	if err != nil {
		return err
	}
	if len(confident) != n {
		return fmt.Errorf("mixdclient: confident has %d values, want %d", len(confident), n)
	}
	r.Components = append(r.Components, comp...)
	r.MaxPosteriors = append(r.MaxPosteriors, mp...)
	r.Confident = append(r.Confident, confident...)
	if wantPost {
		return appendRows(&r.Posteriors, post, "posteriors", n)
	}
	return nil
}

// SampleOptions tune Sample.
type SampleOptions struct {
	// Version of the model; 0 means the newest.
	Version int64
	// Seed of the draw; the same seed gives the same rows.
	Seed uint64
}

// SampleResult holds drawn rows.
type SampleResult struct {
	// Model and Version sampled.
	Model   string
	Version int64
	// Rows is count×dimension.
	Rows Matrix
	// Components holds the component each row was drawn from.
	Components []int
}

// sampleUnaryRows is the largest count drawn with one unary Sample call;
// larger counts use SampleStream, whose rows are the same for the same seed.
const sampleUnaryRows = 4096

// Sample draws count rows from a model.
func (c *Client) Sample(ctx context.Context, model string, count int, opts SampleOptions) (*SampleResult, error) {
	if count < 0 {
		return nil, fmt.Errorf("mixdclient: sample count %d is negative", count)
	}
	if count <= sampleUnaryRows {
		uctx, cancel := c.unaryContext(ctx)
		defer cancel()
		resp, err := c.svc.Sample(uctx, &mixdv1.SampleRequest{
			Model:            model,
			Version:          opts.Version,
			Count:            int64(count),
			Seed:             opts.Seed,
			ResponseEncoding: mixdv1.MatrixEncoding_MATRIX_ENCODING_LITTLE_ENDIAN,
		})
		if err != nil {
			return nil, fmt.Errorf("mixdclient: sample %s: %w", model, err)
		}
		res := &SampleResult{Model: resp.GetModel(), Version: resp.GetVersion()}
		if err := res.add(resp.GetRows(), resp.GetComponents()); err != nil {
			return nil, fmt.Errorf("mixdclient: sample %s: %w", model, err)
		}
		if res.Rows.Rows != count {
			return nil, fmt.Errorf("mixdclient: sample %s: got %d rows, asked for %d", model, res.Rows.Rows, count)
		}
		return res, nil
	}
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	stream, err := c.svc.SampleStream(ctx, &mixdv1.SampleStreamRequest{
		Model:            model,
		Version:          opts.Version,
		Count:            int64(count),
		Seed:             opts.Seed,
		ResponseEncoding: mixdv1.MatrixEncoding_MATRIX_ENCODING_LITTLE_ENDIAN,
	})
	if err != nil {
		return nil, fmt.Errorf("mixdclient: sample %s: %w", model, err)
	}
	res := &SampleResult{}
	for i := 0; ; i++ {
		resp, err := stream.Recv()
		if errors.Is(err, io.EOF) {
			if res.Rows.Rows != count {
				return nil, fmt.Errorf("mixdclient: sample %s: got %d rows, asked for %d", model, res.Rows.Rows, count)
			}
			return res, nil
		}
		if err != nil {
			return nil, fmt.Errorf("mixdclient: sample %s: %w", model, err)
		}
		if i == 0 {
			res.Model, res.Version = resp.GetModel(), resp.GetVersion()
		}
		if err := res.add(resp.GetRows(), resp.GetComponents()); err != nil {
			return nil, fmt.Errorf("mixdclient: sample %s: chunk %d: %w", model, i, err)
		}
	}
}

// add appends one response's rows and labels to r.
func (r *SampleResult) add(rows *mixdv1.Matrix, labels *mixdv1.Labels) error {
	m, err := DecodeMatrix(rows)
	if err != nil {
		return fmt.Errorf("rows: %w", err)
	}
	comp, err := DecodeLabels(labels)
	if err != nil {
		return fmt.Errorf("components: %w", err)
	}
	if len(comp) != m.Rows {
		return fmt.Errorf("mixdclient: %d component labels for %d rows", len(comp), m.Rows)
	}
	if err := appendMatrix(&r.Rows, m, "rows", m.Rows); err != nil {
		return err
	}
	r.Components = append(r.Components, comp...)
	return nil
}
