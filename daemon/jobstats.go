package daemon

import (
	"slices"
	"time"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/types/known/durationpb"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// The fit queue. A fit job is active from its first message until it ends:
// while it receives rows (RECEIVING), waits for one of the
// MaxConcurrentFits fit slots (QUEUED), and runs (RUNNING). At most
// Limits.MaxActiveJobs jobs are active; one more Fit or CreateFitJob call
// fails at once with RESOURCE_EXHAUSTED whose status carries a
// google.rpc.RetryInfo detail: the typical time recent jobs took from
// creation to success (the median of the last retryWindow), between
// minRetryDelay and maxRetryDelay, minRetryDelay when no job has succeeded
// yet.
const (
	retryWindow   = 16
	minRetryDelay = time.Second
	maxRetryDelay = time.Minute
)

// queueFull is the error of a Fit or CreateFitJob refused because active
// jobs fill the queue.
func queueFull(active int, retry time.Duration) error {
	st := status.Newf(codes.ResourceExhausted,
		"the fit queue is full: %d fit jobs are already receiving, queued or running, the limit (mixd serve --max-active-jobs); retry in about %s",
		active, retry.Round(time.Second))
	if d, err := st.WithDetails(&errdetails.RetryInfo{RetryDelay: durationpb.New(retry)}); err == nil {
		st = d
	}
	return st.Err()
}

// retryDelayLocked is the retry hint of a refused job (see above).
func (m *jobManager) retryDelayLocked() time.Duration {
	if len(m.runTimes) == 0 {
		return minRetryDelay
	}
	ts := slices.Clone(m.runTimes)
	slices.Sort(ts)
	return min(max(ts[len(ts)/2], minRetryDelay), maxRetryDelay)
}

// recordEndLocked counts an ended job and remembers how long a successful
// one took.
func (m *jobManager) recordEndLocked(j *job) {
	j.mu.Lock()
	state := j.pb.GetState()
	took := j.pb.GetEndTime().AsTime().Sub(j.pb.GetCreateTime().AsTime())
	j.mu.Unlock()
	m.ended[state]++
	if state == mixdv1.FitJobState_FIT_JOB_STATE_SUCCEEDED && took > 0 {
		if len(m.runTimes) == retryWindow {
			m.runTimes = slices.Delete(m.runTimes, 0, 1)
		}
		m.runTimes = append(m.runTimes, took)
	}
}

// jobCounts is a moment's view of the fit jobs, for metrics.
type jobCounts struct {
	active  map[mixdv1.FitJobState]int    // RECEIVING, QUEUED, RUNNING
	ended   map[mixdv1.FitJobState]uint64 // SUCCEEDED, FAILED, CANCELLED since start
	refused uint64                        // refused because the queue was full
}

// counts returns the current job counts.
func (m *jobManager) counts() jobCounts {
	m.mu.Lock()
	defer m.mu.Unlock()
	c := jobCounts{
		active: map[mixdv1.FitJobState]int{
			mixdv1.FitJobState_FIT_JOB_STATE_RECEIVING: 0,
			mixdv1.FitJobState_FIT_JOB_STATE_QUEUED:    0,
			mixdv1.FitJobState_FIT_JOB_STATE_RUNNING:   0,
		},
		ended:   map[mixdv1.FitJobState]uint64{},
		refused: m.refused,
	}
	for _, s := range []mixdv1.FitJobState{
		mixdv1.FitJobState_FIT_JOB_STATE_SUCCEEDED, mixdv1.FitJobState_FIT_JOB_STATE_FAILED, mixdv1.FitJobState_FIT_JOB_STATE_CANCELLED,
	} {
		c.ended[s] = m.ended[s]
	}
	for _, j := range m.order {
		if isDone(j) {
			continue
		}
		j.mu.Lock()
		s := j.pb.GetState()
		j.mu.Unlock()
		if _, ok := c.active[s]; ok {
			c.active[s]++
		}
	}
	return c
}
