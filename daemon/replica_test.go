package daemon

import (
	"context"
	"errors"
	"io"
	"log/slog"
	"testing"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/types/known/timestamppb"

	"github.com/mixd-dev/mixd/daemon/modeldoc"
	"github.com/mixd-dev/mixd/daemon/store"
	"github.com/mixd-dev/mixd/daemon/store/pgtest"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// replicaEnv is one daemon of several sharing a PostgreSQL store.
type replicaEnv struct {
	*testEnv
	pg *store.PgStore
}

// newReplicas starts n Servers on one fresh PostgreSQL schema, each with
// its own store connection and fake fitter host.
func newReplicas(t *testing.T, n int, ro ReplicaOptions) ([]*replicaEnv, string) {
	t.Helper()
	u := pgtest.Schema(t, pgtest.URL(t))
	var out []*replicaEnv
	for range n {
		pg, err := store.OpenPostgres(context.Background(), u, store.PgLogger(slog.New(slog.DiscardHandler)))
		if err != nil {
			t.Fatal(err)
		}
		t.Cleanup(func() { pg.Close() })
		host := newFakeHost()
		srv, client, conn := serveOver(t, Options{Store: pg, Host: host, Replica: ro})
		out = append(out, &replicaEnv{testEnv: &testEnv{srv: srv, host: host, client: client, conn: conn}, pg: pg})
	}
	// Wait until every replica listens for changes.
	for _, r := range out {
		waitFor(t, "the replica to listen for changes", func() bool {
			r.srv.cache.mu.Lock()
			defer r.srv.cache.mu.Unlock()
			return r.srv.cache.recheck == 0
		})
	}
	return out, u
}

func importModel(t *testing.T, c mixdv1.MixtureServiceClient, name string) *mixdv1.Model {
	t.Helper()
	doc, err := modeldoc.Encode(refModel(name))
	if err != nil {
		t.Fatal(err)
	}
	resp, err := c.ImportModel(context.Background(), &mixdv1.ImportModelRequest{Document: doc})
	if err != nil {
		t.Fatal(err)
	}
	return resp.Model
}

func getVersion(c mixdv1.MixtureServiceClient, name string, v int64) (int64, codes.Code) {
	r, err := c.GetModel(context.Background(), &mixdv1.GetModelRequest{Name: name, Version: v})
	return r.GetModel().GetVersion(), status.Code(err)
}

func TestReplicasShareModels(t *testing.T) {
	rs, _ := newReplicas(t, 2, ReplicaOptions{})
	a, b := rs[0].client, rs[1].client
	ctx := context.Background()

	// A fit on A is servable from B as soon as A acknowledges it.
	data := pumpRows(200, 3)
	evs, err := fitEvents(ctx, a, &mixdv1.FitRequest{Spec: spec("pumps", 2), Chunk: chunk(data, false)})
	if err != nil {
		t.Fatal(err)
	}
	v1 := evs[len(evs)-1].GetModel()
	sc, err := b.Score(ctx, &mixdv1.ScoreRequest{Model: "pumps", Version: v1.Version, Rows: encodeMatrix(2, 2, data[:4], false)})
	if err != nil || len(values(t, sc.LogDensities)) != 2 {
		t.Fatalf("Score on B right after the fit on A: %v", err)
	}
	if v, code := getVersion(b, "pumps", 0); code != codes.OK || v != v1.Version {
		t.Fatalf("newest on B = %d, %v; want %d", v, code, v1.Version)
	}

	// A newer version written on A becomes B's newest (B had v1 cached).
	v2 := importModel(t, a, "models/pumps")
	waitFor(t, "B to serve version 2 as the newest", func() bool {
		v, _ := getVersion(b, "pumps", 0)
		return v == v2.Version
	})

	// Deleting on B stops A serving the model, pinned or newest.
	if _, err := a.Score(ctx, &mixdv1.ScoreRequest{Model: "pumps", Version: v1.Version, Rows: encodeMatrix(2, 2, data[:4], false)}); err != nil {
		t.Fatal(err)
	}
	if _, err := b.DeleteModel(ctx, &mixdv1.DeleteModelRequest{Name: "pumps", Version: v2.Version}); err != nil {
		t.Fatal(err)
	}
	waitFor(t, "A to drop version 2", func() bool {
		_, code := getVersion(a, "pumps", v2.Version)
		v, _ := getVersion(a, "pumps", 0)
		return code == codes.NotFound && v == v1.Version
	})
	if _, err := b.DeleteModel(ctx, &mixdv1.DeleteModelRequest{Name: "pumps"}); err != nil {
		t.Fatal(err)
	}
	waitFor(t, "A to drop every version", func() bool {
		_, c0 := getVersion(a, "pumps", 0)
		_, c1 := getVersion(a, "pumps", v1.Version)
		return c0 == codes.NotFound && c1 == codes.NotFound
	})
	// The number is not reused by either replica.
	if v3 := importModel(t, b, "models/pumps"); v3.Version != v2.Version+1 {
		t.Fatalf("after deleting everything, the next version is %d, want %d", v3.Version, v2.Version+1)
	}
}

func TestReplicasShareJobs(t *testing.T) {
	rs, _ := newReplicas(t, 2, ReplicaOptions{})
	a, b := rs[0], rs[1]
	ctx := context.Background()
	started := make(chan struct{}, 4)
	release := make(chan struct{})
	a.host.setFit("em", blockingFit(started, release))

	// A job on A: seen, watched and listed on B.
	job := createJob(t, a.testEnv, "pumps")
	<-started
	waitFor(t, "B to see the job running", func() bool {
		r, err := b.client.GetFitJob(ctx, &mixdv1.GetFitJobRequest{Name: job.Name})
		return err == nil && r.Job.GetState() == mixdv1.FitJobState_FIT_JOB_STATE_RUNNING && r.Job.GetProgress() != nil
	})
	list, err := b.client.ListFitJobs(ctx, &mixdv1.ListFitJobsRequest{})
	if err != nil || len(list.Jobs) != 1 || list.Jobs[0].GetName() != job.Name {
		t.Fatalf("ListFitJobs on B = %v, %v", list, err)
	}
	watch, err := b.client.WatchFitJob(ctx, &mixdv1.WatchFitJobRequest{Name: job.Name})
	if err != nil {
		t.Fatal(err)
	}
	first, err := watch.Recv()
	if err != nil || first.GetJob().GetState() != mixdv1.FitJobState_FIT_JOB_STATE_RUNNING {
		t.Fatalf("first watch event on B: %v, %v", first, err)
	}
	close(release)
	var last *mixdv1.WatchFitJobResponse
	var states []mixdv1.FitJobState
	for {
		ev, err := watch.Recv()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		if ev.GetJob() != nil {
			states = append(states, ev.GetJob().GetState())
		}
		last = ev
	}
	if last.GetModel().GetVersion() != 1 || states[len(states)-1] != mixdv1.FitJobState_FIT_JOB_STATE_SUCCEEDED {
		t.Fatalf("watch on B ended with states %v and %v; want SUCCEEDED and the model", states, last)
	}
	got, err := b.client.GetFitJob(ctx, &mixdv1.GetFitJobRequest{Name: job.Name})
	if err != nil || got.Job.GetModelVersion() != 1 || got.Model.GetVersion() != 1 {
		t.Fatalf("GetFitJob on B after success = %v, %v", got, err)
	}

	// Cancelled from B: A's fit stops, the job ends CANCELLED everywhere.
	a.host.setFit("em", blockingFit(started, nil))
	job = createJob(t, a.testEnv, "slow")
	<-started
	resp, err := b.client.CancelFitJob(ctx, &mixdv1.CancelFitJobRequest{Name: job.Name})
	if err != nil || resp.Job.GetState() != mixdv1.FitJobState_FIT_JOB_STATE_CANCELLED {
		t.Fatalf("CancelFitJob on B = %v, %v; want CANCELLED", resp, err)
	}
	if r, _ := a.client.GetFitJob(ctx, &mixdv1.GetFitJobRequest{Name: job.Name}); r.GetJob().GetState() != mixdv1.FitJobState_FIT_JOB_STATE_CANCELLED {
		t.Fatalf("on A the job is %v", r.GetJob().GetState())
	}
	if _, err := b.client.CancelFitJob(ctx, &mixdv1.CancelFitJobRequest{Name: job.Name}); status.Code(err) != codes.FailedPrecondition {
		t.Fatalf("cancelling an ended job on B: %v, want FAILED_PRECONDITION", err)
	}
	if _, err := b.client.GetFitJob(ctx, &mixdv1.GetFitJobRequest{Name: "fitJobs/none"}); status.Code(err) != codes.NotFound {
		t.Fatalf("GetFitJob of an unknown job: %v", err)
	}
	if _, err := b.client.ListFitJobs(ctx, &mixdv1.ListFitJobsRequest{PageToken: "nonsense"}); status.Code(err) != codes.InvalidArgument {
		t.Fatalf("ListFitJobs with a bad token: %v", err)
	}
	if n := a.host.callCount() + b.host.callCount(); n != 2 || b.host.callCount() != 0 {
		t.Fatalf("fits ran %d times on A and %d on B; want each job once, on A", a.host.callCount(), b.host.callCount())
	}
}

// A job whose daemon stops sending heartbeats is failed by another.
func TestReplicaFailsJobsOfLostReplica(t *testing.T) {
	rs, u := newReplicas(t, 1, ReplicaOptions{Timeout: 500 * time.Millisecond})
	r := rs[0]
	ctx := context.Background()
	ghost := &mixdv1.FitJob{Name: "fitJobs/ghost", Model: "models/pumps", Fitter: "em",
		State: mixdv1.FitJobState_FIT_JOB_STATE_RUNNING, CreateTime: timestamppb.Now()}
	if err := r.pg.SaveJob(ctx, "replica-that-dies", ghost); err != nil {
		t.Fatal(err)
	}
	waitFor(t, "the lost replica's job to fail", func() bool {
		g, err := r.client.GetFitJob(ctx, &mixdv1.GetFitJobRequest{Name: ghost.Name})
		return err == nil && g.Job.GetState() == mixdv1.FitJobState_FIT_JOB_STATE_FAILED &&
			codes.Code(g.Job.GetErrorCode()) == codes.Unavailable
	})
	// The replica's own running job is not touched by its heartbeat check.
	started := make(chan struct{}, 1)
	release := make(chan struct{})
	r.host.setFit("em", blockingFit(started, release))
	job := createJob(t, r.testEnv, "pumps")
	<-started
	time.Sleep(1500 * time.Millisecond) // three heartbeat timeouts
	rec, err := r.pg.GetJob(ctx, job.Name)
	if err != nil || rec.Job.GetState() != mixdv1.FitJobState_FIT_JOB_STATE_RUNNING {
		t.Fatalf("the live replica's job is %v, %v; want RUNNING", rec, err)
	}
	close(release)
	waitFor(t, "the job to succeed in the store", func() bool {
		rec, err := r.pg.GetJob(ctx, job.Name)
		return err == nil && rec.Job.GetState() == mixdv1.FitJobState_FIT_JOB_STATE_SUCCEEDED && rec.Job.GetModelVersion() == 1
	})
	want := jobState(t, r.testEnv, job.Name).Job
	rec, _ = r.pg.GetJob(ctx, job.Name)
	// The database keeps times to the microsecond.
	for _, ts := range []*timestamppb.Timestamp{want.CreateTime, want.EndTime} {
		ts.Nanos -= ts.Nanos % 1000
	}
	if !proto.Equal(rec.Job, want) {
		t.Fatalf("stored job\n %v\ndiffers from the owner's\n %v", rec.Job, want)
	}

	// A daemon started again with the same id fails the jobs its previous
	// process left unfinished, before it serves.
	pg, err := store.OpenPostgres(ctx, u, store.PgLogger(slog.New(slog.DiscardHandler)))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { pg.Close() })
	left := &mixdv1.FitJob{Name: "fitJobs/left", Model: "models/pumps", Fitter: "em",
		State: mixdv1.FitJobState_FIT_JOB_STATE_QUEUED, CreateTime: timestamppb.Now()}
	if err := pg.SaveJob(ctx, "pod-0", left); err != nil {
		t.Fatal(err)
	}
	serveOver(t, Options{Store: pg, Host: newFakeHost(), Replica: ReplicaOptions{ID: "pod-0"}})
	if rec, err := pg.GetJob(ctx, left.Name); err != nil || rec.Job.GetState() != mixdv1.FitJobState_FIT_JOB_STATE_FAILED {
		t.Fatalf("the previous run's job after restarting with its id: %v, %v; want FAILED", rec, err)
	}
}
