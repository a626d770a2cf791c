package main_test

// End-to-end tests of replicas: several real `mixd serve` processes on one
// PostgreSQL store (MIXD_TEST_POSTGRES; the restart test uses its own
// server, MIXD_TEST_POSTGRES_RESTART, which it stops and starts with
// MIXD_TEST_PG_CTL on MIXD_TEST_PG_DATA). They skip when the variables are
// unset; `bash .ci/test` sets them (.ci/postgres.sh).

import (
	"context"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/peer"
	"google.golang.org/grpc/resolver"
	"google.golang.org/grpc/resolver/manual"
	"google.golang.org/grpc/status"

	mixdclient "github.com/mixd-dev/mixd/clients/go"
	"github.com/mixd-dev/mixd/daemon/store/pgtest"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// startReplica starts mixd on the PostgreSQL store at url.
func startReplica(t *testing.T, url string, extra ...string) *daemonProc {
	t.Helper()
	args := append([]string{"--store", url, "--replica-timeout", "2s", "--replica-recheck", "1s"}, extra...)
	return startDaemon(t, filepath.Join(t.TempDir(), "unused"), false, args...)
}

// eventually polls cond every 50 ms for up to within.
func eventually(t *testing.T, within time.Duration, what string, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(within)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatalf("not within %v: %s", within, what)
		}
		time.Sleep(50 * time.Millisecond)
	}
}

func newestVersion(c *mixdclient.Client, model string) (int64, codes.Code) {
	m, err := c.GetModel(context.Background(), model, 0)
	return m.GetVersion(), status.Code(err)
}

var smallFit = mixdclient.FitOptions{Components: 2, Seed: 7}

func TestReplicasShareModelsAndJobs(t *testing.T) {
	u := pgtest.Schema(t, pgtest.URL(t))
	a, b := startReplica(t, u), startReplica(t, u)
	ca, cb := a.client(), b.client()
	ctx := context.Background()
	data, _ := pumps(t)

	// Fit on A, serve on B at once: the pinned version, and the newest.
	v1, err := ca.Fit(ctx, "pumps", data, smallFit, nil)
	if err != nil {
		t.Fatal(err)
	}
	onA, err := ca.Score(ctx, "pumps", data, mixdclient.ScoreOptions{Version: v1.GetVersion()})
	if err != nil {
		t.Fatal(err)
	}
	onB, err := cb.Score(ctx, "pumps", data, mixdclient.ScoreOptions{Version: v1.GetVersion()})
	if err != nil {
		t.Fatalf("Score on B right after A stored the model: %v", err)
	}
	checkClose(t, "log-densities on B", onB.LogDensities, onA.LogDensities)
	if v, code := newestVersion(cb, "pumps"); v != v1.GetVersion() {
		t.Fatalf("newest on B = %d (%v), want %d", v, code, v1.GetVersion())
	}

	// A second fit on A becomes the newest on B, which had the first cached.
	opts := smallFit
	opts.Seed = 8
	v2, err := ca.Fit(ctx, "pumps", data, opts, nil)
	if err != nil {
		t.Fatal(err)
	}
	eventually(t, 5*time.Second, "B serves the second fit as the newest", func() bool {
		v, _ := newestVersion(cb, "pumps")
		return v == v2.GetVersion()
	})
	if ms, err := cb.ListModels(ctx); err != nil || len(ms) != 1 || ms[0].GetVersion() != v2.GetVersion() {
		t.Fatalf("ListModels on B = %v, %v", ms, err)
	}

	// Client-side round-robin over both replicas (as with a headless
	// Service and dns:///): every call is answered, by both in turn.
	rr := manual.NewBuilderWithScheme("mixdreplicas")
	rr.InitialState(resolver.State{Addresses: []resolver.Address{{Addr: a.addr}, {Addr: b.addr}}})
	cr, err := mixdclient.Dial("mixdreplicas:///mixd", mixdclient.WithDialOptions(grpc.WithResolvers(rr),
		grpc.WithDefaultServiceConfig(`{"loadBalancingConfig": [{"round_robin": {}}]}`)))
	if err != nil {
		t.Fatal(err)
	}
	defer cr.Close()
	served := map[string]int{}
	for range 20 {
		var p peer.Peer
		m, err := cr.Service().GetModel(ctx, &mixdv1.GetModelRequest{Name: "pumps"}, grpc.Peer(&p))
		if err != nil || m.GetModel().GetVersion() != v2.GetVersion() {
			t.Fatalf("GetModel through round-robin: %v, %v", m.GetModel().GetVersion(), err)
		}
		served[p.Addr.String()]++
	}
	if len(served) != 2 {
		t.Fatalf("round-robin calls went to %v; want both replicas", served)
	}

	// Delete on B: gone on both, newest and pinned.
	if n, err := cb.DeleteModel(ctx, "pumps", 0); err != nil || n != 2 {
		t.Fatalf("DeleteModel on B = %d, %v", n, err)
	}
	eventually(t, 5*time.Second, "A stops serving the deleted model", func() bool {
		_, c0 := newestVersion(ca, "pumps")
		_, err := ca.Score(ctx, "pumps", data, mixdclient.ScoreOptions{Version: v1.GetVersion()})
		return c0 == codes.NotFound && status.Code(err) == codes.NotFound
	})

	// A job on A is visible on B and cancelled from B; it runs only on A.
	job, err := ca.StartFit(ctx, "slow", uniformData(50000, 4, 5), longFit)
	if err != nil {
		t.Fatal(err)
	}
	eventually(t, 30*time.Second, "B sees the job running", func() bool {
		j, _, err := cb.GetJob(ctx, job.GetName())
		return err == nil && j.GetState() == mixdv1.FitJobState_FIT_JOB_STATE_RUNNING
	})
	jobs, err := cb.ListJobs(ctx)
	if err != nil || !containsJob(jobs, job.GetName()) {
		t.Fatalf("ListJobs on B = %v, %v; want the job of A", jobs, err)
	}
	cancelled, err := cb.CancelJob(ctx, job.GetName())
	if err != nil || cancelled.GetState() != mixdv1.FitJobState_FIT_JOB_STATE_CANCELLED {
		t.Fatalf("CancelJob on B = %v, %v; want CANCELLED", cancelled, err)
	}
	if j, _, err := ca.GetJob(ctx, job.GetName()); err != nil || j.GetState() != mixdv1.FitJobState_FIT_JOB_STATE_CANCELLED {
		t.Fatalf("on A the job is %v, %v", j.GetState(), err)
	}
	if strings.Contains(b.log.String(), "fit started") {
		t.Error("B ran a fit; every job must run only on the replica that received it")
	}

	// A replica killed during a fit: another marks its job FAILED (UNAVAILABLE).
	c := startReplica(t, u)
	lost, err := c.client().StartFit(ctx, "orphan", uniformData(50000, 4, 6), longFit)
	if err != nil {
		t.Fatal(err)
	}
	eventually(t, 30*time.Second, "the job on C runs", func() bool {
		j, _, err := cb.GetJob(ctx, lost.GetName())
		return err == nil && j.GetState() == mixdv1.FitJobState_FIT_JOB_STATE_RUNNING
	})
	c.kill()
	t0 := time.Now()
	eventually(t, 20*time.Second, "the killed replica's job is failed", func() bool {
		j, _, err := cb.GetJob(ctx, lost.GetName())
		return err == nil && j.GetState() == mixdv1.FitJobState_FIT_JOB_STATE_FAILED &&
			codes.Code(j.GetErrorCode()) == codes.Unavailable
	})
	t.Logf("the killed replica's job was marked failed %v after the kill (heartbeat timeout 2s)", time.Since(t0).Round(100*time.Millisecond))
}

func containsJob(jobs []*mixdv1.FitJob, name string) bool {
	for _, j := range jobs {
		if j.GetName() == name {
			return true
		}
	}
	return false
}

// pgCtl runs pg_ctl on the restartable test server.
func pgCtl(t *testing.T, args ...string) {
	t.Helper()
	cmdline := strings.Fields(os.Getenv(pgtest.EnvPgCtl))
	data := os.Getenv(pgtest.EnvPgData)
	cmd := exec.Command(cmdline[0], append(append(cmdline[1:], "-D", data), args...)...)
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("pg_ctl %s: %v\n%s", strings.Join(args, " "), err, out)
	}
}

func TestReplicasSurviveDatabaseRestart(t *testing.T) {
	base := os.Getenv(pgtest.EnvRestartURL)
	if base == "" || os.Getenv(pgtest.EnvPgCtl) == "" || os.Getenv(pgtest.EnvPgData) == "" {
		t.Skipf("%s, %s and %s are not all set: skipping the database restart test (bash .ci/test sets them through .ci/postgres.sh)",
			pgtest.EnvRestartURL, pgtest.EnvPgCtl, pgtest.EnvPgData)
	}
	u := pgtest.Schema(t, base)
	stopped := false
	start := func() {
		pgCtl(t, "-l", filepath.Join(os.Getenv(pgtest.EnvPgData), "server.log"), "-w", "-t", "60", "start")
		stopped = false
	}
	t.Cleanup(func() { // before the schema is dropped
		if stopped {
			start()
		}
	})
	a, b := startReplica(t, u), startReplica(t, u)
	ca, cb := a.client(), b.client()
	ctx := context.Background()
	data, _ := pumps(t)
	v1, err := ca.Fit(ctx, "pumps", data, smallFit, nil)
	if err != nil {
		t.Fatal(err)
	}
	want, err := ca.Score(ctx, "pumps", data, mixdclient.ScoreOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := cb.Score(ctx, "pumps", data, mixdclient.ScoreOptions{}); err != nil {
		t.Fatal(err)
	}

	// A long fit on A runs through the outage.
	long, err := ca.StartFit(ctx, "slow", uniformData(20000, 4, 5), longFit)
	if err != nil {
		t.Fatal(err)
	}
	eventually(t, 30*time.Second, "B sees A's long fit running", func() bool {
		j, _, err := cb.GetJob(ctx, long.GetName())
		return err == nil && j.GetState() == mixdv1.FitJobState_FIT_JOB_STATE_RUNNING
	})

	pgCtl(t, "-m", "fast", "-w", "-t", "60", "stop")
	stopped = true
	// Cached models keep serving, newest and pinned, for longer than the
	// recheck period (1s), on both replicas.
	for end := time.Now().Add(3 * time.Second); time.Now().Before(end); time.Sleep(300 * time.Millisecond) {
		for name, c := range map[string]*mixdclient.Client{"A": ca, "B": cb} {
			for _, v := range []int64{0, v1.GetVersion()} {
				got, err := c.Score(ctx, "pumps", data, mixdclient.ScoreOptions{Version: v})
				if err != nil {
					t.Fatalf("Score version %d on %s with the database stopped: %v", v, name, err)
				}
				checkClose(t, "log-densities with the database stopped", got.LogDensities, want.LogDensities)
			}
		}
	}
	// Calls that need the database fail with UNAVAILABLE.
	for what, call := range map[string]func() error{
		"ListModels on A": func() error { _, err := ca.ListModels(ctx); return err },
		"Fit on B":        func() error { _, err := cb.Fit(ctx, "other", data, smallFit, nil); return err },
		"GetModel of an uncached model": func() error {
			_, err := cb.GetModel(ctx, "never-seen", 0)
			return err
		},
		"DeleteModel on A": func() error { _, err := ca.DeleteModel(ctx, "pumps", 0); return err },
	} {
		if err := call(); status.Code(err) != codes.Unavailable {
			t.Errorf("%s with the database stopped: %v, want UNAVAILABLE", what, err)
		}
	}

	start()
	// Both recover by themselves.
	for name, c := range map[string]*mixdclient.Client{"A": ca, "B": cb} {
		eventually(t, 30*time.Second, name+" reaches the database again", func() bool {
			_, err := c.ListModels(ctx)
			return err == nil
		})
	}
	// The database was down for longer than --replica-timeout (2s), but A
	// is alive: once every replica has had the time to renew its heartbeat
	// and to judge the others, A's fit is still running, and can be
	// cancelled from B.
	time.Sleep(5 * time.Second)
	if j, _, err := cb.GetJob(ctx, long.GetName()); err != nil || j.GetState() != mixdv1.FitJobState_FIT_JOB_STATE_RUNNING {
		t.Fatalf("after the outage A's live fit is %v (%s), %v; want RUNNING", j.GetState(), j.GetErrorMessage(), err)
	}
	if j, err := cb.CancelJob(ctx, long.GetName()); err != nil || j.GetState() != mixdv1.FitJobState_FIT_JOB_STATE_CANCELLED {
		t.Fatalf("CancelJob on B after the outage = %v, %v", j.GetState(), err)
	}

	// The change notifications resume too (reconnection with backoff).
	for name, d := range map[string]*daemonProc{"A": a, "B": b} {
		eventually(t, 20*time.Second, name+" listens for changes again", func() bool {
			return strings.Count(d.log.String(), "store: listening for changes") >= 2
		})
	}
	opts := smallFit
	opts.Seed = 9
	v2, err := cb.Fit(ctx, "pumps", data, opts, nil)
	if err != nil {
		t.Fatalf("Fit on B after the restart: %v", err)
	}
	eventually(t, 10*time.Second, "A serves B's new version as the newest", func() bool {
		v, _ := newestVersion(ca, "pumps")
		return v == v2.GetVersion()
	})
	if _, err := ca.DeleteModel(ctx, "pumps", 0); err != nil {
		t.Fatal(err)
	}
	eventually(t, 10*time.Second, "B stops serving the model deleted on A", func() bool {
		_, code := newestVersion(cb, "pumps")
		return code == codes.NotFound
	})
}
