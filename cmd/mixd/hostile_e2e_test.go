package main_test

// Fault tests against the real daemon: hostile requests, a corrupted model
// file, and the operational listeners (metrics, health-only).

import (
	"bufio"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"io"
	"io/fs"
	"math"
	"net/http"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/status"

	mixdclient "github.com/mixd-dev/mixd/clients/go"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

const (
	e2eFullToken = "e2e-full-token-5f1c9a0b7d"
	e2eReadToken = "e2e-read-token-93be11f4c2"
)

// tokenFile writes a token file with a full and a read token.
func tokenFile(t *testing.T) string {
	t.Helper()
	p := filepath.Join(t.TempDir(), "tokens")
	if err := os.WriteFile(p, []byte("full "+e2eFullToken+" ops\nread "+e2eReadToken+" dashboards\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	return p
}

// dirDigest hashes every file of a directory tree (except the lock file)
// by name and content.
func dirDigest(t *testing.T, dir string) string {
	t.Helper()
	var names []string
	sums := map[string]string{}
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() || d.Name() == "lock" {
			return err
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		s := sha256.Sum256(b)
		rel, _ := filepath.Rel(dir, p)
		names = append(names, rel)
		sums[rel] = hex.EncodeToString(s[:])
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	sort.Strings(names)
	h := sha256.New()
	for _, n := range names {
		h.Write([]byte(n + "=" + sums[n] + "\n"))
	}
	return hex.EncodeToString(h.Sum(nil))
}

// drain reads a server stream to its end and returns its error (nil at EOF).
func drain[T any](recv func() (T, error)) error {
	for {
		if _, err := recv(); err != nil {
			if err == io.EOF {
				return nil
			}
			return err
		}
	}
}

// TestHostileRequests sends malformed and hostile requests, each with its
// expected code; afterwards the daemon is healthy and nothing stored has
// changed, on disk or through the API.
func TestHostileRequests(t *testing.T) {
	dataDir := t.TempDir()
	d := startDaemon(t, dataDir, false, "--token-file", tokenFile(t),
		"--max-rows", "1000", "--max-dimension", "16", "--max-components", "8", "--max-sample-count", "10000",
		"--max-fit-rows", "5000", "--max-message-bytes", "2MiB", "--max-fit-memory", "34078720")
	full := d.client(mixdclient.WithBearerToken(e2eFullToken))
	reader := d.client(mixdclient.WithBearerToken(e2eReadToken))
	anon := d.client()
	wrong := d.client(mixdclient.WithBearerToken(e2eFullToken + "x"))
	svc, rsvc := full.Service(), reader.Service()
	ctx := context.Background()
	data, header := pumps(t)
	if _, err := full.Fit(ctx, "pumps", data, mixdclient.FitOptions{Components: 3, Seed: 7, FeatureNames: header}, nil); err != nil {
		t.Fatal(err)
	}
	doc, err := full.ExportModel(ctx, "pumps", 1)
	if err != nil {
		t.Fatal(err)
	}
	before := snapshot(t, full)
	beforeDisk := dirDigest(t, dataDir)

	// tamper returns the exported document with one change.
	tamper := func(change func(m map[string]any)) []byte {
		var m map[string]any
		if err := json.Unmarshal(doc, &m); err != nil {
			t.Fatal(err)
		}
		change(m)
		b, err := json.Marshal(m)
		if err != nil {
			t.Fatal(err)
		}
		return b
	}
	comp0 := func(m map[string]any) map[string]any { return m["components"].([]any)[0].(map[string]any) }
	mat := func(rows, cols int64, v ...float64) *mixdv1.Matrix {
		return &mixdv1.Matrix{Rows: rows, Cols: cols, Values: v}
	}
	good := mat(2, 3, 40, 37, 2.3, 18, 22, 1.5)
	score := func(m *mixdv1.Matrix) func() error {
		return func() error { _, err := svc.Score(ctx, &mixdv1.ScoreRequest{Model: "pumps", Rows: m}); return err }
	}
	fitMsgs := func(msgs ...*mixdv1.FitRequest) func() error {
		return func() error {
			st, err := svc.Fit(ctx)
			if err != nil {
				return err
			}
			for _, m := range msgs {
				if st.Send(m) != nil {
					break
				}
			}
			_ = st.CloseSend()
			return drain(st.Recv)
		}
	}
	fitSpec := func(sp *mixdv1.FitSpec, m *mixdv1.Matrix) func() error {
		return fitMsgs(&mixdv1.FitRequest{Spec: sp, Chunk: &mixdv1.FitChunk{Data: m}})
	}
	rows := func(n, cols int) *mixdv1.Matrix {
		m := &mixdv1.Matrix{Rows: int64(n), Cols: int64(cols), Values: make([]float64, n*cols)}
		for i := range m.Values {
			m.Values[i] = float64(i%97) + float64(i%7)*0.31
		}
		return m
	}
	importDoc := func(b []byte) func() error {
		return func() error { _, err := svc.ImportModel(ctx, &mixdv1.ImportModelRequest{Document: b}); return err }
	}
	sp := func(k int32) *mixdv1.FitSpec { return &mixdv1.FitSpec{Model: "hostile", Components: k, Seed: 1} }

	tests := []struct {
		name string
		call func() error
		code codes.Code
	}{
		// Matrices.
		{"score NaN", score(mat(1, 3, 1, math.NaN(), 3)), codes.InvalidArgument},
		{"score +Inf", score(mat(1, 3, 1, 2, math.Inf(1))), codes.InvalidArgument},
		{"score -Inf in little-endian bytes", score(&mixdv1.Matrix{Rows: 1, Cols: 3, LittleEndian: mixdclient.EncodeFloat64s([]float64{1, math.Inf(-1), 3})}), codes.InvalidArgument},
		{"score ragged values", score(mat(2, 3, 1, 2, 3, 4, 5)), codes.InvalidArgument},
		{"score little-endian length", score(&mixdv1.Matrix{Rows: 1, Cols: 3, LittleEndian: make([]byte, 17)}), codes.InvalidArgument},
		{"score values and bytes both", score(&mixdv1.Matrix{Rows: 1, Cols: 3, Values: []float64{1, 2, 3}, LittleEndian: make([]byte, 24)}), codes.InvalidArgument},
		{"score negative rows", score(&mixdv1.Matrix{Rows: -1, Cols: 3}), codes.InvalidArgument},
		{"score negative cols", score(&mixdv1.Matrix{Rows: 1, Cols: -3}), codes.InvalidArgument},
		{"score huge declared rows", score(&mixdv1.Matrix{Rows: math.MaxInt64, Cols: 3}), codes.ResourceExhausted},
		{"score rows above --max-rows", score(rows(1001, 3)), codes.ResourceExhausted},
		{"score cols above --max-dimension", score(rows(1, 17)), codes.ResourceExhausted},
		{"score wrong width", score(rows(2, 2)), codes.InvalidArgument},
		{"message above --max-message-bytes", score(rows(100000, 3)), codes.ResourceExhausted},
		// Names and versions.
		{"score unknown model", func() error { _, err := svc.Score(ctx, &mixdv1.ScoreRequest{Model: "nope", Rows: good}); return err }, codes.NotFound},
		{"score path traversal name", func() error {
			_, err := svc.Score(ctx, &mixdv1.ScoreRequest{Model: "../../etc/passwd", Rows: good})
			return err
		}, codes.InvalidArgument},
		{"get name with NUL", func() error { _, err := svc.GetModel(ctx, &mixdv1.GetModelRequest{Name: "pu\x00mps"}); return err }, codes.InvalidArgument},
		{"get overlong name", func() error {
			_, err := svc.GetModel(ctx, &mixdv1.GetModelRequest{Name: strings.Repeat("a", 10000)})
			return err
		}, codes.InvalidArgument},
		{"get negative version", func() error {
			_, err := svc.GetModel(ctx, &mixdv1.GetModelRequest{Name: "pumps", Version: -1})
			return err
		}, codes.InvalidArgument},
		{"get huge version", func() error {
			_, err := svc.GetModel(ctx, &mixdv1.GetModelRequest{Name: "pumps", Version: math.MaxInt64})
			return err
		}, codes.NotFound},
		{"job name without prefix", func() error { _, err := svc.GetFitJob(ctx, &mixdv1.GetFitJobRequest{Name: "../x"}); return err }, codes.InvalidArgument},
		{"bad page token", func() error {
			_, err := svc.ListModels(ctx, &mixdv1.ListModelsRequest{PageToken: "x'; DROP TABLE models; --"})
			return err
		}, codes.InvalidArgument},
		{"negative page size", func() error { _, err := svc.ListModels(ctx, &mixdv1.ListModelsRequest{PageSize: -5}); return err }, codes.InvalidArgument},
		// Counts and options.
		{"classify min_posterior NaN", func() error {
			_, err := svc.Classify(ctx, &mixdv1.ClassifyRequest{Model: "pumps", Rows: good, MinPosterior: math.NaN()})
			return err
		}, codes.InvalidArgument},
		{"sample negative count", func() error { _, err := svc.Sample(ctx, &mixdv1.SampleRequest{Model: "pumps", Count: -1}); return err }, codes.InvalidArgument},
		{"sample huge count", func() error {
			_, err := svc.Sample(ctx, &mixdv1.SampleRequest{Model: "pumps", Count: math.MaxInt64})
			return err
		}, codes.ResourceExhausted},
		{"sample stream above --max-sample-count", func() error {
			st, err := svc.SampleStream(ctx, &mixdv1.SampleStreamRequest{Model: "pumps", Count: 10001})
			if err != nil {
				return err
			}
			return drain(st.Recv)
		}, codes.ResourceExhausted},
		// Fits.
		{"fit NaN", fitSpec(sp(2), mat(3, 1, 1, math.NaN(), 3)), codes.InvalidArgument},
		{"fit zero components", fitSpec(sp(0), good), codes.InvalidArgument},
		{"fit negative components", fitSpec(sp(-2), good), codes.InvalidArgument},
		{"fit components above --max-components", fitSpec(sp(9), good), codes.ResourceExhausted},
		{"fit huge component range", fitSpec(&mixdv1.FitSpec{Model: "hostile", ComponentsMin: 1, ComponentsMax: math.MaxInt32}, good), codes.ResourceExhausted},
		{"fit unknown fitter", fitSpec(&mixdv1.FitSpec{Model: "hostile", Components: 2, Fitter: "../../bin/sh"}, good), codes.InvalidArgument},
		{"fit NaN tolerance", fitSpec(&mixdv1.FitSpec{Model: "hostile", Components: 2, Tolerance: math.NaN()}, good), codes.InvalidArgument},
		{"fit unknown option", fitSpec(&mixdv1.FitSpec{Model: "hostile", Components: 2, Options: map[string]string{"exec": "rm -rf /"}}, rows(50, 3)), codes.InvalidArgument},
		{"fit huge expected rows", fitSpec(&mixdv1.FitSpec{Model: "hostile", Components: 2, ExpectedRows: math.MaxInt64}, good), codes.ResourceExhausted},
		{"fit chunk before spec", fitMsgs(&mixdv1.FitRequest{Chunk: &mixdv1.FitChunk{Data: good}}), codes.InvalidArgument},
		{"fit spec twice", fitMsgs(&mixdv1.FitRequest{Spec: sp(2), Chunk: &mixdv1.FitChunk{Data: good}}, &mixdv1.FitRequest{Spec: sp(2)}), codes.InvalidArgument},
		{"fit ragged chunks", fitMsgs(&mixdv1.FitRequest{Spec: sp(2), Chunk: &mixdv1.FitChunk{Data: good}},
			&mixdv1.FitRequest{Chunk: &mixdv1.FitChunk{Data: rows(2, 2)}}), codes.InvalidArgument},
		{"fit negative row weight", fitMsgs(&mixdv1.FitRequest{Spec: sp(1), Chunk: &mixdv1.FitChunk{Data: good, RowWeights: mat(2, 1, 1, -1)}}), codes.InvalidArgument},
		{"fit rows above --max-fit-rows", fitMsgs(&mixdv1.FitRequest{Spec: sp(2), Chunk: &mixdv1.FitChunk{Data: rows(900, 3)}},
			&mixdv1.FitRequest{Chunk: &mixdv1.FitChunk{Data: rows(900, 3)}}, &mixdv1.FitRequest{Chunk: &mixdv1.FitChunk{Data: rows(900, 3)}},
			&mixdv1.FitRequest{Chunk: &mixdv1.FitChunk{Data: rows(900, 3)}}, &mixdv1.FitRequest{Chunk: &mixdv1.FitChunk{Data: rows(900, 3)}},
			&mixdv1.FitRequest{Chunk: &mixdv1.FitChunk{Data: rows(900, 3)}}), codes.ResourceExhausted},
		{"fit above --max-fit-memory", fitSpec(sp(8), rows(4000, 3)), codes.ResourceExhausted},
		{"fit no rows", fitMsgs(&mixdv1.FitRequest{Spec: sp(2)}), codes.InvalidArgument},
		// Model documents.
		{"import empty", importDoc(nil), codes.InvalidArgument},
		{"import truncated", importDoc(doc[:len(doc)/2]), codes.InvalidArgument},
		{"import wrong format", importDoc([]byte(`{"format":"something else","format_version":1}`)), codes.InvalidArgument},
		{"import future format version", importDoc(tamper(func(m map[string]any) { m["format_version"] = 99 })), codes.InvalidArgument},
		{"import negative weight", importDoc(tamper(func(m map[string]any) { comp0(m)["weight"] = -0.5 })), codes.InvalidArgument},
		{"import covariance not positive definite", importDoc(tamper(func(m map[string]any) {
			comp0(m)["covariance"] = []any{[]any{1, 2, 0}, []any{2, 1, 0}, []any{0, 0, 1}}
		})), codes.InvalidArgument},
		{"import dimension mismatch", importDoc(tamper(func(m map[string]any) { m["dimension"] = 4 })), codes.InvalidArgument},
		{"import bad name", importDoc(tamper(func(m map[string]any) { m["name"] = "../../x" })), codes.InvalidArgument},
		{"import dimension 17 over 3-column components", importDoc(tamper(func(m map[string]any) { m["dimension"] = 17 })), codes.InvalidArgument},
		// Credentials.
		{"no token", func() error { _, err := anon.GetModel(ctx, "pumps", 0); return err }, codes.Unauthenticated},
		{"wrong token", func() error { _, err := wrong.GetModel(ctx, "pumps", 0); return err }, codes.Unauthenticated},
		{"wrong token fit", func() error {
			_, err := wrong.Fit(ctx, "hostile", data, mixdclient.FitOptions{Components: 2}, nil)
			return err
		}, codes.Unauthenticated},
		{"basic instead of bearer", func() error {
			c := metadata.AppendToOutgoingContext(ctx, "authorization", "Basic "+e2eFullToken)
			_, err := anon.Service().GetModel(c, &mixdv1.GetModelRequest{Name: "pumps"})
			return err
		}, codes.Unauthenticated},
		{"read token deletes", func() error { _, err := rsvc.DeleteModel(ctx, &mixdv1.DeleteModelRequest{Name: "pumps"}); return err }, codes.PermissionDenied},
		{"read token imports", func() error { _, err := rsvc.ImportModel(ctx, &mixdv1.ImportModelRequest{Document: doc}); return err }, codes.PermissionDenied},
		{"read token fits", func() error {
			_, err := reader.Fit(ctx, "hostile", data, mixdclient.FitOptions{Components: 2}, nil)
			return err
		}, codes.PermissionDenied},
		{"read token reloads fitters", func() error { _, err := rsvc.ReloadFitters(ctx, &mixdv1.ReloadFittersRequest{}); return err }, codes.PermissionDenied},
	}
	if len(tests) < 30 {
		t.Fatalf("only %d hostile requests", len(tests))
	}
	for _, tt := range tests {
		err := tt.call()
		if got := status.Code(err); got != tt.code {
			t.Errorf("%s: %v (%v), want %v", tt.name, got, err, tt.code)
		} else if tt.code != codes.OK && len(status.Convert(err).Message()) < 10 {
			t.Errorf("%s: unhelpful message %q", tt.name, status.Convert(err).Message())
		}
	}

	// Still healthy, still serving, nothing stored changed.
	conn, err := grpc.NewClient("passthrough:///"+d.addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	if r, err := healthpb.NewHealthClient(conn).Check(ctx, &healthpb.HealthCheckRequest{}); err != nil || r.Status != healthpb.HealthCheckResponse_SERVING {
		t.Fatalf("health after hostile requests: %v %v", r, err)
	}
	some := mixdclient.Matrix{Rows: 500, Cols: data.Cols, Values: data.Values[:500*data.Cols]}
	if _, err := full.Score(ctx, "pumps", some, mixdclient.ScoreOptions{}); err != nil {
		t.Fatalf("score after hostile requests: %v", err)
	}
	if after := snapshot(t, full); !sameModels(before, after) {
		t.Fatalf("hostile requests changed the store: %d versions before, %d after", len(before), len(after))
	}
	if after := dirDigest(t, dataDir); after != beforeDisk {
		t.Fatal("hostile requests changed files in the data directory")
	}
	select {
	case <-d.done:
		t.Fatalf("the daemon exited: %v", d.waitErr)
	default:
	}
}

// TestCorruptModelFileQuarantined damages one stored model file on disk:
// the daemon reports it (DATA_LOSS, log line), moves it to the quarantine
// directory, never serves it, and serves the other models and versions.
func TestCorruptModelFileQuarantined(t *testing.T) {
	dataDir := t.TempDir()
	d := startDaemon(t, dataDir, false)
	c := d.client()
	ctx := context.Background()
	data, _ := pumps(t)
	for _, k := range []int{2, 3} {
		if _, err := c.Fit(ctx, "pumps", data, mixdclient.FitOptions{Components: k, Seed: 7}, nil); err != nil {
			t.Fatal(err)
		}
	}
	if _, err := c.Fit(ctx, "other", data, mixdclient.FitOptions{Components: 1, Seed: 1}, nil); err != nil {
		t.Fatal(err)
	}
	d.stop(syscall.SIGTERM)

	// Flip one byte in the middle of pumps version 2.
	p := filepath.Join(dataDir, "models", "pumps", "2.json")
	b, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	i := strings.Index(string(b), `"components"`) + 30
	b[i] ^= 0x04
	if err := os.WriteFile(p, b, 0o600); err != nil {
		t.Fatal(err)
	}

	d2 := startDaemon(t, dataDir, false)
	c2 := d2.client()
	_, err = c2.GetModel(ctx, "pumps", 2)
	if st := mixdclient.StatusOf(err); st.Code() != codes.DataLoss || !strings.Contains(st.Message(), "checksum mismatch") {
		t.Fatalf("get of the damaged version: %v", err)
	}
	q := filepath.Join(dataDir, "quarantine", "pumps", "2.json")
	if _, err := os.Stat(q); err != nil {
		t.Fatalf("not quarantined: %v", err)
	}
	if _, err := os.Stat(p); err == nil {
		t.Fatal("the damaged file is still among the models")
	}
	waitForLog(t, d2, "quarantined corrupt model version")
	if _, err := c2.Score(ctx, "pumps", data, mixdclient.ScoreOptions{Version: 2}); mixdclient.StatusOf(err).Code() != codes.DataLoss {
		t.Fatalf("score of the damaged version: %v", err)
	}
	m, err := c2.GetModel(ctx, "pumps", 0)
	if err != nil || m.GetVersion() != 1 {
		t.Fatalf("newest pumps = version %d, %v; want 1 (2 is damaged)", m.GetVersion(), err)
	}
	if _, err := c2.Score(ctx, "other", data, mixdclient.ScoreOptions{}); err != nil {
		t.Fatalf("other model: %v", err)
	}
	vs, err := c2.ListVersions(ctx, "pumps")
	if err != nil || len(vs) != 1 {
		t.Fatalf("versions of pumps: %d, %v", len(vs), err)
	}
	// The number is not reused.
	m, err = c2.Fit(ctx, "pumps", data, mixdclient.FitOptions{Components: 2, Seed: 9}, nil)
	if err != nil || m.GetVersion() != 3 {
		t.Fatalf("next fit: version %d, %v; want 3", m.GetVersion(), err)
	}
}

func waitForLog(t *testing.T, d *daemonProc, s string) {
	t.Helper()
	deadline := time.Now().Add(10 * time.Second)
	for !strings.Contains(d.log.String(), s) {
		if time.Now().After(deadline) {
			t.Fatalf("the log never said %q", s)
		}
		time.Sleep(20 * time.Millisecond)
	}
}

// TestMetricsAndHealthListeners runs the daemon with metrics, the
// health-only listener and JSON logs: the metrics count calls and the
// fitter process that was killed; the logs carry the request id.
func TestMetricsAndHealthListeners(t *testing.T) {
	d := startDaemon(t, t.TempDir(), true, "--metrics-listen", "127.0.0.1:0", "--health-listen", "127.0.0.1:0",
		"--log-format", "json", "--log-level", "debug")
	metricsAddr, healthAddr := statusLine(t, d, "mixd: metrics on "), statusLine(t, d, "mixd: health on ")
	c := d.client()
	ctx := context.Background()
	data, _ := pumps(t)
	if _, err := c.Fit(ctx, "pumps", data, mixdclient.FitOptions{Components: 2, Seed: 7}, nil); err != nil {
		t.Fatal(err)
	}
	var hdr metadata.MD
	if _, err := c.Service().GetModel(ctx, &mixdv1.GetModelRequest{Name: "nope"}, grpc.Header(&hdr)); status.Code(err) != codes.NotFound {
		t.Fatal(err)
	}
	id := hdr.Get("x-request-id")
	if len(id) != 1 {
		t.Fatalf("no request id in %v", hdr)
	}
	// Kill the fitter process during a fit: a crash is counted.
	errc := startLongFit(t, c, "doomed")
	for _, p := range children(d.cmd.Process.Pid) {
		_ = syscall.Kill(p, syscall.SIGKILL)
	}
	if err := <-errc; status.Code(err) != codes.Unavailable {
		t.Fatalf("fit with a killed fitter: %v", err)
	}
	if _, err := c.Fit(ctx, "pumps", data, mixdclient.FitOptions{Components: 2, Seed: 8}, nil); err != nil {
		t.Fatalf("fit after the crash: %v", err)
	}

	resp, err := http.Get("http://" + metricsAddr + "/metrics")
	if err != nil {
		t.Fatal(err)
	}
	body, _ := io.ReadAll(resp.Body)
	resp.Body.Close()
	for _, want := range []string{
		`grpc_server_handled_total{grpc_code="NotFound",grpc_method="GetModel",grpc_service="mixd.v1.MixtureService",grpc_type="unary"} 1`,
		`grpc_server_handled_total{grpc_code="Unavailable",grpc_method="Fit",grpc_service="mixd.v1.MixtureService",grpc_type="bidi_stream"} 1`,
		`mixd_fitter_crashes_total{fitter="em"} 1`,
		`mixd_fit_jobs_ended_total{state="succeeded"} 2`,
		`mixd_fit_jobs_ended_total{state="failed"} 1`,
	} {
		if !strings.Contains(string(body), want) {
			t.Errorf("metrics lack %s", want)
		}
	}
	if n := metricNumber(string(body), `mixd_fitter_launches_total{fitter="em"}`); n < 2 {
		t.Errorf("fitter launches %v, want at least 2 (one relaunch after the kill)", n)
	}

	// The health-only listener.
	hc, err := grpc.NewClient("passthrough:///"+healthAddr, grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	defer hc.Close()
	if r, err := healthpb.NewHealthClient(hc).Check(ctx, &healthpb.HealthCheckRequest{}); err != nil || r.Status != healthpb.HealthCheckResponse_SERVING {
		t.Fatalf("health listener: %v %v", r, err)
	}

	// JSON logs: the failed call's line carries its request id.
	found := false
	sc := bufio.NewScanner(strings.NewReader(d.log.String()))
	for sc.Scan() {
		var rec map[string]any
		if json.Unmarshal(sc.Bytes(), &rec) != nil {
			continue
		}
		if rec["request_id"] == id[0] && rec["code"] == "NotFound" && rec["method"] == "/mixd.v1.MixtureService/GetModel" {
			found = true
		}
	}
	if !found {
		t.Errorf("no JSON log line for request %s:\n%s", id[0], d.log.String())
	}
}

// statusLine returns the rest of the first log line starting with prefix.
func statusLine(t *testing.T, d *daemonProc, prefix string) string {
	t.Helper()
	for _, l := range strings.Split(d.log.String(), "\n") {
		if v, ok := strings.CutPrefix(l, prefix); ok {
			return strings.TrimSpace(v)
		}
	}
	t.Fatalf("no line starting %q in:\n%s", prefix, d.log.String())
	return ""
}

// metricNumber returns the value of the sample line starting with series.
func metricNumber(body, series string) float64 {
	for _, l := range strings.Split(body, "\n") {
		if v, ok := strings.CutPrefix(l, series+" "); ok {
			f, _ := strconv.ParseFloat(strings.TrimSpace(v), 64)
			return f
		}
	}
	return -1
}
