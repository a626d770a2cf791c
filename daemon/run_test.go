package daemon

import (
	"bufio"
	"context"
	"io"
	"log/slog"
	"net"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	reflectionpb "google.golang.org/grpc/reflection/grpc_reflection_v1"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// startRun runs Run in the background with fakes and returns the address
// it printed, a cancel function and Run's result channel.
func startRun(t *testing.T, listen string) (addr string, stop func() error) {
	t.Helper()
	pr, pw := io.Pipe()
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() {
		done <- Run(ctx, Config{Listen: listen, Store: newMemStore(), Host: newFakeHost(), Status: pw, ShutdownTimeout: 5 * time.Second,
			Logger: slog.New(slog.DiscardHandler)})
		pw.Close()
	}()
	line, err := bufio.NewReader(pr).ReadString('\n')
	if err != nil {
		cancel()
		t.Fatalf("no listening line: %v (Run: %v)", err, <-done)
	}
	go io.Copy(io.Discard, pr)
	if !strings.HasPrefix(line, ListeningPrefix) {
		cancel()
		t.Fatalf("first line %q", line)
	}
	stopped := false
	stop = func() error {
		if stopped {
			return nil
		}
		stopped = true
		cancel()
		select {
		case err := <-done:
			return err
		case <-time.After(20 * time.Second):
			t.Fatal("Run did not return after cancel")
			return nil
		}
	}
	t.Cleanup(func() { stop() })
	return strings.TrimSpace(strings.TrimPrefix(line, ListeningPrefix)), stop
}

func dial(t *testing.T, target string) *grpc.ClientConn {
	t.Helper()
	conn, err := grpc.NewClient(target, grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { conn.Close() })
	return conn
}

func TestRunServesHealthReflectionAndAPI(t *testing.T) {
	addr, stop := startRun(t, "127.0.0.1:0")
	if _, port, err := net.SplitHostPort(addr); err != nil || port == "0" {
		t.Fatalf("printed address %q", addr)
	}
	conn := dial(t, addr)
	ctx := context.Background()
	hc := healthpb.NewHealthClient(conn)
	for _, svc := range []string{"", "mixd.v1.MixtureService"} {
		r, err := hc.Check(ctx, &healthpb.HealthCheckRequest{Service: svc})
		if err != nil || r.Status != healthpb.HealthCheckResponse_SERVING {
			t.Fatalf("health of %q: %v %v", svc, r, err)
		}
	}
	// Reflection lists the API.
	rs, err := reflectionpb.NewServerReflectionClient(conn).ServerReflectionInfo(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if err := rs.Send(&reflectionpb.ServerReflectionRequest{MessageRequest: &reflectionpb.ServerReflectionRequest_ListServices{}}); err != nil {
		t.Fatal(err)
	}
	resp, err := rs.Recv()
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, s := range resp.GetListServicesResponse().GetService() {
		names = append(names, s.Name)
	}
	if !strings.Contains(strings.Join(names, " "), "mixd.v1.MixtureService") {
		t.Fatalf("reflection lists %v", names)
	}
	rs.CloseSend()
	// The API answers.
	l, err := mixdv1.NewMixtureServiceClient(conn).ListFitters(ctx, &mixdv1.ListFittersRequest{})
	if err != nil || len(l.Fitters) != 2 {
		t.Fatalf("ListFitters: %v %v", l, err)
	}
	// Shutdown turns health to NOT_SERVING for watchers, then stops.
	w, err := hc.Watch(ctx, &healthpb.HealthCheckRequest{})
	if err != nil {
		t.Fatal(err)
	}
	if r, err := w.Recv(); err != nil || r.Status != healthpb.HealthCheckResponse_SERVING {
		t.Fatalf("watch: %v %v", r, err)
	}
	result := make(chan error, 1)
	go func() { result <- stop() }()
	r, err := w.Recv()
	if err != nil || r.Status != healthpb.HealthCheckResponse_NOT_SERVING {
		t.Fatalf("health during shutdown: %v %v", r, err)
	}
	conn.Close() // ends the watch so the drain completes
	if err := <-result; err != nil {
		t.Fatalf("Run: %v", err)
	}
	if c, err := net.DialTimeout("tcp", addr, time.Second); err == nil {
		c.Close()
		t.Fatal("still accepting after shutdown")
	}
}

func TestRunUnixSocket(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "mixd.sock")
	// A stale socket file left by a crashed daemon.
	stale, err := net.Listen("unix", path)
	if err != nil {
		t.Fatal(err)
	}
	stale.(*net.UnixListener).SetUnlinkOnClose(false)
	stale.Close()

	addr, stop := startRun(t, "unix:"+path)
	if addr != "unix:"+path {
		t.Fatalf("printed %q", addr)
	}
	fi, err := os.Stat(path)
	if err != nil || fi.Mode().Perm() != 0o600 || fi.Mode()&os.ModeSocket == 0 {
		t.Fatalf("socket mode %v %v", fi.Mode(), err)
	}
	conn := dial(t, "unix:"+path)
	if _, err := mixdv1.NewMixtureServiceClient(conn).ListFitJobs(context.Background(), &mixdv1.ListFitJobsRequest{}); err != nil {
		t.Fatal(err)
	}
	// A second daemon on the same socket is refused.
	if _, _, err := Listen(path); err == nil || !strings.Contains(err.Error(), "another process is accepting") {
		t.Fatalf("second listener: %v", err)
	}
	conn.Close()
	if err := stop(); err != nil {
		t.Fatal(err)
	}
	if _, err := os.Lstat(path); !os.IsNotExist(err) {
		t.Fatalf("socket left behind: %v", err)
	}
}

func TestListenRefusesNonSocketFile(t *testing.T) {
	path := filepath.Join(t.TempDir(), "data")
	if err := os.WriteFile(path, []byte("keep me"), 0o600); err != nil {
		t.Fatal(err)
	}
	if _, _, err := Listen(path); err == nil || !strings.Contains(err.Error(), "not a socket") {
		t.Fatalf("got %v", err)
	}
	if b, _ := os.ReadFile(path); string(b) != "keep me" {
		t.Fatal("the file was touched")
	}
	if _, _, err := Listen("unix:"); err == nil {
		t.Fatal("empty socket path accepted")
	}
	if _, _, err := Listen("256.0.0.1:0"); err == nil {
		t.Fatal("bad host accepted")
	}
}

func TestRunRejectsBadConfig(t *testing.T) {
	err := Run(context.Background(), Config{Listen: "127.0.0.1:0", Store: newMemStore(), Host: newFakeHost(), Status: io.Discard,
		Limits: Limits{MaxRows: -1}})
	if err == nil || !strings.Contains(err.Error(), "max rows") {
		t.Fatalf("got %v", err)
	}
}
