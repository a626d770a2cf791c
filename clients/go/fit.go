package mixdclient

import (
	"context"
	"errors"
	"fmt"
	"io"
	"strings"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// FitOptions say how to fit a model. Zero values leave the choice to the
// daemon or the fitter (documented per fitter by ListFitters).
type FitOptions struct {
	// Fitter names the estimation method; empty means "em".
	Fitter string
	// Components is the number of components K; the daemon requires it
	// unless MaxComponents is set.
	Components int
	// MinComponents and MaxComponents, when MaxComponents > 0, fit every K
	// in the range and keep the best by Criterion; Components is then ignored.
	MinComponents int
	MaxComponents int
	// Criterion chooses K in a range fit (BIC when unset).
	Criterion mixdv1.Criterion
	// Family of the components; unset means the fitter's default (em:
	// gaussian, tmix: student_t, vb: its served_model option).
	Family mixdv1.Family
	// Structure of the covariance matrices (full when unset).
	Structure mixdv1.CovarianceStructure
	// Seed of every random choice.
	Seed uint64
	// MaxIterations caps the iterations of one run; -1 evaluates the start.
	MaxIterations int
	// Tolerance is the convergence threshold.
	Tolerance float64
	// Restarts is the number of independent starts.
	Restarts int
	// Ridge, when non-nil, is added to covariance diagonals.
	Ridge *float64
	// FeatureNames name the columns (empty, or one per column).
	FeatureNames []string
	// Options are method-specific settings, by name.
	Options map[string]string
	// Start gives starting parameters instead of the fitter's own start.
	Start *mixdv1.Parameters
	// RowWeights, when non-nil, holds one non-negative weight per row.
	RowWeights []float64
	// StartLabels, when non-nil, holds a starting component for every row.
	StartLabels []int32
	// OnJob, when non-nil, is called with the job running the fit as soon as
	// the daemon creates it (Fit) or returns it (StartFit).
	OnJob func(*mixdv1.FitJob)
}

// spec builds the FitSpec for data.
func (o *FitOptions) spec(model string, data Matrix) *mixdv1.FitSpec {
	return &mixdv1.FitSpec{
		Model:               model,
		Fitter:              o.Fitter,
		Components:          int32(o.Components),
		ComponentsMin:       int32(o.MinComponents),
		ComponentsMax:       int32(o.MaxComponents),
		Criterion:           o.Criterion,
		Family:              o.Family,
		CovarianceStructure: o.Structure,
		Seed:                o.Seed,
		MaxIterations:       int32(o.MaxIterations),
		Tolerance:           o.Tolerance,
		Restarts:            int32(o.Restarts),
		Ridge:               o.Ridge,
		FeatureNames:        o.FeatureNames,
		Options:             o.Options,
		StartParameters:     o.Start,
		ExpectedRows:        int64(data.Rows),
	}
}

// fitChunks splits data (and the per-row extras of o) into FitChunks of at
// most the client's chunk size. It checks the extras' lengths first.
func (c *Client) fitChunks(data Matrix, o *FitOptions) ([]*mixdv1.FitChunk, error) {
	if err := data.check("data"); err != nil {
		return nil, err
	}
	if o.RowWeights != nil && len(o.RowWeights) != data.Rows {
		return nil, fmt.Errorf("mixdclient: RowWeights has %d values for %d rows", len(o.RowWeights), data.Rows)
	}
	if o.StartLabels != nil && len(o.StartLabels) != data.Rows {
		return nil, fmt.Errorf("mixdclient: StartLabels has %d values for %d rows", len(o.StartLabels), data.Rows)
	}
	perRow := 8 * data.Cols
	if o.RowWeights != nil {
		perRow += 8
	}
	if o.StartLabels != nil {
		perRow += 4
	}
	step := c.rowsPerChunk(perRow)
	var chunks []*mixdv1.FitChunk
	for lo := 0; lo < data.Rows; lo += step {
		hi := min(lo+step, data.Rows)
		ch := &mixdv1.FitChunk{Data: data.slice(lo, hi).ToProto()}
		if o.RowWeights != nil {
			ch.RowWeights = Matrix{Rows: hi - lo, Cols: 1, Values: o.RowWeights[lo:hi]}.ToProto()
		}
		if o.StartLabels != nil {
			ch.StartLabels = &mixdv1.Labels{LittleEndian: EncodeInt32s(o.StartLabels[lo:hi])}
		}
		chunks = append(chunks, ch)
	}
	return chunks, nil
}

// Fit uploads data, fits a model named model (a new version when it exists)
// and returns the stored model. progress, when non-nil, receives every
// progress event. Cancelling ctx cancels the fit. The upload is split into
// chunks of at most the client's chunk size.
func (c *Client) Fit(ctx context.Context, model string, data Matrix, opts FitOptions, progress func(*mixdv1.FitProgress)) (*mixdv1.Model, error) {
	chunks, err := c.fitChunks(data, &opts)
	if err != nil {
		return nil, err
	}
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	stream, err := c.svc.Fit(ctx)
	if err != nil {
		return nil, fmt.Errorf("mixdclient: fit %s: %w", model, err)
	}
	spec := opts.spec(model, data)
	sendDone := make(chan error, 1)
	go func() {
		sendDone <- sendAll(len(chunks), func(i int, first bool) error {
			req := &mixdv1.FitRequest{}
			if first {
				req.Spec = spec
			}
			if i >= 0 {
				req.Chunk = chunks[i]
			}
			return stream.Send(req)
		}, stream.CloseSend)
	}()
	for {
		resp, err := stream.Recv()
		if err == io.EOF {
			if serr := <-sendDone; serr != nil {
				return nil, fmt.Errorf("mixdclient: fit %s: upload: %w", model, serr)
			}
			return nil, fmt.Errorf("mixdclient: fit %s: %w", model,
				status.Error(codes.Internal, "the daemon ended the fit without a model"))
		}
		if err != nil {
			return nil, fmt.Errorf("mixdclient: fit %s: %w", model, err)
		}
		switch ev := resp.GetEvent().(type) {
		case *mixdv1.FitResponse_Job:
			if opts.OnJob != nil {
				opts.OnJob(ev.Job)
			}
		case *mixdv1.FitResponse_Progress:
			if progress != nil {
				progress(ev.Progress)
			}
		case *mixdv1.FitResponse_Model:
			return ev.Model, nil
		}
	}
}

// sendAll sends the spec and n chunks: send(i, first) is called for
// i = 0..n-1 (or once with i = -1 when n is 0), then closeSend. A send that
// returns io.EOF means the server ended the call; its status arrives on the
// receiving side, so sendAll stops quietly.
func sendAll(n int, send func(i int, first bool) error, closeSend func() error) error {
	if n == 0 {
		if err := send(-1, true); err != nil && !errors.Is(err, io.EOF) {
			return err
		}
		return closeSend()
	}
	for i := range n {
		if err := send(i, i == 0); err != nil {
			if errors.Is(err, io.EOF) {
				return nil
			}
			return err
		}
	}
	return closeSend()
}

// StartFit uploads data and starts a fit job that runs whether or not
// anybody watches it; the model is stored when the job succeeds. It returns
// the job (named "fitJobs/{id}"); follow it with WatchJob or GetJob.
func (c *Client) StartFit(ctx context.Context, model string, data Matrix, opts FitOptions) (*mixdv1.FitJob, error) {
	chunks, err := c.fitChunks(data, &opts)
	if err != nil {
		return nil, err
	}
	stream, err := c.svc.CreateFitJob(ctx)
	if err != nil {
		return nil, fmt.Errorf("mixdclient: start fit %s: %w", model, err)
	}
	spec := opts.spec(model, data)
	serr := sendAll(len(chunks), func(i int, first bool) error {
		req := &mixdv1.CreateFitJobRequest{}
		if first {
			req.Spec = spec
		}
		if i >= 0 {
			req.Chunk = chunks[i]
		}
		return stream.Send(req)
	}, func() error { return nil })
	resp, err := stream.CloseAndRecv()
	if err != nil {
		return nil, fmt.Errorf("mixdclient: start fit %s: %w", model, err)
	}
	if serr != nil {
		return nil, fmt.Errorf("mixdclient: start fit %s: upload: %w", model, serr)
	}
	if opts.OnJob != nil {
		opts.OnJob(resp.GetJob())
	}
	return resp.GetJob(), nil
}

// JobError reports a fit job that ended without a model: failed or
// cancelled. status.Code and status.Convert see the job's own code and
// message.
type JobError struct {
	// Job is the job as it ended.
	Job *mixdv1.FitJob
}

// Error implements error.
func (e *JobError) Error() string {
	state := strings.ToLower(strings.TrimPrefix(e.Job.GetState().String(), "FIT_JOB_STATE_"))
	msg := e.Job.GetErrorMessage()
	if msg == "" {
		msg = "no message"
	}
	return fmt.Sprintf("fit job %s %s: %s", e.Job.GetName(), state, msg)
}

// GRPCStatus returns the job's status, so status.Code(err) gives the code
// the job failed with (CANCELED for a cancelled job).
func (e *JobError) GRPCStatus() *status.Status {
	code := codes.Code(e.Job.GetErrorCode())
	if code == codes.OK {
		code = codes.Unknown
		if e.Job.GetState() == mixdv1.FitJobState_FIT_JOB_STATE_CANCELLED {
			code = codes.Canceled
		}
	}
	return status.New(code, e.Error())
}

// jobEnded returns the error of a job in a final state other than success.
func jobEnded(job *mixdv1.FitJob) error {
	switch job.GetState() {
	case mixdv1.FitJobState_FIT_JOB_STATE_FAILED, mixdv1.FitJobState_FIT_JOB_STATE_CANCELLED:
		return &JobError{Job: job}
	}
	return nil
}

// WatchJob follows a job until it ends. onJob (when non-nil) receives the
// job on every state change and progress every progress event. It returns
// the stored model when the job succeeds, and a *JobError when it fails or
// is cancelled.
func (c *Client) WatchJob(ctx context.Context, name string, onJob func(*mixdv1.FitJob), progress func(*mixdv1.FitProgress)) (*mixdv1.Model, error) {
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	stream, err := c.svc.WatchFitJob(ctx, &mixdv1.WatchFitJobRequest{Name: name})
	if err != nil {
		return nil, fmt.Errorf("mixdclient: watch %s: %w", name, err)
	}
	var last *mixdv1.FitJob
	for {
		resp, err := stream.Recv()
		if err == io.EOF {
			if jerr := jobEnded(last); jerr != nil {
				return nil, jerr
			}
			// The stream ended without a model: ask for the job once more.
			job, model, gerr := c.GetJob(ctx, name)
			if gerr != nil {
				return nil, gerr
			}
			if jerr := jobEnded(job); jerr != nil {
				return nil, jerr
			}
			if model != nil {
				return model, nil
			}
			return nil, fmt.Errorf("mixdclient: watch %s: %w", name,
				status.Error(codes.Internal, "the watch ended before the job did"))
		}
		if err != nil {
			return nil, fmt.Errorf("mixdclient: watch %s: %w", name, err)
		}
		switch ev := resp.GetEvent().(type) {
		case *mixdv1.WatchFitJobResponse_Job:
			last = ev.Job
			if onJob != nil {
				onJob(ev.Job)
			}
		case *mixdv1.WatchFitJobResponse_Progress:
			if progress != nil {
				progress(ev.Progress)
			}
		case *mixdv1.WatchFitJobResponse_Model:
			return ev.Model, nil
		}
	}
}

// GetJob returns a job and, once it succeeded, the model it wrote.
func (c *Client) GetJob(ctx context.Context, name string) (*mixdv1.FitJob, *mixdv1.Model, error) {
	ctx, cancel := c.unaryContext(ctx)
	defer cancel()
	resp, err := c.svc.GetFitJob(ctx, &mixdv1.GetFitJobRequest{Name: name})
	if err != nil {
		return nil, nil, fmt.Errorf("mixdclient: get job %s: %w", name, err)
	}
	return resp.GetJob(), resp.GetModel(), nil
}

// CancelJob asks the daemon to cancel a running job and returns the job.
func (c *Client) CancelJob(ctx context.Context, name string) (*mixdv1.FitJob, error) {
	ctx, cancel := c.unaryContext(ctx)
	defer cancel()
	resp, err := c.svc.CancelFitJob(ctx, &mixdv1.CancelFitJobRequest{Name: name})
	if err != nil {
		return nil, fmt.Errorf("mixdclient: cancel job %s: %w", name, err)
	}
	return resp.GetJob(), nil
}

// ListJobs returns the daemon's recent jobs, newest first, following pages.
func (c *Client) ListJobs(ctx context.Context) ([]*mixdv1.FitJob, error) {
	ctx, cancel := c.unaryContext(ctx)
	defer cancel()
	var out []*mixdv1.FitJob
	token := ""
	for {
		resp, err := c.svc.ListFitJobs(ctx, &mixdv1.ListFitJobsRequest{PageToken: token})
		if err != nil {
			return nil, fmt.Errorf("mixdclient: list jobs: %w", err)
		}
		out = append(out, resp.GetJobs()...)
		if token = resp.GetNextPageToken(); token == "" {
			return out, nil
		}
	}
}
