package store_test

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"log/slog"
	"net"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/jackc/pgx/v5"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/types/known/timestamppb"

	"github.com/mixd-dev/mixd/daemon/modeldoc"
	"github.com/mixd-dev/mixd/daemon/store"
	"github.com/mixd-dev/mixd/daemon/store/pgtest"
	"github.com/mixd-dev/mixd/daemon/store/storetest"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

var ctx = context.Background()

// quiet keeps the stores' warnings about the corrupt rows the tests make
// out of the test output.
var pgQuiet = store.PgLogger(slog.New(slog.DiscardHandler))

// openPg opens a PgStore on u and closes it when the test ends.
func openPg(t *testing.T, u string) *store.PgStore {
	t.Helper()
	s, err := store.OpenPostgres(ctx, u, pgQuiet)
	if err != nil {
		t.Fatalf("OpenPostgres: %v", err)
	}
	t.Cleanup(func() { _ = s.Close() })
	return s
}

// query runs one query returning one value on the server at u.
func query[T any](t *testing.T, u, sql string, args ...any) T {
	t.Helper()
	c, err := pgx.Connect(ctx, u)
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close(ctx)
	var v T
	if err := c.QueryRow(ctx, sql, args...).Scan(&v); err != nil {
		t.Fatalf("%s: %v", sql, err)
	}
	return v
}

func TestPgConformance(t *testing.T) {
	base := pgtest.URL(t)
	var (
		mu   sync.Mutex
		urls = map[store.Store]string{}
		hits int
	)
	open := func(t *testing.T) store.Store {
		u := pgtest.Schema(t, base)
		s, err := store.OpenPostgres(ctx, u, pgQuiet)
		if err != nil {
			t.Fatalf("OpenPostgres: %v", err)
		}
		mu.Lock()
		urls[s] = u
		mu.Unlock()
		return s
	}
	// The corruption hook damages rows as bit rot or a faulty restore
	// would, in turn: a flipped byte, a truncated document, and an intact
	// document of another version under this version's key (its checksum
	// matches; what it holds does not).
	corrupt := func(t *testing.T, s store.Store, name string, version int64) {
		mu.Lock()
		u := urls[s]
		hits++
		kind := hits % 3
		mu.Unlock()
		id := strings.TrimPrefix(name, "models/")
		var sql string
		switch kind {
		case 1:
			sql = fmt.Sprintf(`UPDATE mixd_model_versions SET document = overlay(document placing '\x21'::bytea from 20 for 1)
				WHERE id = '%s' AND version = %d`, id, version)
		case 2:
			sql = fmt.Sprintf(`UPDATE mixd_model_versions SET document = substring(document from 1 for length(document) / 2)
				WHERE id = '%s' AND version = %d`, id, version)
		default:
			// Another model's document, with its own valid checksum.
			other := storetest.Model("elsewhere", 9)
			other.Name, other.Version, other.CreateTime = "models/elsewhere", 1, timestamppb.Now()
			doc := mustEncode(t, other)
			sum := sha256.Sum256(doc)
			sql = fmt.Sprintf(`UPDATE mixd_model_versions SET document = '\x%s'::bytea, sha256 = '%s'
				WHERE id = '%s' AND version = %d`, hex.EncodeToString(doc), hex.EncodeToString(sum[:]), id, version)
		}
		// Model rows are immutable; only the trigger's owner can get round it.
		pgtest.Exec(t, u, "ALTER TABLE mixd_model_versions DISABLE TRIGGER mixd_model_versions_no_update;\n"+
			sql+";\nALTER TABLE mixd_model_versions ENABLE TRIGGER mixd_model_versions_no_update")
	}
	storetest.Run(t, open, corrupt)
}

func TestPgRowsAreImmutable(t *testing.T) {
	u := pgtest.Schema(t, pgtest.URL(t))
	s := openPg(t, u)
	m, err := s.Create(ctx, storetest.Model("pumps", 1))
	if err != nil {
		t.Fatal(err)
	}
	c, err := pgx.Connect(ctx, u)
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close(ctx)
	_, err = c.Exec(ctx, `UPDATE mixd_model_versions SET sha256 = 'x' WHERE id = 'pumps'`)
	if err == nil || !strings.Contains(err.Error(), "immutable") {
		t.Fatalf("UPDATE of a model version: %v, want the immutability trigger's error", err)
	}
	got, err := s.Get(ctx, "pumps", 1)
	if err != nil || !proto.Equal(got, m) {
		t.Fatalf("after the refused update Get = %v, %v", got, err)
	}
}

func TestPgMigrations(t *testing.T) {
	u := pgtest.Schema(t, pgtest.URL(t))
	// Concurrent first start-ups: the advisory lock lets one migrate.
	var wg sync.WaitGroup
	errs := make([]error, 3)
	for i := range errs {
		wg.Add(1)
		go func() {
			defer wg.Done()
			s, err := store.OpenPostgres(ctx, u, pgQuiet)
			if err == nil {
				err = s.Close()
			}
			errs[i] = err
		}()
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			t.Fatalf("concurrent OpenPostgres: %v", err)
		}
	}
	n := query[int64](t, u, `SELECT count(*) FROM mixd_schema_versions`)
	top := query[int32](t, u, `SELECT max(version) FROM mixd_schema_versions`)
	if n != int64(store.SchemaVersion()) || top != int32(store.SchemaVersion()) {
		t.Fatalf("mixd_schema_versions has %d rows up to %d, want %d", n, top, store.SchemaVersion())
	}
	// Reopening applies nothing again and keeps the data.
	s := openPg(t, u)
	if _, err := s.Create(ctx, storetest.Model("pumps", 1)); err != nil {
		t.Fatal(err)
	}
	s.Close()
	s = openPg(t, u)
	if _, err := s.Get(ctx, "pumps", 1); err != nil {
		t.Fatalf("after reopening: %v", err)
	}
	if n2 := query[int64](t, u, `SELECT count(*) FROM mixd_schema_versions`); n2 != n {
		t.Fatalf("reopening changed mixd_schema_versions from %d to %d rows", n, n2)
	}
	// A schema from a newer mixd is refused.
	pgtest.Exec(t, u, fmt.Sprintf(`INSERT INTO mixd_schema_versions (version, name) VALUES (%d, '9999_future.sql')`, store.SchemaVersion()+1))
	_, err := store.OpenPostgres(ctx, u, pgQuiet)
	if err == nil || !strings.Contains(err.Error(), "newer than this build") {
		t.Fatalf("OpenPostgres on a newer schema: %v, want a refusal naming the version", err)
	}
}

// Two stores on one schema are two daemons: their writers never share a
// version number.
func TestPgConcurrentCreateAcrossStores(t *testing.T) {
	u := pgtest.Schema(t, pgtest.URL(t))
	stores := []*store.PgStore{openPg(t, u), openPg(t, u), openPg(t, u)}
	const each = 10
	var (
		mu   sync.Mutex
		seen = map[int64]bool{}
		wg   sync.WaitGroup
	)
	for i, s := range stores {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for j := range each {
				m, err := s.Create(ctx, storetest.Model("pumps", 100*i+j))
				if err != nil {
					t.Errorf("store %d: %v", i, err)
					return
				}
				mu.Lock()
				if seen[m.Version] {
					t.Errorf("version %d assigned twice", m.Version)
				}
				seen[m.Version] = true
				mu.Unlock()
			}
		}()
	}
	wg.Wait()
	for v := int64(1); v <= int64(len(stores)*each); v++ {
		if !seen[v] {
			t.Errorf("version %d never assigned", v)
		}
	}
	// A delete on one store is seen by the others at once.
	if _, err := stores[0].Delete(ctx, "pumps", 0); err != nil {
		t.Fatal(err)
	}
	if _, err := stores[2].Get(ctx, "pumps", 0); !errors.Is(err, store.ErrNotFound) {
		t.Fatalf("Get on another store after Delete: %v, want not found", err)
	}
	m, err := stores[1].Create(ctx, storetest.Model("pumps", 1))
	if err != nil || m.Version != int64(len(stores)*each+1) {
		t.Fatalf("Create after deleting all = version %d, %v; want %d", m.GetVersion(), err, len(stores)*each+1)
	}
}

// next returns the next change, failing after a while.
func next(t *testing.T, ch <-chan store.Change) store.Change {
	t.Helper()
	select {
	case c, ok := <-ch:
		if !ok {
			t.Fatal("the changes channel closed")
		}
		return c
	case <-time.After(20 * time.Second):
		t.Fatal("no change within 20s")
	}
	return store.Change{}
}

func TestPgChanges(t *testing.T) {
	base := pgtest.URL(t)
	u := pgtest.Schema(t, base)
	// A unique application name finds this test's listening connection.
	app := fmt.Sprintf("mixd-test-%d", time.Now().UnixNano())
	watcher := openPg(t, pgtest.WithParam(t, u, "application_name", app))
	writer := openPg(t, u)
	other := openPg(t, pgtest.Schema(t, base)) // another schema: not heard

	wctx, cancel := context.WithCancel(ctx)
	defer cancel()
	ch := watcher.Changes(wctx)
	if c := next(t, ch); c.Kind != store.ChangeListening {
		t.Fatalf("first change %v, want listening", c.Kind)
	}
	if _, err := other.Create(ctx, storetest.Model("pumps", 1)); err != nil {
		t.Fatal(err)
	}
	for i := 1; i <= 2; i++ {
		if _, err := writer.Create(ctx, storetest.Model("pumps", i)); err != nil {
			t.Fatal(err)
		}
	}
	if _, err := writer.Delete(ctx, "pumps", 1); err != nil {
		t.Fatal(err)
	}
	if _, err := writer.Delete(ctx, "pumps", 0); err != nil {
		t.Fatal(err)
	}
	job := &mixdv1.FitJob{Name: "fitJobs/abc", Model: "models/pumps", Fitter: "em",
		State: mixdv1.FitJobState_FIT_JOB_STATE_RUNNING, CreateTime: timestamppb.Now()}
	if err := writer.SaveJob(ctx, "replica-a", job); err != nil {
		t.Fatal(err)
	}
	if _, err := writer.RequestJobCancel(ctx, "fitJobs/abc"); err != nil {
		t.Fatal(err)
	}
	want := []store.Change{
		{Kind: store.ChangeModelCreated, Name: "models/pumps", Version: 1},
		{Kind: store.ChangeModelCreated, Name: "models/pumps", Version: 2},
		{Kind: store.ChangeModelDeleted, Name: "models/pumps", Version: 1},
		{Kind: store.ChangeModelDeleted, Name: "models/pumps", Version: 0},
		{Kind: store.ChangeJobUpdated, Job: "fitJobs/abc", Owner: "replica-a"},
		{Kind: store.ChangeJobCancelRequested, Job: "fitJobs/abc", Owner: "replica-a"},
	}
	for i, w := range want {
		if c := next(t, ch); c != w {
			t.Fatalf("change %d = %+v, want %+v", i, c, w)
		}
	}

	// The listening connection is killed: the watcher reports the loss,
	// reconnects, and listens again.
	pgtest.Exec(t, base, fmt.Sprintf(`SELECT pg_terminate_backend(pid) FROM pg_stat_activity WHERE application_name = '%s'`, app))
	if c := next(t, ch); c.Kind != store.ChangeLost || c.Err == nil {
		t.Fatalf("after the connection was killed: %+v, want lost with an error", c)
	}
	if c := next(t, ch); c.Kind != store.ChangeListening {
		t.Fatalf("after the loss: %+v, want listening again", c)
	}
	if _, err := writer.Create(ctx, storetest.Model("pumps", 3)); err != nil {
		t.Fatal(err)
	}
	if c := next(t, ch); c.Kind != store.ChangeModelCreated || c.Version != 3 {
		t.Fatalf("after reconnecting: %+v, want version 3 created", c)
	}
	// Ending the context closes the channel.
	cancel()
	for range ch {
	}
}

// The database going away makes calls fail with ErrUnavailable; the pool
// reconnects by itself for later calls.
func TestPgUnavailable(t *testing.T) {
	base := pgtest.URL(t)
	u := pgtest.Schema(t, base)
	app := fmt.Sprintf("mixd-test-%d", time.Now().UnixNano())
	s := openPg(t, pgtest.WithParam(t, u, "application_name", app))
	if _, err := s.Create(ctx, storetest.Model("pumps", 1)); err != nil {
		t.Fatal(err)
	}
	// Every connection of the store is terminated by the server.
	pgtest.Exec(t, base, fmt.Sprintf(`SELECT pg_terminate_backend(pid) FROM pg_stat_activity WHERE application_name = '%s'`, app))
	// A call either fails as unavailable or, when the pool noticed the dead
	// connections first, succeeds on a new one; never anything else.
	for i := range 3 {
		if _, err := s.Get(ctx, "pumps", 1); err != nil && !errors.Is(err, store.ErrUnavailable) {
			t.Fatalf("Get %d after the server closed the connections: %v, want success or ErrUnavailable", i, err)
		}
	}
	if _, err := s.Get(ctx, "pumps", 1); err != nil {
		t.Fatalf("the store did not reconnect: %v", err)
	}

	// A server that does not answer at all: open fails as unavailable.
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	addr := l.Addr().String()
	l.Close()
	_, err = store.OpenPostgres(ctx, "postgres://mixd@"+addr+"/mixd?sslmode=disable&connect_timeout=2")
	if !errors.Is(err, store.ErrUnavailable) {
		t.Fatalf("OpenPostgres of a closed port: %v, want ErrUnavailable", err)
	}
	if strings.Contains(fmt.Sprint(err), "secret") {
		t.Fatal("error shows a password")
	}
	_, err = store.OpenPostgres(ctx, "postgres://mixd:secret@"+addr+"/mixd?sslmode=disable&connect_timeout=2")
	if strings.Contains(fmt.Sprint(err), "secret") {
		t.Fatalf("error shows the password: %v", err)
	}
}

func TestPgJobs(t *testing.T) {
	u := pgtest.Schema(t, pgtest.URL(t))
	s := openPg(t, u)
	created := time.Now().Add(-time.Minute).Truncate(time.Microsecond)
	mk := func(i int, state mixdv1.FitJobState) *mixdv1.FitJob {
		return &mixdv1.FitJob{Name: fmt.Sprintf("fitJobs/j%02d", i), Model: "models/pumps", Fitter: "em",
			State: state, CreateTime: timestamppb.New(created.Add(time.Duration(i) * time.Second))}
	}
	// Save, update with progress, read back.
	j := mk(1, mixdv1.FitJobState_FIT_JOB_STATE_RECEIVING)
	if err := s.SaveJob(ctx, "replica-a", j); err != nil {
		t.Fatal(err)
	}
	j.State, j.Rows = mixdv1.FitJobState_FIT_JOB_STATE_RUNNING, 3000
	j.Progress = &mixdv1.FitProgress{Components: 3, Iteration: 7, Objective: -1234.5}
	if err := s.SaveJob(ctx, "replica-a", j); err != nil {
		t.Fatal(err)
	}
	rec, err := s.GetJob(ctx, j.Name)
	if err != nil {
		t.Fatal(err)
	}
	if !proto.Equal(rec.Job, j) || rec.Owner != "replica-a" || rec.CancelRequested {
		t.Fatalf("GetJob = %v owner %q cancel %v\nwant %v owner replica-a", rec.Job, rec.Owner, rec.CancelRequested, j)
	}
	if _, err := s.GetJob(ctx, "fitJobs/none"); !errors.Is(err, store.ErrNotFound) {
		t.Fatalf("GetJob of a missing job: %v", err)
	}
	// Another owner cannot take the job over.
	if err := s.SaveJob(ctx, "replica-b", j); !errors.Is(err, store.ErrJobEnded) {
		t.Fatalf("SaveJob by another owner: %v, want refused", err)
	}

	// Cancellation requests reach the owner.
	rec, err = s.RequestJobCancel(ctx, j.Name)
	if err != nil || !rec.CancelRequested {
		t.Fatalf("RequestJobCancel = %+v, %v", rec, err)
	}
	names, err := s.CancelRequests(ctx, "replica-a")
	if err != nil || len(names) != 1 || names[0] != j.Name {
		t.Fatalf("CancelRequests = %v, %v", names, err)
	}
	if names, _ := s.CancelRequests(ctx, "replica-b"); len(names) != 0 {
		t.Fatalf("CancelRequests of another replica = %v", names)
	}
	// The owner ends it; a finished job no longer changes.
	j.State, j.ErrorCode, j.ErrorMessage, j.EndTime = mixdv1.FitJobState_FIT_JOB_STATE_CANCELLED, 1, "cancelled", timestamppb.Now()
	if err := s.SaveJob(ctx, "replica-a", j); err != nil {
		t.Fatal(err)
	}
	again := proto.Clone(j).(*mixdv1.FitJob)
	again.State = mixdv1.FitJobState_FIT_JOB_STATE_RUNNING
	if err := s.SaveJob(ctx, "replica-a", again); !errors.Is(err, store.ErrJobEnded) {
		t.Fatalf("SaveJob of a finished job: %v, want ErrJobEnded", err)
	}
	if rec, err := s.RequestJobCancel(ctx, j.Name); !errors.Is(err, store.ErrJobEnded) || rec.Job.GetState() != j.State {
		t.Fatalf("RequestJobCancel of a finished job: %v, %v", rec, err)
	}
	if _, err := s.RequestJobCancel(ctx, "fitJobs/none"); !errors.Is(err, store.ErrNotFound) {
		t.Fatalf("RequestJobCancel of a missing job: %v", err)
	}
	if names, _ := s.CancelRequests(ctx, "replica-a"); len(names) != 0 {
		t.Fatalf("CancelRequests after the job ended = %v", names)
	}

	// Jobs of a replica whose heartbeat stopped are failed by anyone.
	live, dead := mk(2, mixdv1.FitJobState_FIT_JOB_STATE_RUNNING), mk(3, mixdv1.FitJobState_FIT_JOB_STATE_QUEUED)
	if err := s.SaveJob(ctx, "replica-live", live); err != nil {
		t.Fatal(err)
	}
	if err := s.SaveJob(ctx, "replica-dead", dead); err != nil {
		t.Fatal(err)
	}
	pgtest.Exec(t, u, `UPDATE mixd_replicas SET heartbeat_at = now() - interval '1 minute' WHERE id = 'replica-dead'`)
	failed, err := s.FailJobsOfLostOwners(ctx, 30*time.Second, 14, "the replica stopped")
	if err != nil || len(failed) != 1 || failed[0] != dead.Name {
		t.Fatalf("FailJobsOfLostOwners = %v, %v; want only %s", failed, err, dead.Name)
	}
	rec, _ = s.GetJob(ctx, dead.Name)
	if rec.Job.GetState() != mixdv1.FitJobState_FIT_JOB_STATE_FAILED || rec.Job.GetErrorCode() != 14 ||
		!strings.Contains(rec.Job.GetErrorMessage(), "replica-dead") || rec.Job.GetEndTime() == nil {
		t.Fatalf("the lost job is %v", rec.Job)
	}
	if rec, _ := s.GetJob(ctx, live.Name); rec.Job.GetState() != mixdv1.FitJobState_FIT_JOB_STATE_RUNNING {
		t.Fatalf("the live job became %v", rec.Job.GetState())
	}
	if err := s.SaveJob(ctx, "replica-dead", dead); !errors.Is(err, store.ErrJobEnded) {
		t.Fatalf("the lost replica's later write: %v, want ErrJobEnded", err)
	}

	// Listing, newest first, in pages; pruning keeps the newest finished.
	for i := 4; i <= 8; i++ {
		if err := s.SaveJob(ctx, "replica-a", mk(i, mixdv1.FitJobState_FIT_JOB_STATE_SUCCEEDED)); err != nil {
			t.Fatal(err)
		}
	}
	var got []string
	tok := ""
	for {
		recs, next, err := s.ListJobs(ctx, 3, tok)
		if err != nil {
			t.Fatal(err)
		}
		for _, r := range recs {
			got = append(got, strings.TrimPrefix(r.Job.GetName(), "fitJobs/"))
		}
		if next == "" {
			break
		}
		tok = next
	}
	if fmt.Sprint(got) != "[j08 j07 j06 j05 j04 j03 j02 j01]" {
		t.Fatalf("ListJobs in pages of 3 = %v", got)
	}
	if _, _, err := s.ListJobs(ctx, 3, "bogus"); !errors.Is(err, store.ErrInvalid) {
		t.Fatalf("ListJobs with a bad token: %v", err)
	}
	if err := s.PruneJobs(ctx, 2); err != nil {
		t.Fatal(err)
	}
	recs, _, err := s.ListJobs(ctx, 0, "")
	got = got[:0]
	for _, r := range recs {
		got = append(got, strings.TrimPrefix(r.Job.GetName(), "fitJobs/"))
	}
	if err != nil || fmt.Sprint(got) != "[j08 j07 j02]" {
		t.Fatalf("after PruneJobs(2): %v, %v; want the two newest finished and the unfinished j02", got, err)
	}
}

func mustEncode(t *testing.T, m *mixdv1.Model) []byte {
	t.Helper()
	b, err := modeldoc.Encode(m)
	if err != nil {
		t.Fatal(err)
	}
	return b
}
