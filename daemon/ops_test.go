package daemon

import (
	"context"
	"encoding/hex"
	"io"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	coltracepb "go.opentelemetry.io/proto/otlp/collector/trace/v1"
	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/status"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// metricValue returns the value of the sample of metric name whose labels
// include every k="v" of labels (in the Prometheus text format), and
// whether there is one.
func metricValue(body, name string, labels ...string) (float64, bool) {
	for _, line := range strings.Split(body, "\n") {
		if !strings.HasPrefix(line, name+"{") && !strings.HasPrefix(line, name+" ") {
			continue
		}
		ok := true
		for i := 0; i+1 < len(labels); i += 2 {
			if !strings.Contains(line, labels[i]+`="`+labels[i+1]+`"`) {
				ok = false
			}
		}
		if !ok {
			continue
		}
		f := strings.Fields(line)
		v, err := strconv.ParseFloat(f[len(f)-1], 64)
		return v, err == nil
	}
	return 0, false
}

func scrape(t *testing.T, addr string) string {
	t.Helper()
	resp, err := http.Get("http://" + addr + "/metrics")
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	if err != nil || resp.StatusCode != http.StatusOK {
		t.Fatalf("GET /metrics: %d %v", resp.StatusCode, err)
	}
	return string(b)
}

func TestQueueFullRetryHintAndMetrics(t *testing.T) {
	host, st := newFakeHost(), newMemStore()
	if _, err := st.Create(context.Background(), refModel("models/pumps")); err != nil {
		t.Fatal(err)
	}
	started, release := make(chan struct{}, 4), make(chan struct{})
	lines, _ := runWith(t, Config{Host: host, Store: st, MetricsListen: "127.0.0.1:0",
		MaxConcurrentFits: 1, Limits: Limits{MaxActiveJobs: 2}})
	conn := dialWith(t, lines[ListeningPrefix], grpc.WithTransportCredentials(insecure.NewCredentials()))
	c := mixdv1.NewMixtureServiceClient(conn)
	e := &testEnv{client: c, store: st, host: host}
	ctx := context.Background()

	// One fit succeeds (its time feeds the retry hint), one fails.
	createJob(t, e, "ok")
	if _, err := fitEvents(ctx, c, &mixdv1.FitRequest{Spec: spec("bad", 2), Chunk: &mixdv1.FitChunk{Data: rows2(1, 2)}},
		&mixdv1.FitRequest{Chunk: &mixdv1.FitChunk{Data: &mixdv1.Matrix{Rows: 1, Cols: 3, Values: []float64{1, 2, 3}}}}); status.Code(err) != codes.InvalidArgument {
		t.Fatalf("ragged fit: %v", err)
	}
	host.setFit("em", blockingFit(started, release))
	a := createJob(t, e, "a")
	<-started
	b := createJob(t, e, "b")
	s, err := c.CreateFitJob(ctx)
	if err != nil {
		t.Fatal(err)
	}
	_ = s.Send(&mixdv1.CreateFitJobRequest{Spec: spec("c", 2)})
	_, err = s.CloseAndRecv()
	st2 := status.Convert(err)
	if st2.Code() != codes.ResourceExhausted || !strings.Contains(st2.Message(), "fit queue is full") {
		t.Fatalf("third job: %v", err)
	}
	var hint *errdetails.RetryInfo
	for _, d := range st2.Details() {
		if r, ok := d.(*errdetails.RetryInfo); ok {
			hint = r
		}
	}
	if hint == nil || hint.GetRetryDelay().AsDuration() < minRetryDelay || hint.GetRetryDelay().AsDuration() > maxRetryDelay {
		t.Fatalf("retry hint %v in %v", hint, st2.Details())
	}
	if _, err := c.GetModel(ctx, &mixdv1.GetModelRequest{Name: "nope"}); status.Code(err) != codes.NotFound {
		t.Fatal(err)
	}
	for range 3 {
		if _, err := c.Score(ctx, &mixdv1.ScoreRequest{Model: "pumps", Rows: rows2(1, 2)}); err != nil {
			t.Fatal(err)
		}
	}

	body := scrape(t, lines[MetricsPrefix])
	for _, w := range []struct {
		name   string
		labels []string
		min    float64
		max    float64
	}{
		{"grpc_server_handled_total", []string{"grpc_method", "GetModel", "grpc_code", "NotFound"}, 1, 1},
		{"grpc_server_handled_total", []string{"grpc_method", "Score", "grpc_code", "OK"}, 3, 3},
		{"grpc_server_handled_total", []string{"grpc_method", "CreateFitJob", "grpc_code", "ResourceExhausted"}, 1, 1},
		{"grpc_server_handled_total", []string{"grpc_method", "Fit", "grpc_code", "InvalidArgument"}, 1, 1},
		{"grpc_server_handling_seconds_count", []string{"grpc_method", "Score"}, 3, 3},
		{"mixd_fit_jobs", []string{"state", "running"}, 1, 1},
		{"mixd_fit_jobs", []string{"state", "queued"}, 1, 1},
		{"mixd_fit_jobs_ended_total", []string{"state", "succeeded"}, 1, 1},
		{"mixd_fit_jobs_ended_total", []string{"state", "failed"}, 1, 1},
		{"mixd_fit_jobs_refused_total", nil, 1, 1},
		{"mixd_cache_hits_total", nil, 2, 3},
		{"mixd_cache_misses_total", nil, 1, 2},
		{"mixd_cache_models", nil, 1, 2},
		{"mixd_cache_bytes", nil, 1, 1e9},
		{"mixd_cache_budget_bytes", nil, DefaultCacheBytes, DefaultCacheBytes},
		{"go_goroutines", nil, 1, 1e6},
	} {
		v, ok := metricValue(body, w.name, w.labels...)
		if !ok || v < w.min || v > w.max {
			t.Errorf("%s%v = %v (found %v), want %v..%v", w.name, w.labels, v, ok, w.min, w.max)
		}
	}
	close(release)
	for _, j := range []*mixdv1.FitJob{a, b} {
		waitFor(t, j.Name, func() bool {
			return jobState(t, e, j.Name).Job.State == mixdv1.FitJobState_FIT_JOB_STATE_SUCCEEDED
		})
	}
	waitFor(t, "the ended count", func() bool {
		v, _ := metricValue(scrape(t, lines[MetricsPrefix]), "mixd_fit_jobs_ended_total", "state", "succeeded")
		return v == 3
	})
}

func TestFitMemoryCap(t *testing.T) {
	// 100 rows × 2 columns, 3 components: 8·(3·200 + 200 + 600 + 36) bytes
	// plus the fixed 32 MiB.
	if got, want := EstimateFitBytes(100, 2, 3), int64(8*(600+200+600+36)+fitOverheadBytes); got != want {
		t.Fatalf("EstimateFitBytes = %d, want %d", got, want)
	}
	if EstimateFitBytes(1<<62, 1<<40, 1<<40) <= 0 {
		t.Fatal("the estimate overflowed")
	}
	limit := int64(fitOverheadBytes + 8*(3*50*2+2*50+2*50*2+3*2*4))
	e := newTestEnv(t, Options{Limits: Limits{MaxFitMemory: limit}})
	ctx := context.Background()
	data := pumpRows(100, 1)
	// 50 rows fit exactly; 51 do not.
	if _, err := fitEvents(ctx, e.client, &mixdv1.FitRequest{Spec: spec("ok", 2), Chunk: chunk(data[:100], false)}); err != nil {
		t.Fatalf("fit at the cap: %v", err)
	}
	_, err := fitEvents(ctx, e.client,
		&mixdv1.FitRequest{Spec: spec("big", 2), Chunk: chunk(data[:80], false)},
		&mixdv1.FitRequest{Chunk: chunk(data[80:102], false)})
	if st := status.Convert(err); st.Code() != codes.ResourceExhausted || !strings.Contains(st.Message(), "--max-fit-memory") ||
		!strings.Contains(st.Message(), "51 rows × 2 columns with 2 components") || !strings.Contains(st.Message(), "messages[1].chunk") {
		t.Fatalf("fit above the cap: %v", err)
	}
	if _, err := e.store.Get(ctx, "models/big", 0); err == nil {
		t.Fatal("a refused fit stored a model")
	}
	if err := (Limits{MaxFitMemory: -1}).Validate(); err == nil || !strings.Contains(err.Error(), "max fit memory") {
		t.Fatalf("negative cap: %v", err)
	}
	if s := formatBytes(3 << 29); s != "1.5 GiB" {
		t.Fatalf("formatBytes = %q", s)
	}
}

func TestTraceFile(t *testing.T) {
	path := filepath.Join(t.TempDir(), "spans.json")
	t.Run("serve", func(t *testing.T) {
		lines, _ := runWith(t, Config{TraceFile: path})
		c := mixdv1.NewMixtureServiceClient(dialWith(t, lines[ListeningPrefix], grpc.WithTransportCredentials(insecure.NewCredentials())))
		// A caller's W3C trace context is continued.
		ctx := metadata.AppendToOutgoingContext(context.Background(), "traceparent", "00-4bf92f3577b34da6a3ce929d0e0e4736-00f067aa0ba902b7-01")
		if _, err := c.ListModels(ctx, &mixdv1.ListModelsRequest{}); err != nil {
			t.Fatal(err)
		}
	}) // Run has returned: the spans are flushed.
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	s := string(b)
	if !strings.Contains(s, `"Name":"mixd.v1.MixtureService/ListModels"`) || !strings.Contains(s, "4bf92f3577b34da6a3ce929d0e0e4736") {
		t.Fatalf("trace file lacks the call's span in the caller's trace:\n%.2000s", s)
	}
}

// fakeCollector is an OTLP/gRPC trace collector that records the spans it
// receives.
type fakeCollector struct {
	coltracepb.UnimplementedTraceServiceServer
	mu    sync.Mutex
	spans map[string]string // span name → trace id (hex)
}

func (f *fakeCollector) Export(_ context.Context, req *coltracepb.ExportTraceServiceRequest) (*coltracepb.ExportTraceServiceResponse, error) {
	f.mu.Lock()
	defer f.mu.Unlock()
	for _, rs := range req.GetResourceSpans() {
		for _, ss := range rs.GetScopeSpans() {
			for _, sp := range ss.GetSpans() {
				f.spans[sp.GetName()] = hex.EncodeToString(sp.GetTraceId())
			}
		}
	}
	return &coltracepb.ExportTraceServiceResponse{}, nil
}

// TestTraceOTLP sends the daemon's spans to a collector over OTLP/gRPC on
// loopback (plain text), together with the trace file: both receive the
// call's span, in the caller's trace.
func TestTraceOTLP(t *testing.T) {
	col := &fakeCollector{spans: map[string]string{}}
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	gs := grpc.NewServer()
	coltracepb.RegisterTraceServiceServer(gs, col)
	go gs.Serve(l)
	t.Cleanup(gs.Stop)
	path := filepath.Join(t.TempDir(), "spans.json")
	const traceID = "4bf92f3577b34da6a3ce929d0e0e4736"
	t.Run("serve", func(t *testing.T) {
		lines, _ := runWith(t, Config{TraceFile: path, TraceOTLP: "http://" + l.Addr().String()})
		c := mixdv1.NewMixtureServiceClient(dialWith(t, lines[ListeningPrefix], grpc.WithTransportCredentials(insecure.NewCredentials())))
		ctx := metadata.AppendToOutgoingContext(context.Background(), "traceparent", "00-"+traceID+"-00f067aa0ba902b7-01")
		if _, err := c.ListModels(ctx, &mixdv1.ListModelsRequest{}); err != nil {
			t.Fatal(err)
		}
	}) // Run has returned: the spans are flushed to both exporters.
	col.mu.Lock()
	got, ok := col.spans["mixd.v1.MixtureService/ListModels"]
	col.mu.Unlock()
	if !ok || got != traceID {
		t.Fatalf("collector received %v; want the ListModels span in trace %s", col.spans, traceID)
	}
	if b, err := os.ReadFile(path); err != nil || !strings.Contains(string(b), traceID) {
		t.Fatalf("trace file (%v) lacks the span:\n%.500s", err, b)
	}
}

// TestTraceOTLPCollectorDown: a collector that cannot be reached costs
// spans, not calls, and does not hold up shutdown beyond its flush bound.
func TestTraceOTLPCollectorDown(t *testing.T) {
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	addr := l.Addr().String()
	l.Close() // nobody listens here
	start := time.Now()
	t.Run("serve", func(t *testing.T) {
		lines, _ := runWith(t, Config{TraceOTLP: "http://" + addr})
		c := mixdv1.NewMixtureServiceClient(dialWith(t, lines[ListeningPrefix], grpc.WithTransportCredentials(insecure.NewCredentials())))
		for range 3 {
			if _, err := c.ListModels(context.Background(), &mixdv1.ListModelsRequest{}); err != nil {
				t.Fatal(err)
			}
		}
	})
	// The flush is bounded by 5 s (tracing.close); the test's own bound
	// on Run returning is 20 s.
	if d := time.Since(start); d > 15*time.Second {
		t.Fatalf("serving and shutdown took %v with the collector down", d)
	}
}

func TestCheckOTLPEndpoint(t *testing.T) {
	for _, c := range []struct {
		in, err string
	}{
		{"http://127.0.0.1:4317", ""},
		{"https://collector.example:4317", ""},
		{"http://[::1]:4317/", ""},
		{"127.0.0.1:4317", "want http://HOST:PORT"},
		{"grpc://127.0.0.1:4317", "want http://HOST:PORT"},
		{"http://collector", "host and port"},
		{"http://:4317", "host and port"},
		{"http://u:p@collector:4317", "only a scheme, host and port"},
		{"http://collector:4317/v1/traces", "only a scheme, host and port"},
		{"http://collector:4317?x=1", "only a scheme, host and port"},
	} {
		err := CheckOTLPEndpoint(c.in)
		if (c.err == "") != (err == nil) || (err != nil && !strings.Contains(err.Error(), c.err)) {
			t.Errorf("CheckOTLPEndpoint(%q) = %v, want %q", c.in, err, c.err)
		}
	}
}
