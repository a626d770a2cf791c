package store

import (
	"context"
	"errors"
	"fmt"
	"time"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// A store shared by several daemons (PgStore) offers two optional
// interfaces besides Store: Watcher, so that each daemon hears about models
// written and deleted by the others, and JobStore, so that fit jobs are
// visible and cancellable from every daemon. A daemon checks for them with
// a type assertion; DirStore implements neither.

// ErrUnavailable: the store's backend (a database) cannot be reached right
// now. The call changed nothing or its outcome is unknown; it is worth
// retrying later. Stores reconnect by themselves.
var ErrUnavailable = errors.New("store unavailable")

// ErrJobEnded: the fit job has already reached a final state in the store,
// so it cannot be changed or cancelled any more.
var ErrJobEnded = errors.New("fit job has already ended")

// ChangeKind says what a Change reports.
type ChangeKind int

// Kinds of Change.
const (
	// ChangeListening: the store's notification connection is (again)
	// listening. Changes made while it was not listening were missed, so
	// the receiver must drop everything it derived from earlier changes.
	// It is the first Change of every Changes channel once the connection
	// is up.
	ChangeListening ChangeKind = iota + 1
	// ChangeLost: the notification connection is down; Changes may be
	// missed until the next ChangeListening. The receiver must stop
	// trusting what it knows for longer than it can tolerate.
	ChangeLost
	// ChangeModelCreated: version Version of model Name was written.
	ChangeModelCreated
	// ChangeModelDeleted: version Version (0: every version) of model Name
	// was deleted.
	ChangeModelDeleted
	// ChangeJobUpdated: the fit job Job was written (a state change,
	// progress, or a cancellation request).
	ChangeJobUpdated
	// ChangeJobCancelRequested: someone asked to cancel the fit job Job,
	// which is owned by the daemon Owner.
	ChangeJobCancelRequested
)

// String names the kind.
func (k ChangeKind) String() string {
	switch k {
	case ChangeListening:
		return "listening"
	case ChangeLost:
		return "lost"
	case ChangeModelCreated:
		return "model-created"
	case ChangeModelDeleted:
		return "model-deleted"
	case ChangeJobUpdated:
		return "job-updated"
	case ChangeJobCancelRequested:
		return "job-cancel-requested"
	}
	return fmt.Sprintf("ChangeKind(%d)", int(k))
}

// Change is one event from Watcher.Changes.
type Change struct {
	Kind ChangeKind
	// Name is the model, "models/{id}" (model changes only).
	Name string
	// Version is the model version created or deleted (0: every version).
	Version int64
	// Job is the fit job name, "fitJobs/{id}" (job changes only).
	Job string
	// Owner is the daemon that runs the job (ChangeJobCancelRequested).
	Owner string
	// Err says why the connection was lost (ChangeLost).
	Err error
}

// Watcher reports changes made to a shared store by any daemon, this one
// included.
type Watcher interface {
	// Changes returns a channel of changes in the order the store committed
	// them. The channel starts with ChangeListening once the notification
	// connection is up (or ChangeLost when it cannot be opened) and is
	// closed when ctx is done or the store is closed. The store reconnects
	// with backoff after ChangeLost. The receiver must keep reading: the
	// store waits for it.
	Changes(ctx context.Context) <-chan Change
}

// JobRecord is a fit job as a shared store holds it.
type JobRecord struct {
	// Job is the job's last written state.
	Job *mixdv1.FitJob
	// Owner is the daemon that received the job's data and runs it.
	Owner string
	// CancelRequested is set once someone asked to cancel the job.
	CancelRequested bool
	// Updated is when the job was last written (the database's clock).
	Updated time.Time
}

// JobStore keeps fit jobs where every daemon sharing the store sees them.
// A job runs only in the daemon that received its data (its owner), which
// writes every change of the job; other daemons read the jobs and request
// cancellation. Every daemon refreshes its heartbeat regularly; the
// unfinished jobs of a daemon whose heartbeat is too old are marked failed
// by whichever daemon notices first (FailJobsOfLostOwners).
type JobStore interface {
	// SaveJob inserts or updates job (keyed by its name) as owned by owner
	// and refreshes owner's heartbeat. A job that has already reached a
	// final state in the store, or that another owner wrote, is left
	// unchanged: SaveJob then returns an error wrapping ErrJobEnded.
	SaveJob(ctx context.Context, owner string, job *mixdv1.FitJob) error
	// GetJob returns one job; ErrNotFound when there is none of that name.
	GetJob(ctx context.Context, name string) (*JobRecord, error)
	// ListJobs returns jobs, newest first, pageSize at a time (the rules of
	// PageSize), with a token for the next page (empty after the last).
	ListJobs(ctx context.Context, pageSize int, pageToken string) ([]*JobRecord, string, error)
	// RequestJobCancel marks a job as to be cancelled and tells its owner.
	// It returns the job; ErrNotFound when there is none of that name; an
	// error wrapping ErrJobEnded (and the record) when it has already ended.
	RequestJobCancel(ctx context.Context, name string) (*JobRecord, error)
	// CancelRequests returns the names of owner's unfinished jobs whose
	// cancellation was requested.
	CancelRequests(ctx context.Context, owner string) ([]string, error)
	// Heartbeat records that owner is alive.
	Heartbeat(ctx context.Context, owner string) error
	// FailJobsOfLostOwners marks every unfinished job whose owner's
	// heartbeat is older than staleAfter (or missing) as failed with
	// the gRPC code and message given, and returns their names.
	FailJobsOfLostOwners(ctx context.Context, staleAfter time.Duration, code int32, message string) ([]string, error)
	// FailJobsOfOwner marks every unfinished job of owner as failed with
	// the gRPC code and message given, and returns their names. A daemon
	// calls it for its own id at start-up: jobs left by an earlier process
	// with the same id died with it.
	FailJobsOfOwner(ctx context.Context, owner string, code int32, message string) ([]string, error)
	// PruneJobs deletes finished jobs beyond the keep most recent ones.
	PruneJobs(ctx context.Context, keep int) error
}
