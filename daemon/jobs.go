package daemon

import (
	"context"
	"crypto/rand"
	"encoding/hex"
	"errors"
	"strconv"
	"strings"
	"sync"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/types/known/timestamppb"

	"github.com/mixd-dev/mixd/daemon/store"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// jobPrefix starts every job resource name: "fitJobs/{id}".
const jobPrefix = "fitJobs/"

// progressInterval is the least time between two progress events sent to
// one watcher (at most 10 a second); the latest progress is always sent
// before the final state.
const progressInterval = 100 * time.Millisecond

// Causes of a job's context ending, told apart by context.Cause.
var (
	errCancelRequested = errors.New("fit job cancelled by CancelFitJob")
	errCallerGone      = errors.New("fit cancelled: the Fit call ended before the fit finished")
	errShutdown        = errors.New("fit stopped: the daemon is shutting down")
)

// job is one fit job. Its FitJob message is only changed under mu, and every
// change closes and replaces changed so watchers wake up.
type job struct {
	seq    uint64
	cancel context.CancelCauseFunc
	done   chan struct{} // closed when the job reaches a final state

	mu          sync.Mutex
	pb          *mixdv1.FitJob
	stateSeq    uint64
	progressSeq uint64
	model       *mixdv1.Model
	changed     chan struct{}
}

// jobSnapshot is a consistent copy of a job's observable state.
type jobSnapshot struct {
	job         *mixdv1.FitJob
	stateSeq    uint64
	progressSeq uint64
	model       *mixdv1.Model
	changed     <-chan struct{}
}

func finalState(s mixdv1.FitJobState) bool {
	return s == mixdv1.FitJobState_FIT_JOB_STATE_SUCCEEDED ||
		s == mixdv1.FitJobState_FIT_JOB_STATE_FAILED ||
		s == mixdv1.FitJobState_FIT_JOB_STATE_CANCELLED
}

// name is "fitJobs/{id}".
func (j *job) name() string { return j.pb.GetName() } // immutable after creation

func (j *job) snapshot() jobSnapshot {
	j.mu.Lock()
	defer j.mu.Unlock()
	return jobSnapshot{
		job:         proto.Clone(j.pb).(*mixdv1.FitJob),
		stateSeq:    j.stateSeq,
		progressSeq: j.progressSeq,
		model:       j.model,
		changed:     j.changed,
	}
}

// notifyLocked wakes every watcher.
func (j *job) notifyLocked() {
	close(j.changed)
	j.changed = make(chan struct{})
}

// setState moves a job that has not ended to state s.
func (j *job) setState(s mixdv1.FitJobState) {
	j.mu.Lock()
	defer j.mu.Unlock()
	if finalState(j.pb.State) || j.pb.State == s {
		return
	}
	j.pb.State = s
	j.stateSeq++
	j.notifyLocked()
}

// setRows records the training rows received so far (no event).
func (j *job) setRows(n int64) {
	j.mu.Lock()
	j.pb.Rows = n
	j.mu.Unlock()
}

// setProgress records the latest progress.
func (j *job) setProgress(p *mixdv1.FitProgress) {
	j.mu.Lock()
	defer j.mu.Unlock()
	if finalState(j.pb.State) {
		return
	}
	j.pb.Progress = p
	j.progressSeq++
	j.notifyLocked()
}

// finish moves the job to a final state once; later calls do nothing and
// return false.
func (j *job) finish(s mixdv1.FitJobState, code codes.Code, msg string, model *mixdv1.Model) bool {
	j.mu.Lock()
	defer j.mu.Unlock()
	return j.finishLocked(s, code, msg, model)
}

func (j *job) finishLocked(s mixdv1.FitJobState, code codes.Code, msg string, model *mixdv1.Model) bool {
	if finalState(j.pb.State) {
		return false
	}
	j.pb.State = s
	j.pb.ErrorCode = int32(code)
	j.pb.ErrorMessage = msg
	j.pb.EndTime = timestamppb.Now()
	if model != nil {
		j.model = model
		j.pb.ModelVersion = model.GetVersion()
	}
	j.stateSeq++
	j.notifyLocked()
	close(j.done)
	return true
}

// cancelReceiving ends a job that is still receiving rows as CANCELLED.
func (j *job) cancelReceiving(msg string) {
	j.mu.Lock()
	defer j.mu.Unlock()
	if j.pb.State == mixdv1.FitJobState_FIT_JOB_STATE_RECEIVING {
		j.finishLocked(mixdv1.FitJobState_FIT_JOB_STATE_CANCELLED, codes.Canceled, msg, nil)
	}
}

// err returns the job's failure as a status error, nil when it succeeded.
func (s jobSnapshot) err() error {
	switch s.job.GetState() {
	case mixdv1.FitJobState_FIT_JOB_STATE_SUCCEEDED:
		return nil
	case mixdv1.FitJobState_FIT_JOB_STATE_CANCELLED:
		return status.Error(codes.Canceled, s.job.GetErrorMessage())
	}
	return status.Error(codes.Code(s.job.GetErrorCode()), s.job.GetErrorMessage())
}

// jobSink receives a watcher's events.
type jobSink struct {
	job      func(*mixdv1.FitJob) error
	progress func(*mixdv1.FitProgress) error
	model    func(*mixdv1.Model) error
}

// watch streams j's events to sink until the job ends or ctx is done:
// the job's state first (unless sentState already equals the current state
// sequence, i.e. the caller has sent it), then every state change, progress
// at most every progressInterval, the latest progress before the final
// state, and the model after a successful final state. It returns the final
// snapshot.
func (j *job) watch(ctx context.Context, sink jobSink, sentState uint64, sentAny bool) (jobSnapshot, error) {
	var (
		sentProgress uint64
		lastProgress time.Time
		timer        *time.Timer
		timerC       <-chan time.Time
	)
	defer func() {
		if timer != nil {
			timer.Stop()
		}
	}()
	for {
		snap := j.snapshot()
		final := finalState(snap.job.GetState())
		sendProgress := func() error {
			if snap.progressSeq == sentProgress || snap.job.GetProgress() == nil {
				return nil
			}
			sentProgress = snap.progressSeq
			lastProgress = time.Now()
			return sink.progress(snap.job.GetProgress())
		}
		if !sentAny || snap.stateSeq != sentState {
			if final && sentAny {
				if err := sendProgress(); err != nil {
					return snap, err
				}
			}
			if err := sink.job(snap.job); err != nil {
				return snap, err
			}
			sentAny, sentState = true, snap.stateSeq
		}
		if final {
			if snap.model != nil {
				if err := sink.model(snap.model); err != nil {
					return snap, err
				}
			}
			return snap, nil
		}
		if snap.progressSeq != sentProgress {
			if wait := progressInterval - time.Since(lastProgress); wait <= 0 {
				if err := sendProgress(); err != nil {
					return snap, err
				}
			} else if timerC == nil {
				timer = time.NewTimer(wait)
				timerC = timer.C
			}
		}
		select {
		case <-snap.changed:
		case <-timerC:
			timer, timerC = nil, nil
		case <-ctx.Done():
			return snap, ctx.Err()
		}
	}
}

// jobManager keeps the jobs of this process: every active job and the most
// recent finished ones.
type jobManager struct {
	limits Limits

	mu     sync.Mutex
	seq    uint64
	jobs   map[string]*job
	order  []*job // by seq, oldest first
	active int

	// For metrics: jobs that ended, by final state, and creations refused
	// because MaxActiveJobs jobs were active.
	ended    map[mixdv1.FitJobState]uint64
	refused  uint64
	runTimes []time.Duration // of the most recent jobs that succeeded, for retry hints
}

func newJobManager(l Limits) *jobManager {
	return &jobManager{limits: l, jobs: map[string]*job{}, ended: map[mixdv1.FitJobState]uint64{}}
}

// create registers a new job in state RECEIVING for model with fitter.
// It fails with RESOURCE_EXHAUSTED when MaxActiveJobs jobs are active.
func (m *jobManager) create(model, fitter string, cancel context.CancelCauseFunc) (*job, error) {
	var b [8]byte
	if _, err := rand.Read(b[:]); err != nil {
		return nil, status.Errorf(codes.Internal, "fit job id: %v", err)
	}
	m.mu.Lock()
	defer m.mu.Unlock()
	if m.active >= m.limits.MaxActiveJobs {
		m.refused++
		return nil, queueFull(m.active, m.retryDelayLocked())
	}
	m.seq++
	j := &job{
		seq:     m.seq,
		cancel:  cancel,
		done:    make(chan struct{}),
		changed: make(chan struct{}),
		pb: &mixdv1.FitJob{
			Name:       jobPrefix + hex.EncodeToString(b[:]),
			Model:      model,
			Fitter:     fitter,
			State:      mixdv1.FitJobState_FIT_JOB_STATE_RECEIVING,
			CreateTime: timestamppb.Now(),
		},
	}
	m.jobs[j.name()] = j
	m.order = append(m.order, j)
	m.active++
	m.pruneLocked()
	go func() {
		<-j.done
		m.mu.Lock()
		m.recordEndLocked(j)
		m.active--
		m.pruneLocked()
		m.mu.Unlock()
	}()
	return j, nil
}

// pruneLocked forgets the oldest finished jobs beyond JobHistory.
func (m *jobManager) pruneLocked() {
	finished := len(m.order) - m.active
	if finished <= m.limits.JobHistory {
		return
	}
	drop := finished - m.limits.JobHistory
	kept := m.order[:0]
	for _, j := range m.order {
		if drop > 0 && isDone(j) {
			delete(m.jobs, j.name())
			drop--
			continue
		}
		kept = append(kept, j)
	}
	clear(m.order[len(kept):])
	m.order = kept
}

func isDone(j *job) bool {
	select {
	case <-j.done:
		return true
	default:
		return false
	}
}

// get returns the job named name ("fitJobs/{id}").
func (m *jobManager) get(name string) (*job, error) {
	if !strings.HasPrefix(name, jobPrefix) || len(name) == len(jobPrefix) {
		return nil, invalidf("name: %q is not a fit job name (want %q followed by an id)", name, jobPrefix)
	}
	m.mu.Lock()
	defer m.mu.Unlock()
	j, ok := m.jobs[name]
	if !ok {
		return nil, status.Errorf(codes.NotFound, "fit job %q not found (jobs are kept in memory: the %d most recent finished jobs of this daemon process)", name, m.limits.JobHistory)
	}
	return j, nil
}

// list returns a page of jobs, newest first. The page token is the
// sequence number of the last job of the previous page.
func (m *jobManager) list(pageSize int32, token string) ([]*mixdv1.FitJob, string, error) {
	size, err := pageSizeOf(pageSize)
	if err != nil {
		return nil, "", err
	}
	var before uint64
	if token != "" {
		before, err = strconv.ParseUint(strings.TrimPrefix(token, "j"), 10, 64)
		if err != nil || !strings.HasPrefix(token, "j") || before == 0 {
			return nil, "", invalidf("page_token: %q is not a token returned by ListFitJobs", token)
		}
	}
	m.mu.Lock()
	var page []*job
	next := ""
	for i := len(m.order) - 1; i >= 0; i-- {
		j := m.order[i]
		if before != 0 && j.seq >= before {
			continue
		}
		if len(page) == size {
			next = "j" + strconv.FormatUint(page[len(page)-1].seq, 10)
			break
		}
		page = append(page, j)
	}
	m.mu.Unlock()
	out := make([]*mixdv1.FitJob, len(page))
	for i, j := range page {
		out[i] = j.snapshot().job
	}
	return out, next, nil
}

// cancelAll cancels every active job with cause.
func (m *jobManager) cancelAll(cause error) {
	m.mu.Lock()
	defer m.mu.Unlock()
	for _, j := range m.order {
		if !isDone(j) {
			j.cancel(cause)
		}
	}
}

// pageSizeOf validates a requested page size with the store's rules:
// 0 means store.DefaultPageSize, sizes above store.MaxPageSize are reduced
// to it, negative sizes are refused.
func pageSizeOf(n int32) (int, error) {
	switch {
	case n < 0:
		return 0, invalidf("page_size is %d, must not be negative", n)
	case n == 0:
		return store.DefaultPageSize, nil
	case n > store.MaxPageSize:
		return store.MaxPageSize, nil
	}
	return int(n), nil
}
