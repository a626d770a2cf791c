package daemon

import (
	"context"
	"crypto/rand"
	"encoding/hex"
	"errors"
	"fmt"
	"log/slog"
	"os"
	"sync"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	"github.com/mixd-dev/mixd/daemon/store"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// Replicas: several daemons serving one shared store (PostgreSQL).
//
// A daemon is in replica mode when its store implements store.Watcher or
// store.JobStore (DirStore implements neither: nothing here runs for it).
//
// Models. Every daemon hears of models created and deleted by the others
// through store.Watcher and keeps its cache consistent with them (see
// replica_cache.go).
//
// Fit jobs. A job runs only in the daemon that received its data (its
// owner); it is never moved or resumed elsewhere, so it never runs twice.
// The owner writes the job to the shared job table when it is created
// (if that write fails, the fit fails with UNAVAILABLE before any row is
// accepted), at every state change, and with its progress at most once
// per sharedProgressInterval. Any daemon answers GetFitJob, WatchFitJob,
// ListFitJobs and CancelFitJob for any job: its own from memory, the
// others' from the table. CancelFitJob on another daemon records the
// request in the table and notifies the owner, which cancels the fit (it
// also polls for requests at every heartbeat, in case a notification is
// missed) and writes the outcome; the caller waits up to cancelWait for it.
//
// Every daemon writes a heartbeat every ReplicaOptions.Timeout/5. When a
// daemon's heartbeat is older than Timeout (it crashed, was killed, or
// lost the database for that long), any daemon that notices marks its
// unfinished jobs FAILED with UNAVAILABLE: their training data was only in
// the dead daemon's memory, so the caller must fit again. A job so marked
// stays failed even if its daemon comes back and finishes the fit (the
// model version it then stores is kept). A daemon judges others only after
// it has itself reached the store for a whole Timeout plus one store call's
// timeout (storeCallTimeout), so that an outage of the database does not
// fail the jobs of daemons that are alive. A daemon
// started with the id of an earlier process fails that process's
// unfinished jobs before it serves.

// Replica defaults.
const (
	// DefaultReplicaTimeout is how old a daemon's heartbeat may get before
	// its unfinished jobs are marked failed.
	DefaultReplicaTimeout = 15 * time.Second
	// DefaultRecheck is how long cached models and newest-version pointers
	// are trusted without asking the store while change notifications are
	// not received.
	DefaultRecheck = 3 * time.Second
	// sharedProgressInterval is the least time between two progress writes
	// of one job to the shared job table.
	sharedProgressInterval = time.Second
	// remoteJobPoll is how often a watcher of another daemon's job reads
	// the job when no notification wakes it.
	remoteJobPoll = time.Second
	// storeCallTimeout bounds the replica's own store calls.
	storeCallTimeout = 5 * time.Second
)

// ReplicaOptions configure a daemon that shares its store with others.
// Zero fields take their defaults.
type ReplicaOptions struct {
	// ID names this daemon in the shared job table; default
	// "<hostname>-<12 random hex digits>", new at every start.
	ID string
	// Timeout: a daemon whose last heartbeat is older than this is presumed
	// dead and its unfinished jobs are marked FAILED (UNAVAILABLE).
	// Heartbeats are written every Timeout/5. Default DefaultReplicaTimeout.
	Timeout time.Duration
	// Recheck: while change notifications are not received, cached models
	// and newest-version pointers older than this are confirmed with the
	// store on use. Default DefaultRecheck.
	Recheck time.Duration
}

// withDefaults fills in zero fields.
func (o ReplicaOptions) withDefaults() (ReplicaOptions, error) {
	if o.Timeout < 0 || o.Recheck < 0 {
		return o, fmt.Errorf("replica timeout %v and recheck %v must not be negative", o.Timeout, o.Recheck)
	}
	if o.Timeout == 0 {
		o.Timeout = DefaultReplicaTimeout
	}
	if o.Recheck == 0 {
		o.Recheck = DefaultRecheck
	}
	if o.ID == "" {
		host, err := os.Hostname()
		if err != nil || host == "" {
			host = "mixd"
		}
		var b [6]byte
		if _, err := rand.Read(b[:]); err != nil {
			return o, fmt.Errorf("replica id: %w", err)
		}
		o.ID = host + "-" + hex.EncodeToString(b[:])
	}
	return o, nil
}

// replica is the replica-mode machinery of a Server; nil outside it. Its
// methods are safe to call on nil.
type replica struct {
	s       *Server
	opts    ReplicaOptions
	watcher store.Watcher  // nil when the store has none
	jobs    store.JobStore // nil when the store has none
	log     *slog.Logger

	ctx     context.Context // ends with close
	cancel  context.CancelFunc
	loops   sync.WaitGroup // change consumer, maintenance
	syncers sync.WaitGroup // one per job being written

	mu   sync.Mutex
	wake chan struct{} // closed and replaced when a shared job changes
}

// newReplica starts replica mode for s when its store supports it.
func newReplica(s *Server, o ReplicaOptions) (*replica, error) {
	w, _ := s.store.(store.Watcher)
	js, _ := s.store.(store.JobStore)
	if w == nil && js == nil {
		return nil, nil
	}
	o, err := o.withDefaults()
	if err != nil {
		return nil, fmt.Errorf("daemon: %w", err)
	}
	r := &replica{s: s, opts: o, watcher: w, jobs: js, log: s.log.With("replica", o.ID), wake: make(chan struct{})}
	r.ctx, r.cancel = context.WithCancel(context.Background())
	if w != nil {
		s.cache.enableReplica(o.Recheck)
		changes := w.Changes(r.ctx)
		first := make(chan struct{})
		r.loops.Add(1)
		go r.consume(changes, first)
		// Serve only once notifications flow (bounded): the first one
		// empties the cache, which must not happen after calls have filled it.
		select {
		case <-first:
		case <-time.After(storeCallTimeout):
			r.log.Warn("replica: store change notifications not established yet; cached models are confirmed with the store on use until they are")
		}
	}
	if js != nil {
		// Unfinished jobs of an earlier process with this id died with it.
		ctx, cancel := context.WithTimeout(r.ctx, storeCallTimeout)
		gone, err := js.FailJobsOfOwner(ctx, o.ID, int32(codes.Unavailable),
			"the daemon running this fit job stopped before the job ended and was started again; fit again (retryable)")
		cancel()
		if err != nil {
			r.cancel()
			r.loops.Wait()
			return nil, fmt.Errorf("daemon: replica %s: %w", o.ID, err)
		}
		for _, n := range gone {
			r.log.Warn("replica: marked a fit job of this replica's previous run FAILED", "job", n)
		}
		r.loops.Add(1)
		go r.maintain()
	}
	r.log.Info("replica mode: sharing models and fit jobs through the store", "heartbeat_timeout", o.Timeout, "recheck", o.Recheck)
	return r, nil
}

// close stops replica mode, giving job writers a moment to record the
// final states of jobs that Server.Close just ended.
func (r *replica) close() {
	if r == nil {
		return
	}
	done := make(chan struct{})
	go func() {
		r.syncers.Wait()
		close(done)
	}()
	select {
	case <-done:
	case <-time.After(3 * time.Second):
		r.log.Warn("replica: some fit job states could not be written to the store before shutdown")
	}
	r.cancel()
	r.syncers.Wait()
	r.loops.Wait()
}

// sharesJobs reports whether fit jobs are shared through the store.
func (r *replica) sharesJobs() bool { return r != nil && r.jobs != nil }

// consume applies the store's change notifications.
// first is closed when notifications flow for the first time.
func (r *replica) consume(changes <-chan store.Change, first chan<- struct{}) {
	defer r.loops.Done()
	for c := range changes {
		switch c.Kind {
		case store.ChangeListening:
			r.s.cache.listening()
			r.wakeJobs()
			if first != nil {
				close(first)
				first = nil
			}
		case store.ChangeLost:
			r.s.cache.lost(r.opts.Recheck)
			r.log.Warn("replica: store change notifications lost; cached models are confirmed with the store on use until they return",
				"recheck", r.opts.Recheck, "error", c.Err)
		case store.ChangeModelCreated:
			r.s.cache.noteCreated(c.Name, c.Version)
		case store.ChangeModelDeleted:
			r.s.cache.forget(c.Name, c.Version)
		case store.ChangeJobUpdated:
			r.wakeJobs()
		case store.ChangeJobCancelRequested:
			if c.Owner == r.opts.ID {
				r.cancelLocal(c.Job)
			}
			r.wakeJobs()
		}
	}
}

// maintain writes heartbeats, picks up cancellation requests, fails the
// jobs of dead daemons and prunes old jobs, every Timeout/5.
func (r *replica) maintain() {
	defer r.loops.Done()
	every := max(r.opts.Timeout/5, 50*time.Millisecond)
	t := time.NewTicker(every)
	defer t.Stop()
	failing := false
	// This daemon judges others only once it has reached the store for a
	// whole Timeout plus one store call's timeout: after an outage of the
	// database itself, every live daemon gets the time to renew its
	// heartbeat first, even one whose last attempt was still waiting on a
	// dead connection when the database came back.
	grace := r.opts.Timeout + storeCallTimeout
	connectedSince := time.Now()
	for tick := 0; ; tick++ {
		err := r.maintainOnce(tick%50 == 0, time.Since(connectedSince) >= grace)
		switch {
		case err != nil && !failing && r.ctx.Err() == nil:
			r.log.Warn("replica: heartbeat failed; retrying", "error", err)
			failing = true
		case err == nil && failing:
			r.log.Info("replica: heartbeat restored")
			failing = false
			connectedSince = time.Now()
		}
		select {
		case <-t.C:
		case <-r.ctx.Done():
			return
		}
	}
}

func (r *replica) maintainOnce(prune, judge bool) error {
	ctx, cancel := context.WithTimeout(r.ctx, storeCallTimeout)
	defer cancel()
	if err := r.jobs.Heartbeat(ctx, r.opts.ID); err != nil {
		return err
	}
	names, err := r.jobs.CancelRequests(ctx, r.opts.ID)
	if err != nil {
		return err
	}
	for _, n := range names {
		r.cancelLocal(n)
	}
	if prune {
		if err := r.jobs.PruneJobs(ctx, r.s.limits.JobHistory); err != nil {
			return err
		}
	}
	if !judge {
		return nil
	}
	msg := fmt.Sprintf("the daemon running this fit job sent no heartbeat for more than %v and is presumed dead; "+
		"the job was not resumed elsewhere (its training data was in that daemon's memory): fit again (retryable)", r.opts.Timeout)
	lost, err := r.jobs.FailJobsOfLostOwners(ctx, r.opts.Timeout, int32(codes.Unavailable), msg)
	if err != nil {
		return err
	}
	for _, n := range lost {
		r.log.Warn("replica: marked the fit job of a lost daemon FAILED", "job", n)
	}
	return nil
}

// cancelLocal cancels this daemon's job name, if it is still active.
func (r *replica) cancelLocal(name string) {
	j, err := r.s.jobs.get(name)
	if err != nil || isDone(j) {
		return
	}
	r.log.Info("fit job cancelled from another daemon", "job", name)
	j.cancel(errCancelRequested)
	j.cancelReceiving(errCancelRequested.Error())
}

// wakeJobs wakes every watcher of a shared job.
func (r *replica) wakeJobs() {
	r.mu.Lock()
	close(r.wake)
	r.wake = make(chan struct{})
	r.mu.Unlock()
}

// woken returns a channel closed at the next shared job change.
func (r *replica) woken() <-chan struct{} {
	r.mu.Lock()
	defer r.mu.Unlock()
	return r.wake
}

// jobCreated writes a new job to the shared table and starts writing its
// changes. When the first write fails, the job ends FAILED and the error
// (UNAVAILABLE, or the store's code) is returned. Nothing happens outside
// replica mode.
func (r *replica) jobCreated(j *job) error {
	if !r.sharesJobs() {
		return nil
	}
	snap := j.snapshot()
	ctx, cancel := context.WithTimeout(r.ctx, storeCallTimeout)
	err := r.jobs.SaveJob(ctx, r.opts.ID, snap.job)
	cancel()
	if err != nil {
		code, msg := classify(fmt.Errorf("record the fit job in the shared store: %w", err))
		j.finish(mixdv1.FitJobState_FIT_JOB_STATE_FAILED, code, msg, nil)
		return status.Error(code, msg)
	}
	r.syncers.Add(1)
	go r.syncJob(j, snap)
	return nil
}

// syncJob writes j's changes to the shared table until its final state is
// written: state changes at once, progress and row counts at most every
// sharedProgressInterval, retrying every second while the store is
// unreachable.
func (r *replica) syncJob(j *job, written jobSnapshot) {
	defer r.syncers.Done()
	lastWrite := time.Now()
	var retryAt time.Time
	failing := false
	timer := time.NewTimer(time.Hour)
	defer timer.Stop()
	for {
		snap := j.snapshot()
		final := finalState(snap.job.GetState())
		stateDirty := snap.stateSeq != written.stateSeq
		dirty := stateDirty || snap.progressSeq != written.progressSeq || snap.job.GetRows() != written.job.GetRows()
		if final && !dirty {
			return
		}
		wait := time.Duration(-1) // until the job changes
		if dirty {
			due := time.Now()
			if !stateDirty {
				due = lastWrite.Add(sharedProgressInterval)
			}
			if retryAt.After(due) {
				due = retryAt
			}
			if wait = time.Until(due); wait <= 0 {
				ctx, cancel := context.WithTimeout(r.ctx, storeCallTimeout)
				err := r.jobs.SaveJob(ctx, r.opts.ID, snap.job)
				cancel()
				switch {
				case err == nil:
					written, lastWrite = snap, time.Now()
					if failing {
						r.log.Info("replica: fit job written to the store again", "job", j.name())
						failing = false
					}
					continue
				case errors.Is(err, store.ErrJobEnded):
					r.log.Warn("replica: the store has this fit job as ended (its daemon was presumed dead); no longer writing it", "job", j.name(), "error", err)
					return
				case r.ctx.Err() != nil:
					return
				}
				if !failing {
					r.log.Warn("replica: writing a fit job to the store failed; retrying", "job", j.name(), "error", err)
					failing = true
				}
				retryAt = time.Now().Add(time.Second)
				wait = time.Second
			}
		}
		var timerC <-chan time.Time
		if wait >= 0 {
			timer.Reset(wait)
			timerC = timer.C
		}
		select {
		case <-snap.changed:
		case <-timerC:
		case <-r.ctx.Done():
			return
		}
		if timerC != nil && !timer.Stop() {
			select {
			case <-timer.C:
			default:
			}
		}
	}
}

// getJob answers GetFitJob for a job of another daemon.
func (r *replica) getJob(ctx context.Context, name string) (*mixdv1.GetFitJobResponse, error) {
	rec, err := r.jobs.GetJob(ctx, name)
	if err != nil {
		return nil, r.jobError(name, err)
	}
	resp := &mixdv1.GetFitJobResponse{Job: rec.Job}
	if resp.Model, err = r.jobModel(ctx, rec.Job); err != nil {
		return nil, toStatus(err)
	}
	return resp, nil
}

// jobError maps a job store error to a status.
func (r *replica) jobError(name string, err error) error {
	if errors.Is(err, store.ErrNotFound) {
		return statusf(codes.NotFound, "fit job %q not found (the shared store keeps every unfinished job and the %d most recent finished ones)", name, r.s.limits.JobHistory)
	}
	return toStatus(err)
}

// jobModel returns the model a succeeded job stored (nil when it has been
// deleted since, or the job has not succeeded).
func (r *replica) jobModel(ctx context.Context, job *mixdv1.FitJob) (*mixdv1.Model, error) {
	if job.GetState() != mixdv1.FitJobState_FIT_JOB_STATE_SUCCEEDED {
		return nil, nil
	}
	lm, err := r.s.cache.get(ctx, job.GetModel(), job.GetModelVersion())
	if errors.Is(err, store.ErrNotFound) {
		return nil, nil
	}
	if err != nil {
		return nil, err
	}
	return lm.pb, nil
}

// watchJob answers WatchFitJob for a job of another daemon, with the
// events a local watch sends: the job, its state changes, progress (as
// often as the owner writes it), the latest progress before the final
// state, and the model after success.
func (r *replica) watchJob(ctx context.Context, name string, sink jobSink) error {
	var (
		sentAny      bool
		sentState    mixdv1.FitJobState
		sentProgress *mixdv1.FitProgress
	)
	for {
		wake := r.woken()
		rec, err := r.jobs.GetJob(ctx, name)
		if err != nil {
			return r.jobError(name, err)
		}
		job := rec.Job
		final := finalState(job.GetState())
		progressNew := job.GetProgress() != nil && !proto.Equal(job.GetProgress(), sentProgress)
		if !sentAny || job.GetState() != sentState {
			if final && sentAny && progressNew {
				if err := sink.progress(job.GetProgress()); err != nil {
					return err
				}
				sentProgress, progressNew = job.GetProgress(), false
			}
			if err := sink.job(job); err != nil {
				return err
			}
			sentAny, sentState = true, job.GetState()
		}
		if progressNew && !final {
			if err := sink.progress(job.GetProgress()); err != nil {
				return err
			}
			sentProgress = job.GetProgress()
		}
		if final {
			m, err := r.jobModel(ctx, job)
			if err != nil {
				return toStatus(err)
			}
			if m != nil {
				return sink.model(m)
			}
			return nil
		}
		t := time.NewTimer(remoteJobPoll)
		select {
		case <-wake:
		case <-t.C:
		case <-ctx.Done():
			t.Stop()
			return ctx.Err()
		}
		t.Stop()
	}
}

// cancelJob answers CancelFitJob for a job of another daemon: it records
// the request and waits up to cancelWait for the owner to end the job.
func (r *replica) cancelJob(ctx context.Context, name string) (*mixdv1.CancelFitJobResponse, error) {
	rec, err := r.jobs.RequestJobCancel(ctx, name)
	if errors.Is(err, store.ErrJobEnded) {
		return nil, statusf(codes.FailedPrecondition, "fit job %s has already ended (%s)", name, rec.Job.GetState())
	}
	if err != nil {
		return nil, r.jobError(name, err)
	}
	giveUp := time.NewTimer(cancelWait)
	defer giveUp.Stop()
	for !finalState(rec.Job.GetState()) {
		wake := r.woken()
		t := time.NewTimer(250 * time.Millisecond)
		select {
		case <-wake:
		case <-t.C:
		case <-giveUp.C:
			t.Stop()
			return &mixdv1.CancelFitJobResponse{Job: rec.Job}, nil
		case <-ctx.Done():
			t.Stop()
			return &mixdv1.CancelFitJobResponse{Job: rec.Job}, nil
		}
		t.Stop()
		if again, err := r.jobs.GetJob(ctx, name); err == nil {
			rec = again
		}
	}
	return &mixdv1.CancelFitJobResponse{Job: rec.Job}, nil
}

// listJobs answers ListFitJobs from the shared table, newest first, with
// this daemon's own jobs as it knows them now.
func (r *replica) listJobs(ctx context.Context, pageSize int32, token string) (*mixdv1.ListFitJobsResponse, error) {
	size, err := pageSizeOf(pageSize)
	if err != nil {
		return nil, err
	}
	recs, next, err := r.jobs.ListJobs(ctx, size, token)
	if err != nil {
		if errors.Is(err, store.ErrInvalid) {
			return nil, invalidf("page_token: %q is not a token returned by ListFitJobs", token)
		}
		return nil, toStatus(fmt.Errorf("list fit jobs: %w", err))
	}
	out := make([]*mixdv1.FitJob, len(recs))
	for i, rec := range recs {
		out[i] = rec.Job
		if j, err := r.s.jobs.get(rec.Job.GetName()); err == nil {
			out[i] = j.snapshot().job
		}
	}
	return &mixdv1.ListFitJobsResponse{Jobs: out, NextPageToken: next}, nil
}

// elsewhere reports whether err, from looking up a job in this daemon's
// memory, means the job should be looked up in the shared table.
func (r *replica) elsewhere(err error) bool {
	return r.sharesJobs() && status.Code(err) == codes.NotFound
}

// storeUnavailable reports whether err means the store cannot be reached.
func storeUnavailable(err error) bool { return errors.Is(err, store.ErrUnavailable) }

// watchSink sends a watcher's events on a WatchFitJob stream.
func watchSink(stream grpc.ServerStreamingServer[mixdv1.WatchFitJobResponse]) jobSink {
	return jobSink{
		job: func(f *mixdv1.FitJob) error {
			return stream.Send(&mixdv1.WatchFitJobResponse{Event: &mixdv1.WatchFitJobResponse_Job{Job: f}})
		},
		progress: func(p *mixdv1.FitProgress) error {
			return stream.Send(&mixdv1.WatchFitJobResponse{Event: &mixdv1.WatchFitJobResponse_Progress{Progress: p}})
		},
		model: func(m *mixdv1.Model) error {
			return stream.Send(&mixdv1.WatchFitJobResponse{Event: &mixdv1.WatchFitJobResponse_Model{Model: m}})
		},
	}
}
