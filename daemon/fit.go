package daemon

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"slices"
	"strings"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/types/known/durationpb"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/mixture"
	"github.com/mixd-dev/mixd/fitters/pbconv"
	"github.com/mixd-dev/mixd/fitters/reclaim"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// fitPlan is a validated FitSpec with the data that arrived for it.
type fitPlan struct {
	model         string // "models/{id}"
	fitter        string
	fitterVersion string
	settings      fitters.Settings
	features      []string
	startDim      int // dimension of start parameters, 0 without
	labelBound    int // labels must be < labelBound; 0: labels not allowed
	expectedRows  int64
	data          fitters.Data
}

// checkSpec validates the spec of a fit and resolves its defaults.
func (s *Server) checkSpec(spec *mixdv1.FitSpec) (*fitPlan, error) {
	if spec == nil {
		return nil, invalidf("spec: missing; the first message of a fit must carry the spec")
	}
	lim := s.limits
	model, err := modelName("spec.model", spec.GetModel())
	if err != nil {
		return nil, err
	}
	plan := &fitPlan{model: model, fitter: spec.GetFitter(), settings: fitters.Settings{Ridge: -1}}
	if plan.fitter == "" {
		plan.fitter = DefaultFitter
	}
	st := &plan.settings

	// Family, structure and criterion.
	// An unset family is passed on as zero: each fitter then uses its own
	// default (em: gaussian; tmix: student_t; vb: its served_model option).
	switch spec.GetFamily() {
	case mixdv1.Family_FAMILY_UNSPECIFIED:
	case mixdv1.Family_FAMILY_GAUSSIAN:
		st.Family = mixture.Gaussian
	case mixdv1.Family_FAMILY_STUDENT_T:
		st.Family = mixture.StudentT
	default:
		return nil, invalidf("spec.family: unknown value %d", int32(spec.GetFamily()))
	}
	switch spec.GetCovarianceStructure() {
	case mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_UNSPECIFIED, mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_FULL:
		st.Structure = mixture.Full
	case mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_DIAGONAL:
		st.Structure = mixture.Diagonal
	case mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_SPHERICAL:
		st.Structure = mixture.Spherical
	case mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_TIED:
		st.Structure = mixture.Tied
	default:
		return nil, invalidf("spec.covariance_structure: unknown value %d", int32(spec.GetCovarianceStructure()))
	}
	switch spec.GetCriterion() {
	case mixdv1.Criterion_CRITERION_UNSPECIFIED, mixdv1.Criterion_CRITERION_BIC:
		st.Criterion = fitters.BIC
	case mixdv1.Criterion_CRITERION_AIC:
		st.Criterion = fitters.AIC
	default:
		return nil, invalidf("spec.criterion: unknown value %d", int32(spec.GetCriterion()))
	}

	// Component counts.
	k, kmin, kmax := int64(spec.GetComponents()), int64(spec.GetComponentsMin()), int64(spec.GetComponentsMax())
	switch {
	case k < 0:
		return nil, invalidf("spec.components is %d, must not be negative", k)
	case kmin < 0:
		return nil, invalidf("spec.components_min is %d, must not be negative", kmin)
	case kmax < 0:
		return nil, invalidf("spec.components_max is %d, must not be negative", kmax)
	}
	if kmax > 0 {
		if kmin == 0 {
			kmin = 1
		}
		if kmin > kmax {
			return nil, invalidf("spec.components_min (%d) is greater than spec.components_max (%d)", kmin, kmax)
		}
		if kmax > lim.MaxComponents {
			return nil, exhaustedf("spec.components_max is %d, above the limit of %d (mixd serve --max-components)", kmax, lim.MaxComponents)
		}
		if spec.GetStartParameters() != nil {
			return nil, invalidf("spec.start_parameters cannot be combined with a component range (spec.components_max > 0)")
		}
		st.MinComponents, st.MaxComponents = int(kmin), int(kmax)
	} else {
		if kmin > 0 {
			return nil, invalidf("spec.components_min is %d but spec.components_max is 0; set both for a range, or set spec.components", kmin)
		}
		if sp := spec.GetStartParameters(); k == 0 && sp != nil {
			k = int64(len(sp.GetComponents()))
		}
		if k == 0 {
			return nil, invalidf("spec.components is 0; set the number of components (or a range with spec.components_max)")
		}
		if k > lim.MaxComponents {
			return nil, exhaustedf("spec.components is %d, above the limit of %d (mixd serve --max-components)", k, lim.MaxComponents)
		}
		st.Components = int(k)
		plan.labelBound = int(k)
	}

	// Iteration settings.
	if spec.GetMaxIterations() < -1 {
		return nil, invalidf("spec.max_iterations is %d; want a positive cap, 0 for the fitter's default, or -1 to evaluate the start without iterating", spec.GetMaxIterations())
	}
	st.MaxIterations = int(spec.GetMaxIterations())
	if t := spec.GetTolerance(); !(t >= 0) || math.IsInf(t, 1) {
		return nil, invalidf("spec.tolerance is %v, must be finite and not negative", t)
	}
	st.Tolerance = spec.GetTolerance()
	if spec.GetRestarts() < 0 {
		return nil, invalidf("spec.restarts is %d, must not be negative", spec.GetRestarts())
	}
	st.Restarts = int(spec.GetRestarts())
	if spec.Ridge != nil {
		if r := spec.GetRidge(); !(r >= 0) || math.IsInf(r, 1) {
			return nil, invalidf("spec.ridge is %v, must be finite and not negative", r)
		}
		st.Ridge = spec.GetRidge()
	}
	st.Seed = spec.GetSeed()

	// Names and options.
	if n := int64(len(spec.GetFeatureNames())); n > lim.MaxDimension {
		return nil, exhaustedf("spec.feature_names has %d names, above the limit of %d columns (mixd serve --max-dimension)", n, lim.MaxDimension)
	}
	seen := map[string]int{}
	for i, f := range spec.GetFeatureNames() {
		if strings.TrimSpace(f) == "" {
			return nil, invalidf("spec.feature_names[%d] is empty", i)
		}
		if j, dup := seen[f]; dup {
			return nil, invalidf("spec.feature_names[%d] %q repeats spec.feature_names[%d]", i, f, j)
		}
		seen[f] = i
	}
	plan.features = slices.Clone(spec.GetFeatureNames())
	if len(spec.GetOptions()) > 0 {
		st.Options = make(map[string]string, len(spec.GetOptions()))
		for name, v := range spec.GetOptions() {
			if name == "" {
				return nil, invalidf("spec.options: an option has an empty name")
			}
			st.Options[name] = v
		}
	}
	if e := spec.GetExpectedRows(); e < 0 {
		return nil, invalidf("spec.expected_rows is %d, must not be negative", e)
	} else if e > lim.MaxFitRows {
		return nil, exhaustedf("spec.expected_rows is %d, above the limit of %d training rows (mixd serve --max-fit-rows)", e, lim.MaxFitRows)
	}
	plan.expectedRows = spec.GetExpectedRows()

	// Starting parameters.
	if sp := spec.GetStartParameters(); sp != nil {
		if d := int64(sp.GetDimension()); d > lim.MaxDimension {
			return nil, exhaustedf("spec.start_parameters.dimension is %d, above the limit of %d (mixd serve --max-dimension)", d, lim.MaxDimension)
		}
		p, err := pbconv.ParamsFromProto(sp)
		if err != nil {
			return nil, invalidf("spec.start_parameters: %v", err)
		}
		if _, err := mixture.New(p); err != nil {
			return nil, invalidf("spec.start_parameters: %v", err)
		}
		if len(p.Components) != st.Components {
			return nil, invalidf("spec.start_parameters has %d components but spec.components is %d", len(p.Components), st.Components)
		}
		if st.Family != 0 && p.Family != st.Family {
			return nil, invalidf("spec.start_parameters.family is %s but the fit asks for %s", p.Family, st.Family)
		}
		// An unset structure follows the start's; a set one must agree with it.
		if spec.GetCovarianceStructure() == mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_UNSPECIFIED {
			st.Structure = p.Structure
		} else if p.Structure != st.Structure {
			return nil, invalidf("spec.start_parameters.covariance_structure is %s but spec.covariance_structure is %s", p.Structure, st.Structure)
		}
		st.Start = &p
		plan.startDim = p.Dim
	}

	// The fitter: known, and able to fit this family and structure.
	entry, ok := findFitter(s.host.List(), plan.fitter)
	if !ok {
		var names []string
		for _, e := range s.host.List() {
			names = append(names, e.Info.Name)
		}
		slices.Sort(names)
		return nil, invalidf("spec.fitter: unknown fitter %q (available: %s)", plan.fitter, strings.Join(names, ", "))
	}
	if st.Family != 0 && len(entry.Info.Families) > 0 && !slices.Contains(entry.Info.Families, st.Family) {
		return nil, statusf(codes.Unimplemented, "spec.family: fitter %q does not fit the %s family", plan.fitter, st.Family)
	}
	if len(entry.Info.Structures) > 0 && !slices.Contains(entry.Info.Structures, st.Structure) {
		return nil, statusf(codes.Unimplemented, "spec.covariance_structure: fitter %q does not fit the %s structure", plan.fitter, st.Structure)
	}
	plan.fitterVersion = entry.Info.Version
	return plan, nil
}

// uploader assembles training rows from chunks.
type uploader struct {
	lim        Limits
	plan       *fitPlan
	cols       int
	rows       int64
	values     []float64
	weights    []float64
	labels     []int
	hasWeights bool
	hasLabels  bool
	started    bool // a chunk with rows arrived
}

// add validates chunk (from message msg, 0-based) and appends its rows.
func (u *uploader) add(msg int, c *mixdv1.FitChunk) error {
	if c == nil {
		return nil
	}
	field := fmt.Sprintf("messages[%d].chunk", msg)
	// The shape first; the values are decoded straight into u.values once
	// the limits allow them (below).
	data, err := matrixShape(field+".data", c.GetData(), rowLimit{u.lim.MaxFitRows, "--max-fit-rows"}, u.lim.MaxDimension)
	if err != nil {
		return err
	}
	if data.rows == 0 {
		if c.GetRowWeights().GetRows() > 0 || len(c.GetStartLabels().GetValues()) > 0 || len(c.GetStartLabels().GetLittleEndian()) > 0 {
			return invalidf("%s: row_weights or start_labels sent without data rows", field)
		}
		return nil
	}
	if !u.started {
		u.started = true
		u.cols = data.cols
		u.hasWeights = c.GetRowWeights() != nil
		u.hasLabels = c.GetStartLabels() != nil
		if n := len(u.plan.features); n > 0 && n != u.cols {
			return invalidf("spec.feature_names has %d names but %s has %d columns", n, field+".data", u.cols)
		}
		if d := u.plan.startDim; d > 0 && d != u.cols {
			return invalidf("spec.start_parameters.dimension is %d but %s has %d columns", d, field+".data", u.cols)
		}
		if u.hasLabels && u.plan.labelBound == 0 {
			return invalidf("%s.start_labels cannot be combined with a component range (spec.components_max > 0)", field)
		}
		if e := u.plan.expectedRows; e > 0 {
			u.values = make([]float64, 0, min(e*int64(u.cols), u.lim.MaxFitValues))
			if u.hasWeights {
				u.weights = make([]float64, 0, e)
			}
			if u.hasLabels {
				u.labels = make([]int, 0, e)
			}
		}
	} else if data.cols != u.cols {
		return invalidf("%s.data.cols is %d but earlier chunks have %d columns", field, data.cols, u.cols)
	}
	if n := u.rows + int64(data.rows); n > u.lim.MaxFitRows {
		return exhaustedf("%s: the fit would have %d training rows, above the limit of %d (mixd serve --max-fit-rows)", field, n, u.lim.MaxFitRows)
	} else if n*int64(u.cols) > u.lim.MaxFitValues {
		return exhaustedf("%s: the fit would have %d×%d = %d training values, above the limit of %d (mixd serve --max-fit-values)", field, n, u.cols, n*int64(u.cols), u.lim.MaxFitValues)
	} else if e := u.plan.expectedRows; e > 0 && n > e {
		return invalidf("%s: %d rows have arrived, more than spec.expected_rows = %d", field, n, e)
	} else if err := u.checkMemory(field, n); err != nil {
		return err
	}

	switch w := c.GetRowWeights(); {
	case u.hasWeights && w == nil:
		return invalidf("%s.row_weights: missing; the first chunk had row weights, so every chunk needs them", field)
	case !u.hasWeights && w != nil:
		return invalidf("%s.row_weights: the first chunk had no row weights, so no chunk may have them", field)
	case w != nil:
		wm, err := decodeMatrix(field+".row_weights", w, rowLimit{u.lim.MaxFitRows, "--max-fit-rows"}, math.MaxInt32)
		if err != nil {
			return err
		}
		if wm.rows != data.rows || wm.cols != 1 {
			return invalidf("%s.row_weights is %d×%d, want %d×1 (one weight per data row)", field, wm.rows, wm.cols, data.rows)
		}
		for i, x := range wm.values {
			if x < 0 {
				return invalidf("%s.row_weights: weight of row %d is %v, must not be negative", field, i, x)
			}
		}
		u.weights = append(u.weights, wm.values...)
	}
	switch l := c.GetStartLabels(); {
	case u.hasLabels && l == nil:
		return invalidf("%s.start_labels: missing; the first chunk had start labels, so every chunk needs them", field)
	case !u.hasLabels && l != nil:
		return invalidf("%s.start_labels: the first chunk had no start labels, so no chunk may have them", field)
	case l != nil:
		ls, err := decodeLabels(field+".start_labels", l, data.rows, u.plan.labelBound)
		if err != nil {
			return err
		}
		u.labels = append(u.labels, ls...)
	}
	if u.values, err = appendMatrixValues(u.values, field+".data", c.GetData(), data); err != nil {
		return err
	}
	u.rows += int64(data.rows)
	return nil
}

// finish checks the whole upload and fills plan.data.
func (u *uploader) finish() error {
	if u.rows == 0 {
		return invalidf("no training rows arrived: send at least one chunk with data rows")
	}
	if e := u.plan.expectedRows; e > 0 && u.rows != e {
		return invalidf("spec.expected_rows is %d but %d rows arrived", e, u.rows)
	}
	if u.hasWeights {
		var sum float64
		for _, w := range u.weights {
			sum += w
		}
		if !(sum > 0) || math.IsInf(sum, 1) {
			return invalidf("row_weights sum to %v; want a finite, positive total", sum)
		}
	}
	u.plan.data = fitters.Data{Rows: int(u.rows), Cols: u.cols, Values: u.values, Weights: u.weights}
	u.plan.settings.Labels = u.labels
	return nil
}

// fitMessage is what Fit and CreateFitJob receive.
type fitMessage interface {
	GetSpec() *mixdv1.FitSpec
	GetChunk() *mixdv1.FitChunk
}

// startUpload receives the first message, validates the spec and creates
// the job (state RECEIVING).
func startUpload[M fitMessage](s *Server, recv func() (M, error)) (*job, *fitPlan, context.Context, *mixdv1.FitChunk, error) {
	first, err := recv()
	if errors.Is(err, io.EOF) {
		return nil, nil, nil, nil, invalidf("spec: missing; the stream ended before the first message")
	}
	if err != nil {
		return nil, nil, nil, nil, toStatus(err)
	}
	plan, err := s.checkSpec(first.GetSpec())
	if err != nil {
		return nil, nil, nil, nil, err
	}
	ctx, cancel := context.WithCancelCause(s.baseCtx)
	j, err := s.jobs.create(plan.model, plan.fitter, cancel)
	if err == nil {
		err = s.replica.jobCreated(j) // the shared job table in replica mode (replica.go)
	}
	if err != nil {
		cancel(nil)
		return nil, nil, nil, nil, err
	}
	return j, plan, ctx, first.GetChunk(), nil
}

// upload receives the rest of the rows. On failure the job ends (FAILED, or
// CANCELLED when the caller went away or cancelled it) and the error is
// returned as a status.
func upload[M fitMessage](ctx context.Context, s *Server, j *job, plan *fitPlan, first *mixdv1.FitChunk, recv func() (M, error)) error {
	u := &uploader{lim: s.limits, plan: plan}
	// Each chunk is garbage once its rows are copied: collect every
	// reclaim.DefaultBytes so a large upload peaks near its own size, not
	// twice it.
	garbage := reclaim.New(reclaim.DefaultBytes)
	err := u.add(0, first)
	garbage.Done(proto.Size(first))
	for msg := 1; err == nil; msg++ {
		if ctx.Err() != nil {
			err = context.Cause(ctx)
			break
		}
		var m M
		m, err = recv()
		if errors.Is(err, io.EOF) {
			err = u.finish()
			break
		}
		if err != nil {
			break
		}
		if m.GetSpec() != nil {
			err = invalidf("messages[%d].spec: the spec is allowed only in the first message", msg)
			break
		}
		err = u.add(msg, m.GetChunk())
		garbage.Done(proto.Size(m.GetChunk()))
		j.setRows(u.rows)
	}
	j.setRows(u.rows)
	if err != nil {
		s.endJob(ctx, j, err)
		return j.snapshot().err()
	}
	return nil
}

// Fit receives the spec and training rows, runs the fit as a job, and
// streams the job, its progress and the stored model. When the call ends
// before the fit does, the fit is cancelled.
func (s *Server) Fit(stream grpc.BidiStreamingServer[mixdv1.FitRequest, mixdv1.FitResponse]) error {
	j, plan, ctx, first, err := startUpload(s, stream.Recv)
	if err != nil {
		return err
	}
	callerCtx := stream.Context()
	stop := context.AfterFunc(callerCtx, func() {
		j.cancel(fmt.Errorf("%w (%w)", errCallerGone, context.Cause(callerCtx)))
	})
	defer stop()
	snap := j.snapshot()
	if err := stream.Send(&mixdv1.FitResponse{Event: &mixdv1.FitResponse_Job{Job: snap.job}}); err != nil {
		j.cancel(errCallerGone)
		s.endJob(ctx, j, err)
		return err
	}
	if err := upload(ctx, s, j, plan, first, stream.Recv); err != nil {
		return err
	}
	s.startJob(ctx, j, plan)
	final, err := j.watch(callerCtx, jobSink{
		job: func(f *mixdv1.FitJob) error {
			return stream.Send(&mixdv1.FitResponse{Event: &mixdv1.FitResponse_Job{Job: f}})
		},
		progress: func(p *mixdv1.FitProgress) error {
			return stream.Send(&mixdv1.FitResponse{Event: &mixdv1.FitResponse_Progress{Progress: p}})
		},
		model: func(m *mixdv1.Model) error {
			return stream.Send(&mixdv1.FitResponse{Event: &mixdv1.FitResponse_Model{Model: m}})
		},
	}, snap.stateSeq, true)
	if err != nil {
		j.cancel(errCallerGone)
		return toStatus(err)
	}
	return final.err()
}

// CreateFitJob receives the spec and training rows and starts a fit job
// that runs whether or not anybody watches; it returns the job.
func (s *Server) CreateFitJob(stream grpc.ClientStreamingServer[mixdv1.CreateFitJobRequest, mixdv1.CreateFitJobResponse]) error {
	j, plan, ctx, first, err := startUpload(s, stream.Recv)
	if err != nil {
		return err
	}
	// Until the upload is complete the job belongs to this call.
	stop := context.AfterFunc(stream.Context(), func() { j.cancel(errCallerGone) })
	err = upload(ctx, s, j, plan, first, stream.Recv)
	stop()
	if err != nil {
		return err
	}
	s.startJob(ctx, j, plan)
	return stream.SendAndClose(&mixdv1.CreateFitJobResponse{Job: j.snapshot().job})
}

// startJob queues j and runs it in its own goroutine.
func (s *Server) startJob(ctx context.Context, j *job, plan *fitPlan) {
	j.setState(mixdv1.FitJobState_FIT_JOB_STATE_QUEUED)
	s.mu.Lock()
	if s.closing {
		s.mu.Unlock()
		s.endJob(ctx, j, errShutdown)
		return
	}
	s.wg.Add(1)
	s.mu.Unlock()
	go func() {
		defer s.wg.Done()
		defer j.cancel(nil)
		s.runJob(ctx, j, plan)
	}()
}

// runJob waits for a fit slot, runs the fit and stores its model.
func (s *Server) runJob(ctx context.Context, j *job, plan *fitPlan) {
	select {
	case s.slots <- struct{}{}:
	case <-ctx.Done():
		s.endJob(ctx, j, context.Cause(ctx))
		return
	}
	defer func() { <-s.slots }()
	if ctx.Err() != nil {
		s.endJob(ctx, j, context.Cause(ctx))
		return
	}
	j.setState(mixdv1.FitJobState_FIT_JOB_STATE_RUNNING)
	s.log.Info("fit started", "job", j.name(), "model", plan.model, "fitter", plan.fitter,
		"rows", plan.data.Rows, "cols", plan.data.Cols)
	start := time.Now()
	res, err := s.host.Fit(ctx, plan.fitter, plan.data, plan.settings, func(p fitters.Progress) {
		j.setProgress(&mixdv1.FitProgress{
			Components: int32(p.Components),
			Restart:    int32(p.Restart),
			Iteration:  int32(p.Iteration),
			Objective:  p.Objective,
			Elapsed:    durationpb.New(p.Elapsed),
		})
	})
	elapsed := time.Since(start)
	if err == nil {
		err = s.storeResult(ctx, j, plan, res, elapsed)
	}
	if err != nil {
		s.endJob(ctx, j, err)
	}
}

// endJob records a failed, cancelled or interrupted job.
func (s *Server) endJob(ctx context.Context, j *job, err error) {
	state, code, msg := mixdv1.FitJobState_FIT_JOB_STATE_FAILED, codes.Internal, ""
	cause := context.Cause(ctx)
	switch {
	case ctx.Err() != nil && errors.Is(cause, errShutdown):
		code, msg = codes.Unavailable, errShutdown.Error()+" (retryable)"
	case ctx.Err() != nil && (errors.Is(cause, errCancelRequested) || errors.Is(cause, errCallerGone)):
		state, code, msg = mixdv1.FitJobState_FIT_JOB_STATE_CANCELLED, codes.Canceled, cause.Error()
	default:
		code, msg = classify(err)
		if code == codes.Canceled {
			state = mixdv1.FitJobState_FIT_JOB_STATE_CANCELLED
		}
	}
	if j.finish(state, code, msg, nil) {
		s.log.Warn("fit ended without a model", "job", j.name(), "state", state.String(), "code", code.String(), "error", msg)
	}
}

// storeResult validates a fitter's result, computes the training
// quantiles, stores the model, caches it, and marks the job succeeded.
func (s *Server) storeResult(ctx context.Context, j *job, plan *fitPlan, res *fitters.Result, elapsed time.Duration) error {
	if res == nil {
		return fmt.Errorf("fitter %q returned no result", plan.fitter)
	}
	p := res.Params.Clone()
	if len(plan.features) > 0 {
		p.Features = slices.Clone(plan.features)
	}
	if p.Dim != plan.data.Cols {
		return fmt.Errorf("fitter %q returned a model of dimension %d for %d columns", plan.fitter, p.Dim, plan.data.Cols)
	}
	m, err := mixture.New(p)
	if err != nil {
		return fmt.Errorf("fitter %q returned parameters that do not validate: %v", plan.fitter, err)
	}
	if err := checkReport(res.Report); err != nil {
		return fmt.Errorf("fitter %q returned a bad report: %v", plan.fitter, err)
	}
	ld := make([]float64, plan.data.Rows)
	if err := m.LogDensity(plan.data.Values, ld); err != nil {
		return fmt.Errorf("training log-densities: %w", err)
	}
	r := res.Report
	report := &mixdv1.FitReport{
		Fitter:              plan.fitter,
		FitterVersion:       plan.fitterVersion,
		Settings:            r.Settings,
		Seed:                plan.settings.Seed,
		Iterations:          int32(r.Iterations),
		Converged:           r.Converged,
		Objective:           r.Objective,
		LogLikelihood:       r.LogLikelihood,
		Bound:               r.Bound,
		Bic:                 r.BIC,
		Aic:                 r.AIC,
		Elapsed:             durationpb.New(elapsed),
		TrainingRows:        int64(plan.data.Rows),
		History:             r.History,
		FlaggedRows:         int64(r.FlaggedRows),
		OutlierLevel:        r.OutlierLevel,
		EffectiveComponents: int32(r.EffectiveComponents),
		Notes:               r.Notes,
		TrainingQuantiles:   trainingQuantiles(ld, plan.data.Weights),
	}
	for _, row := range r.Selection {
		report.Selection = append(report.Selection, &mixdv1.SelectionRow{
			Components:    int32(row.Components),
			LogLikelihood: row.LogLikelihood,
			Bic:           row.BIC,
			Aic:           row.AIC,
			Converged:     row.Converged,
			Iterations:    int32(row.Iterations),
		})
	}
	pb := &mixdv1.Model{Name: plan.model, Parameters: pbconv.ParamsToProto(p), Report: report}
	if ctx.Err() != nil {
		return context.Cause(ctx)
	}
	// From here on the write is not interrupted: a model that is stored is
	// reported as stored.
	stored, err := s.store.Create(context.WithoutCancel(ctx), pb)
	if err != nil {
		if storeUnavailable(err) {
			return fmt.Errorf("store the fitted model %s: %w", plan.model, err)
		}
		return fmt.Errorf("store the fitted model %s: %v", plan.model, err)
	}
	s.cache.add(newLoaded(stored, m))
	j.finish(mixdv1.FitJobState_FIT_JOB_STATE_SUCCEEDED, codes.OK, "", stored)
	s.log.Info("fit stored", "job", j.name(), "model", stored.GetName(), "version", stored.GetVersion(),
		"elapsed", elapsed, "iterations", r.Iterations, "converged", r.Converged)
	return nil
}

// checkReport rejects non-finite numbers in a fitter's report: they could
// not be stored and would mislead.
func checkReport(r fitters.Report) error {
	check := func(name string, v float64) error {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("%s is %v", name, v)
		}
		return nil
	}
	for _, c := range []struct {
		n string
		v float64
	}{{"log_likelihood", r.LogLikelihood}, {"bound", r.Bound}, {"bic", r.BIC}, {"aic", r.AIC}} {
		if err := check(c.n, c.v); err != nil {
			return err
		}
	}
	for i, v := range r.History {
		if err := check(fmt.Sprintf("history[%d]", i), v); err != nil {
			return err
		}
	}
	for i, row := range r.Selection {
		for _, c := range []struct {
			n string
			v float64
		}{{"log_likelihood", row.LogLikelihood}, {"bic", row.BIC}, {"aic", row.AIC}} {
			if err := check(fmt.Sprintf("selection[%d].%s", i, c.n), c.v); err != nil {
				return err
			}
		}
	}
	return nil
}

// GetFitJob returns a job and, once it succeeded, its model.
func (s *Server) GetFitJob(ctx context.Context, req *mixdv1.GetFitJobRequest) (*mixdv1.GetFitJobResponse, error) {
	j, err := s.jobs.get(req.GetName())
	if s.replica.elsewhere(err) {
		return s.replica.getJob(ctx, req.GetName())
	}
	if err != nil {
		return nil, err
	}
	snap := j.snapshot()
	return &mixdv1.GetFitJobResponse{Job: snap.job, Model: snap.model}, nil
}

// WatchFitJob streams a job's state, progress and model until it ends.
func (s *Server) WatchFitJob(req *mixdv1.WatchFitJobRequest, stream grpc.ServerStreamingServer[mixdv1.WatchFitJobResponse]) error {
	j, err := s.jobs.get(req.GetName())
	if s.replica.elsewhere(err) {
		return toStatus(s.replica.watchJob(stream.Context(), req.GetName(), watchSink(stream)))
	}
	if err != nil {
		return err
	}
	_, err = j.watch(stream.Context(), jobSink{
		job: func(f *mixdv1.FitJob) error {
			return stream.Send(&mixdv1.WatchFitJobResponse{Event: &mixdv1.WatchFitJobResponse_Job{Job: f}})
		},
		progress: func(p *mixdv1.FitProgress) error {
			return stream.Send(&mixdv1.WatchFitJobResponse{Event: &mixdv1.WatchFitJobResponse_Progress{Progress: p}})
		},
		model: func(m *mixdv1.Model) error {
			return stream.Send(&mixdv1.WatchFitJobResponse{Event: &mixdv1.WatchFitJobResponse_Model{Model: m}})
		},
	}, 0, false)
	return toStatus(err)
}

// CancelFitJob cancels a job that is receiving, queued or running. It
// returns the job once it has ended (normally within moments: fitters check
// cancellation every iteration), or its state when ctx ends first.
// Cancelling a job that has already ended is FAILED_PRECONDITION.
func (s *Server) CancelFitJob(ctx context.Context, req *mixdv1.CancelFitJobRequest) (*mixdv1.CancelFitJobResponse, error) {
	j, err := s.jobs.get(req.GetName())
	if s.replica.elsewhere(err) {
		return s.replica.cancelJob(ctx, req.GetName())
	}
	if err != nil {
		return nil, err
	}
	if isDone(j) {
		return nil, statusf(codes.FailedPrecondition, "fit job %s has already ended (%s)", j.name(), j.snapshot().job.GetState())
	}
	j.cancel(errCancelRequested)
	// A job still receiving rows ends now; its upload notices at the
	// next message.
	j.cancelReceiving(errCancelRequested.Error())
	select {
	case <-j.done:
	case <-ctx.Done():
	case <-time.After(cancelWait):
	}
	return &mixdv1.CancelFitJobResponse{Job: j.snapshot().job}, nil
}

// cancelWait bounds how long CancelFitJob waits for the job to end.
const cancelWait = 5 * time.Second

// ListFitJobs lists recent jobs, newest first.
func (s *Server) ListFitJobs(ctx context.Context, req *mixdv1.ListFitJobsRequest) (*mixdv1.ListFitJobsResponse, error) {
	if s.replica.sharesJobs() {
		return s.replica.listJobs(ctx, req.GetPageSize(), req.GetPageToken())
	}
	jobs, next, err := s.jobs.list(req.GetPageSize(), req.GetPageToken())
	if err != nil {
		return nil, err
	}
	return &mixdv1.ListFitJobsResponse{Jobs: jobs, NextPageToken: next}, nil
}
