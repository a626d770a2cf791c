package store

import (
	"context"
	"encoding/base64"
	"errors"
	"fmt"
	"strconv"
	"strings"
	"time"

	"github.com/jackc/pgx/v5"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/types/known/timestamppb"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// jobColumns are the columns scanJob reads, in order.
const jobColumns = `name, owner, model, fitter, state, model_version, rows_received, progress,
	error_code, error_message, create_time, end_time, cancel_requested, updated_at, seq`

// jobFinal reports whether a job state is final.
func jobFinal(s mixdv1.FitJobState) bool {
	return s == mixdv1.FitJobState_FIT_JOB_STATE_SUCCEEDED ||
		s == mixdv1.FitJobState_FIT_JOB_STATE_FAILED ||
		s == mixdv1.FitJobState_FIT_JOB_STATE_CANCELLED
}

// scanJob reads one row of jobColumns.
func scanJob(r pgx.Row) (*JobRecord, int64, error) {
	var (
		j        mixdv1.FitJob
		rec      = &JobRecord{Job: &j}
		state    int32
		progress []byte
		create   time.Time
		end      *time.Time
		seq      int64
	)
	if err := r.Scan(&j.Name, &rec.Owner, &j.Model, &j.Fitter, &state, &j.ModelVersion, &j.Rows, &progress,
		&j.ErrorCode, &j.ErrorMessage, &create, &end, &rec.CancelRequested, &rec.Updated, &seq); err != nil {
		return nil, 0, err
	}
	j.State = mixdv1.FitJobState(state)
	j.CreateTime = timestamppb.New(create)
	if end != nil {
		j.EndTime = timestamppb.New(*end)
	}
	if progress != nil {
		j.Progress = &mixdv1.FitProgress{}
		if err := proto.Unmarshal(progress, j.Progress); err != nil {
			return nil, 0, fmt.Errorf("%w: fit job %s: stored progress does not decode: %v", ErrCorrupt, j.Name, err)
		}
	}
	return rec, seq, nil
}

// SaveJob implements JobStore.
func (s *PgStore) SaveJob(ctx context.Context, owner string, job *mixdv1.FitJob) error {
	if err := s.live(); err != nil {
		return err
	}
	if job == nil || job.GetName() == "" || owner == "" {
		return fmt.Errorf("save fit job: %w: the job, its name and the owner are required", ErrInvalid)
	}
	var progress []byte
	if p := job.GetProgress(); p != nil {
		b, err := proto.Marshal(p)
		if err != nil {
			return fmt.Errorf("save fit job %s: %w", job.GetName(), err)
		}
		progress = b
	}
	var end *time.Time
	if job.GetEndTime() != nil {
		t := job.GetEndTime().AsTime()
		end = &t
	}
	err := pgx.BeginFunc(ctx, s.pool, func(tx pgx.Tx) error {
		if _, err := tx.Exec(ctx, `INSERT INTO mixd_replicas (id) VALUES ($1)
			ON CONFLICT (id) DO UPDATE SET heartbeat_at = now()`, owner); err != nil {
			return err
		}
		var seq int64
		err := tx.QueryRow(ctx, `INSERT INTO mixd_fit_jobs AS j (name, owner, model, fitter, state, finished,
				model_version, rows_received, progress, error_code, error_message, create_time, end_time)
			VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, $13)
			ON CONFLICT (name) DO UPDATE SET state = EXCLUDED.state, finished = EXCLUDED.finished,
				model_version = EXCLUDED.model_version, rows_received = EXCLUDED.rows_received,
				progress = EXCLUDED.progress, error_code = EXCLUDED.error_code,
				error_message = EXCLUDED.error_message, end_time = EXCLUDED.end_time, updated_at = now()
			WHERE NOT j.finished AND j.owner = EXCLUDED.owner
			RETURNING seq`,
			job.GetName(), owner, job.GetModel(), job.GetFitter(), int32(job.GetState()), jobFinal(job.GetState()),
			job.GetModelVersion(), job.GetRows(), progress, job.GetErrorCode(), job.GetErrorMessage(),
			job.GetCreateTime().AsTime(), end).Scan(&seq)
		if errors.Is(err, pgx.ErrNoRows) {
			return ErrJobEnded
		}
		if err != nil {
			return err
		}
		return s.notify(ctx, tx, Change{Kind: ChangeJobUpdated, Job: job.GetName(), Owner: owner})
	})
	if err != nil {
		return fmt.Errorf("save fit job %s: %w", job.GetName(), s.dbError(ctx, err))
	}
	return nil
}

// GetJob implements JobStore.
func (s *PgStore) GetJob(ctx context.Context, name string) (*JobRecord, error) {
	if err := s.live(); err != nil {
		return nil, err
	}
	rec, _, err := scanJob(s.pool.QueryRow(ctx, `SELECT `+jobColumns+` FROM mixd_fit_jobs WHERE name = $1`, name))
	if errors.Is(err, pgx.ErrNoRows) {
		return nil, fmt.Errorf("get fit job %s: %w", name, ErrNotFound)
	}
	if err != nil {
		return nil, fmt.Errorf("get fit job %s: %w", name, s.dbError(ctx, err))
	}
	return rec, nil
}

// jobsToken returns the ListJobs token that continues after sequence seq.
func jobsToken(seq int64) string {
	return base64.RawURLEncoding.EncodeToString([]byte("j1:" + strconv.FormatInt(seq, 10)))
}

// parseJobsToken returns the sequence number a ListJobs token continues
// after (0 for an empty token).
func parseJobsToken(tok string) (int64, error) {
	if tok == "" {
		return 0, nil
	}
	b, err := base64.RawURLEncoding.DecodeString(tok)
	rest, ok := strings.CutPrefix(string(b), "j1:")
	var seq int64
	if err == nil && ok {
		seq, err = strconv.ParseInt(rest, 10, 64)
	}
	if err != nil || !ok || seq < 1 {
		return 0, fmt.Errorf("%w: page token %q is not one this store issued for listing fit jobs", ErrInvalid, tok)
	}
	return seq, nil
}

// ListJobs implements JobStore.
func (s *PgStore) ListJobs(ctx context.Context, pageSize int, pageToken string) ([]*JobRecord, string, error) {
	if err := s.live(); err != nil {
		return nil, "", err
	}
	size, err := PageSize(pageSize)
	if err != nil {
		return nil, "", fmt.Errorf("list fit jobs: %w", err)
	}
	before, err := parseJobsToken(pageToken)
	if err != nil {
		return nil, "", fmt.Errorf("list fit jobs: %w", err)
	}
	rows, err := s.pool.Query(ctx, `SELECT `+jobColumns+` FROM mixd_fit_jobs
		WHERE $1::bigint = 0 OR seq < $1::bigint ORDER BY seq DESC LIMIT $2`, before, size+1)
	if err != nil {
		return nil, "", fmt.Errorf("list fit jobs: %w", s.dbError(ctx, err))
	}
	defer rows.Close()
	var (
		out  []*JobRecord
		seqs []int64
	)
	for rows.Next() {
		rec, seq, err := scanJob(rows)
		if err != nil {
			return nil, "", fmt.Errorf("list fit jobs: %w", s.dbError(ctx, err))
		}
		out, seqs = append(out, rec), append(seqs, seq)
	}
	if err := rows.Err(); err != nil {
		return nil, "", fmt.Errorf("list fit jobs: %w", s.dbError(ctx, err))
	}
	if len(out) > size {
		return out[:size], jobsToken(seqs[size-1]), nil
	}
	return out, "", nil
}

// RequestJobCancel implements JobStore.
func (s *PgStore) RequestJobCancel(ctx context.Context, name string) (*JobRecord, error) {
	if err := s.live(); err != nil {
		return nil, err
	}
	var rec *JobRecord
	err := pgx.BeginFunc(ctx, s.pool, func(tx pgx.Tx) error {
		r, _, err := scanJob(tx.QueryRow(ctx, `UPDATE mixd_fit_jobs SET cancel_requested = true, updated_at = now()
			WHERE name = $1 AND NOT finished RETURNING `+jobColumns, name))
		if errors.Is(err, pgx.ErrNoRows) {
			r, _, err = scanJob(tx.QueryRow(ctx, `SELECT `+jobColumns+` FROM mixd_fit_jobs WHERE name = $1`, name))
			if errors.Is(err, pgx.ErrNoRows) {
				return ErrNotFound
			}
			if err != nil {
				return err
			}
			rec = r
			return ErrJobEnded
		}
		if err != nil {
			return err
		}
		rec = r
		return s.notify(ctx, tx, Change{Kind: ChangeJobCancelRequested, Job: name, Owner: r.Owner})
	})
	if errors.Is(err, ErrJobEnded) {
		return rec, fmt.Errorf("cancel fit job %s: %w (%s)", name, ErrJobEnded, rec.Job.GetState())
	}
	if err != nil {
		return nil, fmt.Errorf("cancel fit job %s: %w", name, s.dbError(ctx, err))
	}
	return rec, nil
}

// CancelRequests implements JobStore.
func (s *PgStore) CancelRequests(ctx context.Context, owner string) ([]string, error) {
	if err := s.live(); err != nil {
		return nil, err
	}
	rows, err := s.pool.Query(ctx, `SELECT name FROM mixd_fit_jobs WHERE owner = $1 AND NOT finished AND cancel_requested ORDER BY seq`, owner)
	if err != nil {
		return nil, fmt.Errorf("read cancellation requests: %w", s.dbError(ctx, err))
	}
	names, err := pgx.CollectRows(rows, pgx.RowTo[string])
	if err != nil {
		return nil, fmt.Errorf("read cancellation requests: %w", s.dbError(ctx, err))
	}
	return names, nil
}

// Heartbeat implements JobStore.
func (s *PgStore) Heartbeat(ctx context.Context, owner string) error {
	if err := s.live(); err != nil {
		return err
	}
	if _, err := s.pool.Exec(ctx, `INSERT INTO mixd_replicas (id) VALUES ($1)
		ON CONFLICT (id) DO UPDATE SET heartbeat_at = now()`, owner); err != nil {
		return fmt.Errorf("heartbeat of %s: %w", owner, s.dbError(ctx, err))
	}
	return nil
}

// FailJobsOfLostOwners implements JobStore. The message gets the owner's
// id appended.
func (s *PgStore) FailJobsOfLostOwners(ctx context.Context, staleAfter time.Duration, code int32, message string) ([]string, error) {
	names, err := s.failJobs(ctx, `NOT EXISTS (SELECT 1 FROM mixd_replicas r
		WHERE r.id = j.owner AND r.heartbeat_at > now() - make_interval(secs => $4))`, code, message, staleAfter.Seconds())
	if err != nil {
		return nil, fmt.Errorf("fail the jobs of lost replicas: %w", err)
	}
	return names, nil
}

// FailJobsOfOwner implements JobStore. The message gets the owner's id
// appended.
func (s *PgStore) FailJobsOfOwner(ctx context.Context, owner string, code int32, message string) ([]string, error) {
	names, err := s.failJobs(ctx, `j.owner = $4`, code, message, owner)
	if err != nil {
		return nil, fmt.Errorf("fail the earlier jobs of replica %s: %w", owner, err)
	}
	return names, nil
}

// failJobs marks the unfinished jobs matching where (over jobs j, with its
// own argument $4) FAILED with code and message, and notifies each.
func (s *PgStore) failJobs(ctx context.Context, where string, code int32, message string, arg any) ([]string, error) {
	if err := s.live(); err != nil {
		return nil, err
	}
	var names []string
	err := pgx.BeginFunc(ctx, s.pool, func(tx pgx.Tx) error {
		rows, err := tx.Query(ctx, `UPDATE mixd_fit_jobs AS j SET state = $1, finished = true, error_code = $2,
				error_message = $3 || ' (replica ' || j.owner || ')', end_time = now(), updated_at = now()
			WHERE NOT j.finished AND `+where+`
			RETURNING j.name, j.owner`,
			int32(mixdv1.FitJobState_FIT_JOB_STATE_FAILED), code, message, arg)
		if err != nil {
			return err
		}
		type lost struct{ name, owner string }
		got, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (lost, error) {
			var l lost
			err := r.Scan(&l.name, &l.owner)
			return l, err
		})
		if err != nil {
			return err
		}
		names = names[:0]
		for _, l := range got {
			if err := s.notify(ctx, tx, Change{Kind: ChangeJobUpdated, Job: l.name, Owner: l.owner}); err != nil {
				return err
			}
			names = append(names, l.name)
		}
		return nil
	})
	if err != nil {
		return nil, s.dbError(ctx, err)
	}
	return names, nil
}

// PruneJobs implements JobStore. It also forgets replicas that sent no
// heartbeat for a day and own no unfinished job.
func (s *PgStore) PruneJobs(ctx context.Context, keep int) error {
	if err := s.live(); err != nil {
		return err
	}
	if keep < 1 {
		return fmt.Errorf("prune fit jobs: %w: keep is %d, want at least 1", ErrInvalid, keep)
	}
	err := pgx.BeginFunc(ctx, s.pool, func(tx pgx.Tx) error {
		if _, err := tx.Exec(ctx, `DELETE FROM mixd_fit_jobs WHERE finished AND seq <
			(SELECT seq FROM mixd_fit_jobs WHERE finished ORDER BY seq DESC OFFSET $1 LIMIT 1)`, keep-1); err != nil {
			return err
		}
		_, err := tx.Exec(ctx, `DELETE FROM mixd_replicas AS r WHERE r.heartbeat_at < now() - interval '1 day'
			AND NOT EXISTS (SELECT 1 FROM mixd_fit_jobs j WHERE j.owner = r.id AND NOT j.finished)`)
		return err
	})
	if err != nil {
		return fmt.Errorf("prune fit jobs: %w", s.dbError(ctx, err))
	}
	return nil
}
