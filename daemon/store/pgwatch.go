package store

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"time"

	"github.com/jackc/pgx/v5"
)

// pgNote is the JSON payload of a notification on NotifyChannel.
type pgNote struct {
	Schema  string `json:"schema"`
	Kind    string `json:"kind"`
	Model   string `json:"model,omitempty"`
	Version int64  `json:"version,omitempty"`
	Job     string `json:"job,omitempty"`
	Owner   string `json:"owner,omitempty"`
}

// noteKinds are the kinds a notification may carry.
var noteKinds = map[string]ChangeKind{
	ChangeModelCreated.String():       ChangeModelCreated,
	ChangeModelDeleted.String():       ChangeModelDeleted,
	ChangeJobUpdated.String():         ChangeJobUpdated,
	ChangeJobCancelRequested.String(): ChangeJobCancelRequested,
}

// notify queues a notification of c, sent when tx commits.
func (s *PgStore) notify(ctx context.Context, tx pgx.Tx, c Change) error {
	b, err := json.Marshal(pgNote{Schema: s.schema, Kind: c.Kind.String(), Model: c.Name, Version: c.Version, Job: c.Job, Owner: c.Owner})
	if err != nil {
		return err
	}
	_, err = tx.Exec(ctx, `SELECT pg_notify($1, $2)`, NotifyChannel, string(b))
	return err
}

// parseNote decodes a notification payload of this store's schema.
func (s *PgStore) parseNote(payload string) (Change, bool) {
	var n pgNote
	if err := json.Unmarshal([]byte(payload), &n); err != nil || n.Schema != s.schema {
		return Change{}, false
	}
	k, ok := noteKinds[n.Kind]
	if !ok {
		return Change{}, false
	}
	return Change{Kind: k, Name: n.Model, Version: n.Version, Job: n.Job, Owner: n.Owner}, true
}

// Changes implements Watcher with a dedicated connection that LISTENs on
// NotifyChannel. When the connection fails, Changes sends ChangeLost once,
// reconnects with exponential backoff (100 ms doubling to 5 s), and sends
// ChangeListening when it listens again. An idle connection is checked
// every 10 s, so a server that silently went away is noticed.
func (s *PgStore) Changes(ctx context.Context) <-chan Change {
	ch := make(chan Change, 64)
	if s.closed.Load() {
		close(ch)
		return ch
	}
	s.watches.Add(1)
	go s.watch(ctx, ch)
	return ch
}

func (s *PgStore) watch(ctx context.Context, ch chan<- Change) {
	defer s.watches.Done()
	defer close(ch)
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	go func() {
		select {
		case <-s.done:
			cancel()
		case <-ctx.Done():
		}
	}()
	send := func(c Change) bool {
		select {
		case ch <- c:
			return true
		case <-ctx.Done():
			return false
		}
	}
	backoff := pgBackoffMin
	lost := false
	for ctx.Err() == nil {
		err := s.listenOnce(ctx, func() bool {
			backoff, lost = pgBackoffMin, false
			s.log.Info("store: listening for changes", "where", s.Where(), "channel", NotifyChannel)
			return send(Change{Kind: ChangeListening})
		}, send)
		if ctx.Err() != nil {
			return
		}
		if !lost {
			s.log.Warn("store: the change notification connection is down; reconnecting", "where", s.Where(), "error", err)
			if !send(Change{Kind: ChangeLost, Err: s.dbError(ctx, err)}) {
				return
			}
			lost = true
		}
		t := time.NewTimer(backoff)
		select {
		case <-t.C:
		case <-ctx.Done():
			t.Stop()
			return
		}
		backoff = min(2*backoff, pgBackoffMax)
	}
}

// listenOnce opens a connection, LISTENs, calls up, and forwards
// notifications until the connection fails or ctx ends.
func (s *PgStore) listenOnce(ctx context.Context, up func() bool, send func(Change) bool) error {
	conn, err := pgx.ConnectConfig(ctx, s.conn.Copy())
	if err != nil {
		return err
	}
	defer func() {
		cctx, cancel := context.WithTimeout(context.Background(), time.Second)
		defer cancel()
		_ = conn.Close(cctx)
	}()
	if _, err := conn.Exec(ctx, "LISTEN "+NotifyChannel); err != nil {
		return fmt.Errorf("listen on %s: %w", NotifyChannel, err)
	}
	if !up() {
		return ctx.Err()
	}
	for {
		wctx, cancel := context.WithTimeout(ctx, pgListenIdle)
		n, err := conn.WaitForNotification(wctx)
		idle := wctx.Err() != nil
		cancel()
		if err != nil {
			if ctx.Err() != nil {
				return ctx.Err()
			}
			if !idle || !errors.Is(err, context.DeadlineExceeded) {
				return err
			}
			pctx, cancel := context.WithTimeout(ctx, DefaultPgConnectTimeout)
			err = conn.Ping(pctx)
			cancel()
			if err != nil {
				return fmt.Errorf("the idle notification connection does not answer: %w", err)
			}
			continue
		}
		if c, ok := s.parseNote(n.Payload); ok && !send(c) {
			return ctx.Err()
		}
	}
}
