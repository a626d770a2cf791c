package fitters_test

import (
	"context"
	"errors"
	"fmt"
	"math"
	"net"
	"reflect"
	"slices"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/status"
	"google.golang.org/grpc/test/bufconn"
	"google.golang.org/protobuf/proto"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/mixture"
	"github.com/mixd-dev/mixd/fitters/pbconv"
	fitterv1 "github.com/mixd-dev/mixd/proto/mixd/fitter/v1"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// recorder is a fake fitter for the in-process tests of the gRPC adapters.
// It records what it received and behaves as Settings.Options["mode"] says.
type recorder struct {
	mu       sync.Mutex
	data     fitters.Data
	settings fitters.Settings
	sawDone  chan struct{} // closed when a "block" fit sees its context end
}

func (r *recorder) Describe(context.Context) (fitters.Info, error) { return testInfo(), nil }

func (r *recorder) Fit(ctx context.Context, d fitters.Data, s fitters.Settings, progress func(fitters.Progress)) (*fitters.Result, error) {
	r.mu.Lock()
	r.data, r.settings = d, s
	r.mu.Unlock()
	switch s.Options["mode"] {
	case "fail":
		code, _ := strconv.Atoi(s.Options["code"])
		return nil, fitters.Errorf(fitters.Code(code), "%s", s.Options["message"])
	case "nil":
		return nil, nil
	case "block":
		progress(fitters.Progress{Iteration: 1})
		<-ctx.Done()
		close(r.sawDone)
		return nil, fitters.ContextError(ctx)
	case "progress":
		n, _ := strconv.Atoi(s.Options["events"])
		for i := 1; i <= n; i++ {
			progress(fitters.Progress{Components: 2, Restart: 1, Iteration: i, Objective: float64(-1000 + i), Elapsed: time.Duration(i)})
		}
	case "parallel":
		// Several goroutines report at once: the adapter must serialise the sends.
		var wg sync.WaitGroup
		for g := 0; g < 4; g++ {
			wg.Add(1)
			go func() {
				defer wg.Done()
				for i := 0; i < 50; i++ {
					progress(fitters.Progress{Restart: g, Iteration: i})
				}
			}()
		}
		wg.Wait()
	case "late":
		// A progress call after Fit returned must be ignored, not crash the stream.
		defer func() { go progress(fitters.Progress{Iteration: 99}) }()
	}
	return &fitters.Result{Params: oneComponent(d), Report: testReport()}, nil
}

// oneComponent returns the K=1 Gaussian fitted to d by weighted moments, so a
// result depends on every value the fitter received.
func oneComponent(d fitters.Data) mixture.Params {
	mean := make([]float64, d.Cols)
	cov := make([]float64, d.Cols*d.Cols)
	var wsum float64
	for i := 0; i < d.Rows; i++ {
		w := 1.0
		if d.Weights != nil {
			w = d.Weights[i]
		}
		wsum += w
		for j, v := range d.Row(i) {
			mean[j] += w * v
		}
	}
	for j := range mean {
		mean[j] /= wsum
	}
	for i := 0; i < d.Rows; i++ {
		w := 1.0
		if d.Weights != nil {
			w = d.Weights[i]
		}
		row := d.Row(i)
		for a := range row {
			for b := range row {
				cov[a*d.Cols+b] += w * (row[a] - mean[a]) * (row[b] - mean[b]) / wsum
			}
		}
	}
	return mixture.Params{Dim: d.Cols, Family: mixture.Gaussian, Structure: mixture.Full,
		Components: []mixture.Component{{Weight: 1, Mean: mean, Cov: cov}}}
}

func testInfo() fitters.Info {
	return fitters.Info{
		Name: "recorder", Version: "0.1.0", Description: "records what it receives",
		Families:   []mixture.Family{mixture.Gaussian},
		Structures: []mixture.Structure{mixture.Full, mixture.Tied},
		Options:    []fitters.OptionInfo{{Name: "mode", Description: "test behaviour", Default: "fit"}},
	}
}

// testReport sets every field of a Report, so the adapters must carry all of them.
func testReport() fitters.Report {
	return fitters.Report{
		Iterations: 9, Converged: true, Objective: "log_likelihood", LogLikelihood: -10.5, Bound: -11.25,
		BIC: 30.5, AIC: 27, History: []float64{-20, -12, -10.5},
		Selection:   []fitters.SelectionRow{{Components: 1, LogLikelihood: -10.5, BIC: 30.5, AIC: 27, Converged: true, Iterations: 9}},
		FlaggedRows: 2, OutlierLevel: 0.01, EffectiveComponents: 1,
		Notes: []string{"a note"}, Settings: map[string]string{"tolerance": "1e-06"},
	}
}

// connect serves impl in-process over an in-memory connection and returns
// the host-side Fitter and a raw stub for protocol tests.
func connect(t *testing.T, impl fitters.Fitter) (fitters.Fitter, fitterv1.FitterServiceClient) {
	t.Helper()
	lis := bufconn.Listen(1 << 20)
	srv := fitters.NewGRPCServer(nil)
	if err := (&fitters.GRPCPlugin{Impl: impl}).GRPCServer(nil, srv); err != nil {
		t.Fatal(err)
	}
	go func() { _ = srv.Serve(lis) }()
	opts := append([]grpc.DialOption{
		grpc.WithContextDialer(func(ctx context.Context, _ string) (net.Conn, error) { return lis.DialContext(ctx) }),
		grpc.WithTransportCredentials(insecure.NewCredentials()),
	}, fitters.GRPCDialOptions()...)
	conn, err := grpc.NewClient("passthrough:///plugin", opts...)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		_ = conn.Close()
		srv.Stop()
	})
	raw, err := (&fitters.GRPCPlugin{}).GRPCClient(context.Background(), nil, conn)
	if err != nil {
		t.Fatal(err)
	}
	return raw.(fitters.Fitter), fitterv1.NewFitterServiceClient(conn)
}

// pumpData returns rows of made-up pumping-station readings (flow, motor
// current, vibration) from a fixed formula, so every value is distinct.
func pumpData(rows int) fitters.Data {
	d := fitters.Data{Rows: rows, Cols: 3, Values: make([]float64, 3*rows)}
	for i := 0; i < rows; i++ {
		x := float64(i)
		d.Values[3*i] = 40 + 5*math.Sin(x/7)
		d.Values[3*i+1] = 12 + 0.1*x/float64(rows) + math.Cos(x/3)
		d.Values[3*i+2] = 0.5 + 0.01*float64(i%17)
	}
	return d
}

func TestDescribeAndFitRoundTrip(t *testing.T) {
	rec := &recorder{}
	f, _ := connect(t, rec)
	ctx := context.Background()
	info, err := f.Describe(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(info, testInfo()) {
		t.Fatalf("Describe = %+v, want %+v", info, testInfo())
	}

	d := pumpData(500)
	d.Weights = make([]float64, d.Rows)
	labels := make([]int, d.Rows)
	for i := range d.Weights {
		d.Weights[i] = 1 + float64(i%3)
		labels[i] = i % 2
	}
	start := oneComponent(pumpData(10))
	s := fitters.Settings{
		Components: 1, MinComponents: 1, MaxComponents: 3, Criterion: fitters.BIC, Family: mixture.Gaussian,
		Structure: mixture.Full, Seed: 42, MaxIterations: 50, Tolerance: 1e-8, Restarts: 2, Ridge: 1e-6,
		Start: &start, Labels: labels, Options: map[string]string{"mode": "fit"},
	}
	res, err := f.Fit(ctx, d, s, nil)
	if err != nil {
		t.Fatal(err)
	}
	rec.mu.Lock()
	gotData, gotSettings := rec.data, rec.settings
	rec.mu.Unlock()
	if !reflect.DeepEqual(gotData, d) {
		t.Error("the fitter received different data than was sent")
	}
	if !reflect.DeepEqual(gotSettings, s) {
		t.Errorf("the fitter received settings\n%+v\nwant\n%+v", gotSettings, s)
	}
	if want := oneComponent(d); !reflect.DeepEqual(res.Params, want) {
		t.Errorf("result parameters = %+v, want %+v", res.Params, want)
	}
	if !reflect.DeepEqual(res.Report, testReport()) {
		t.Errorf("result report = %+v, want %+v", res.Report, testReport())
	}
}

func TestEmptyData(t *testing.T) {
	rec := &recorder{}
	f, _ := connect(t, rec)
	if _, err := f.Fit(context.Background(), fitters.Data{Cols: 2}, fitters.Settings{Options: map[string]string{"mode": "fail", "code": "1", "message": "no rows"}}, nil); fitters.CodeOf(err) != fitters.InvalidArgument {
		t.Fatalf("error = %v", err)
	}
	rec.mu.Lock()
	defer rec.mu.Unlock()
	if rec.data.Rows != 0 || rec.data.Cols != 2 || len(rec.data.Values) != 0 || rec.data.Weights != nil || rec.settings.Labels != nil {
		t.Errorf("fitter received %+v / labels %v for empty data", rec.data, rec.settings.Labels)
	}
}

func TestProgressInOrderWithSlowReceiver(t *testing.T) {
	f, _ := connect(t, &recorder{})
	var got []fitters.Progress
	const n = 40
	_, err := f.Fit(context.Background(), pumpData(20), fitters.Settings{Options: map[string]string{"mode": "progress", "events": strconv.Itoa(n)}},
		func(p fitters.Progress) {
			time.Sleep(time.Millisecond) // a slow receiver
			got = append(got, p)
		})
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != n {
		t.Fatalf("received %d progress events, want %d", len(got), n)
	}
	for i, p := range got {
		want := fitters.Progress{Components: 2, Restart: 1, Iteration: i + 1, Objective: float64(-1000 + i + 1), Elapsed: time.Duration(i + 1)}
		if p != want {
			t.Fatalf("event %d = %+v, want %+v", i, p, want)
		}
	}
}

func TestProgressFromManyGoroutines(t *testing.T) {
	f, _ := connect(t, &recorder{})
	last := map[int]int{}
	count := 0
	_, err := f.Fit(context.Background(), pumpData(5), fitters.Settings{Options: map[string]string{"mode": "parallel"}},
		func(p fitters.Progress) {
			count++
			if prev, ok := last[p.Restart]; ok && p.Iteration != prev+1 {
				t.Errorf("restart %d: iteration %d after %d", p.Restart, p.Iteration, prev)
			}
			last[p.Restart] = p.Iteration
		})
	if err != nil {
		t.Fatal(err)
	}
	if count != 200 {
		t.Fatalf("received %d events, want 200", count)
	}
	// A progress call after the fit returned is dropped harmlessly.
	if _, err := f.Fit(context.Background(), pumpData(5), fitters.Settings{Options: map[string]string{"mode": "late"}}, func(fitters.Progress) {}); err != nil {
		t.Fatal(err)
	}
}

func TestCancellationReachesFitter(t *testing.T) {
	rec := &recorder{sawDone: make(chan struct{})}
	f, _ := connect(t, rec)
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	_, err := f.Fit(ctx, pumpData(10), fitters.Settings{Options: map[string]string{"mode": "block"}}, func(fitters.Progress) { cancel() })
	if fitters.CodeOf(err) != fitters.Canceled || !errors.Is(err, context.Canceled) {
		t.Fatalf("error = %v (code %v), want Canceled wrapping context.Canceled", err, fitters.CodeOf(err))
	}
	select {
	case <-rec.sawDone:
	case <-time.After(10 * time.Second):
		t.Fatal("the fitter never saw its context end")
	}

	ctx, cancel2 := context.WithTimeout(context.Background(), 50*time.Millisecond)
	defer cancel2()
	rec.sawDone = make(chan struct{})
	_, err = f.Fit(ctx, pumpData(10), fitters.Settings{Options: map[string]string{"mode": "block"}}, nil)
	if fitters.CodeOf(err) != fitters.DeadlineExceeded {
		t.Fatalf("error = %v, want DeadlineExceeded", err)
	}
}

func TestErrorCodesRoundTrip(t *testing.T) {
	f, _ := connect(t, &recorder{})
	codes := []fitters.Code{fitters.Internal, fitters.InvalidArgument, fitters.FailedPrecondition, fitters.Canceled, fitters.DeadlineExceeded, fitters.Unimplemented}
	for _, code := range codes {
		msg := fmt.Sprintf("row 17, column 2 (vibration): problem %d", code)
		_, err := f.Fit(context.Background(), pumpData(3), fitters.Settings{Options: map[string]string{"mode": "fail", "code": strconv.Itoa(int(code)), "message": msg}}, nil)
		var fe *fitters.Error
		if !errors.As(err, &fe) || fe.Code != code || err.Error() != msg {
			t.Errorf("code %d: error = %#v, want *fitters.Error{Code: %d} with message %q", code, err, code, msg)
		}
	}
	_, err := f.Fit(context.Background(), pumpData(3), fitters.Settings{Options: map[string]string{"mode": "nil"}}, nil)
	if fitters.CodeOf(err) != fitters.Internal || !strings.Contains(err.Error(), "neither a result nor an error") {
		t.Errorf("nil result: error = %v", err)
	}
}

func TestGRPCCodeMapping(t *testing.T) {
	want := map[fitters.Code]codes.Code{
		fitters.InvalidArgument: codes.InvalidArgument, fitters.FailedPrecondition: codes.FailedPrecondition,
		fitters.Canceled: codes.Canceled, fitters.DeadlineExceeded: codes.DeadlineExceeded,
		fitters.Unimplemented: codes.Unimplemented, fitters.Internal: codes.Internal, fitters.Code(42): codes.Internal,
	}
	for c, g := range want {
		if got := fitters.GRPCCode(c); got != g {
			t.Errorf("GRPCCode(%d) = %v, want %v", c, got, g)
		}
	}
}

func TestClientRejectsInconsistentData(t *testing.T) {
	f, _ := connect(t, &recorder{})
	d := pumpData(4)
	tests := []struct {
		name   string
		d      fitters.Data
		labels []int
		want   string
	}{
		{"values", fitters.Data{Rows: 4, Cols: 3, Values: d.Values[:11]}, nil, "data.values: has 11 values, want rows × cols = 4 × 3 = 12"},
		{"weights", fitters.Data{Rows: 4, Cols: 3, Values: d.Values, Weights: []float64{1, 2}}, nil, "data.weights: has 2 values, want one per row (4)"},
		{"labels", d, []int{0, 1}, "settings.labels: has 2 labels, want one per row (4)"},
		{"label range", d, []int{0, 1, 1 << 40, 0}, "settings.labels[2]"},
		{"negative", fitters.Data{Rows: -1, Cols: 3}, nil, "data: rows (-1) and cols (3) must not be negative"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := f.Fit(context.Background(), tt.d, fitters.Settings{Labels: tt.labels}, nil)
			if fitters.CodeOf(err) != fitters.InvalidArgument || !strings.Contains(err.Error(), tt.want) {
				t.Fatalf("error = %v, want InvalidArgument containing %q", err, tt.want)
			}
		})
	}
	if _, err := f.Fit(context.Background(), d, fitters.Settings{Components: math.MaxInt32 + 1}, nil); fitters.CodeOf(err) != fitters.InvalidArgument || !strings.Contains(err.Error(), "settings.components") {
		t.Errorf("oversized setting: error = %v", err)
	}
}

// TestServerRejectsMalformedStreams drives the plugin side with raw messages.
func TestServerRejectsMalformedStreams(t *testing.T) {
	_, stub := connect(t, &recorder{})
	settings := func(rows int64, cols int32, weights, labels bool) *fitterv1.FitRequest {
		return &fitterv1.FitRequest{Message: &fitterv1.FitRequest_Settings{Settings: &fitterv1.Settings{Rows: rows, Cols: cols, HasWeights: weights, HasLabels: labels}}}
	}
	chunk := func(rows int64, values, weights, labels []byte) *fitterv1.FitRequest {
		return &fitterv1.FitRequest{Message: &fitterv1.FitRequest_Chunk{Chunk: &fitterv1.DataChunk{Rows: rows, Values: values, Weights: weights, Labels: labels}}}
	}
	two := pbconv.EncodeFloat64s([]float64{1, 2})
	tests := []struct {
		name string
		msgs []*fitterv1.FitRequest
		want string
	}{
		{"nothing", nil, "fit stream closed before the settings message"},
		{"chunk first", []*fitterv1.FitRequest{chunk(1, two, nil, nil)}, "the first fit message must carry settings"},
		{"bad family", []*fitterv1.FitRequest{{Message: &fitterv1.FitRequest_Settings{Settings: &fitterv1.Settings{Family: 7}}}}, "settings.family: unknown family value 7"},
		{"negative rows", []*fitterv1.FitRequest{settings(-1, 2, false, false)}, "settings.rows: must not be negative, got -1"},
		{"negative cols", []*fitterv1.FitRequest{settings(1, -2, false, false)}, "settings.cols: must not be negative, got -2"},
		{"too large", []*fitterv1.FitRequest{settings(1<<40, 1<<20, false, false)}, "exceeds the protocol limit"},
		{"settings twice", []*fitterv1.FitRequest{settings(1, 2, false, false), settings(1, 2, false, false)}, "fit message 2: expected a data chunk after the settings"},
		{"empty chunk", []*fitterv1.FitRequest{settings(1, 2, false, false), chunk(0, nil, nil, nil)}, "chunk 0 (rows from 0): rows must be positive, got 0"},
		{"short values", []*fitterv1.FitRequest{settings(2, 2, false, false), chunk(1, two, nil, nil), chunk(1, two[:8], nil, nil)},
			"chunk 1 (rows from 1): values: has 8 bytes, want 16"},
		{"extra rows", []*fitterv1.FitRequest{settings(1, 2, false, false), chunk(1, two, nil, nil), chunk(1, two, nil, nil)}, "chunk 1 (rows from 1): 1 more rows exceed settings.rows = 1"},
		{"missing rows", []*fitterv1.FitRequest{settings(2, 2, false, false), chunk(1, two, nil, nil)}, "received 1 rows, but settings.rows = 2"},
		{"unexpected weights", []*fitterv1.FitRequest{settings(1, 2, false, false), chunk(1, two, two[:8], nil)}, "chunk 0 (rows from 0): carries weights but settings.has_weights is false"},
		{"short weights", []*fitterv1.FitRequest{settings(1, 2, true, false), chunk(1, two, nil, nil)}, "chunk 0 (rows from 0): weights: has 0 bytes, want 8"},
		{"unexpected labels", []*fitterv1.FitRequest{settings(1, 2, false, false), chunk(1, two, nil, []byte{0, 0, 0, 0})}, "carries labels but settings.has_labels is false"},
		{"short labels", []*fitterv1.FitRequest{settings(1, 2, false, true), chunk(1, two, nil, []byte{0, 0})}, "chunk 0 (rows from 0): labels: has 2 bytes, want 4"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
			defer cancel()
			stream, err := stub.Fit(ctx)
			if err != nil {
				t.Fatal(err)
			}
			for _, m := range tt.msgs {
				if err := stream.Send(m); err != nil {
					break // the server already ended the call; Recv has its status
				}
			}
			_ = stream.CloseSend()
			var recvErr error
			for recvErr == nil {
				_, recvErr = stream.Recv()
			}
			st, _ := status.FromError(recvErr)
			if st.Code() != codes.InvalidArgument || !strings.Contains(st.Message(), tt.want) {
				t.Fatalf("status = %v %q, want INVALID_ARGUMENT containing %q", st.Code(), st.Message(), tt.want)
			}
		})
	}
}

// TestChunking checks the chunk sizes and that the chunks reassemble exactly.
func TestChunking(t *testing.T) {
	tests := []struct {
		name            string
		rows, cols      int
		weights, labels bool
		wantChunks      int
	}{
		// 2 MiB / (5×8 + 8 + 4 bytes per row) = 40329 rows per chunk.
		{"many rows", 50000, 5, true, true, 2},
		{"exactly one chunk", (2 << 20) / 24, 3, false, false, 1},
		{"one row over", (2<<20)/24 + 1, 3, false, false, 2},
		{"rows wider than a chunk", 2, 300000, false, false, 2},
		{"no rows", 0, 4, true, false, 0},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			d := fitters.Data{Rows: tt.rows, Cols: tt.cols, Values: make([]float64, tt.rows*tt.cols)}
			for i := range d.Values {
				d.Values[i] = float64(i) * 0.5
			}
			var labels []int
			if tt.weights {
				d.Weights = make([]float64, tt.rows)
				for i := range d.Weights {
					d.Weights[i] = float64(i%7) + 0.25
				}
			}
			if tt.labels {
				labels = make([]int, tt.rows)
				for i := range labels {
					labels[i] = i % 5
				}
			}
			var msgs []*fitterv1.FitRequest
			send := func(m *fitterv1.FitRequest) error {
				msgs = append(msgs, m) // sendFit never reuses a sent message
				return nil
			}
			if err := fitters.SendFit(send, &fitterv1.Settings{}, d, labels); err != nil {
				t.Fatal(err)
			}
			if msgs[0].GetSettings() == nil {
				t.Fatal("first message is not the settings")
			}
			chunks := msgs[1:]
			if len(chunks) != tt.wantChunks {
				t.Fatalf("%d chunks, want %d", len(chunks), tt.wantChunks)
			}
			var values, weights []float64
			var gotLabels []int32
			for i, m := range chunks {
				c := m.GetChunk()
				size := len(c.GetValues()) + len(c.GetWeights()) + len(c.GetLabels())
				if c.GetRows() > 1 && size > fitters.ChunkBytes {
					t.Errorf("chunk %d: %d bytes for %d rows exceeds ChunkBytes", i, size, c.GetRows())
				}
				if proto.Size(m) > fitters.MaxMessageBytes {
					t.Errorf("chunk %d: message of %d bytes exceeds MaxMessageBytes", i, proto.Size(m))
				}
				v, _ := pbconv.DecodeFloat64s(c.GetValues())
				w, _ := pbconv.DecodeFloat64s(c.GetWeights())
				l, _ := pbconv.DecodeInt32s(c.GetLabels())
				values, weights, gotLabels = append(values, v...), append(weights, w...), append(gotLabels, l...)
			}
			if !slices.Equal(values, d.Values) {
				t.Error("values do not reassemble")
			}
			if tt.weights && !slices.Equal(weights, d.Weights) {
				t.Error("weights do not reassemble")
			}
			for i := range labels {
				if int(gotLabels[i]) != labels[i] {
					t.Fatalf("label %d = %d, want %d", i, gotLabels[i], labels[i])
				}
			}
		})
	}
}

// TestWireMatchesPbconv checks that the adapters' private conversions and the
// public ones in pbconv produce the same messages and values.
func TestWireMatchesPbconv(t *testing.T) {
	start := oneComponent(pumpData(10))
	s := fitters.Settings{
		Components: 2, MinComponents: 1, MaxComponents: 5, Criterion: fitters.AIC, Family: mixture.StudentT,
		Structure: mixture.Tied, Seed: 7, MaxIterations: -1, Tolerance: 1e-5, Restarts: 4, Ridge: -1,
		Start: &start, Labels: []int{1}, Options: map[string]string{"a": "b"},
	}
	a, err1 := fitters.WireSettingsToProto(s)
	b, err2 := pbconv.SettingsToProto(s)
	if err1 != nil || err2 != nil || !proto.Equal(a, b) {
		t.Fatalf("settings messages differ:\n%v\n%v (%v, %v)", a, b, err1, err2)
	}
	sa, err1 := fitters.WireSettingsFromProto(a)
	sb, err2 := pbconv.SettingsFromProto(a)
	if err1 != nil || err2 != nil || !reflect.DeepEqual(sa, sb) {
		t.Fatalf("settings differ:\n%+v\n%+v", sa, sb)
	}
	ra, rb := fitters.WireReportToProto(testReport()), pbconv.ReportToProto(testReport())
	if !proto.Equal(ra, rb) {
		t.Fatalf("report messages differ:\n%v\n%v", ra, rb)
	}
	rra, err1 := fitters.WireReportFromProto(ra)
	rrb, err2 := pbconv.ReportFromProto(ra)
	if err1 != nil || err2 != nil || !reflect.DeepEqual(rra, rrb) || !reflect.DeepEqual(rra, testReport()) {
		t.Fatalf("reports differ:\n%+v\n%+v", rra, rrb)
	}
	ia, ib := fitters.WireInfoToDescribe(testInfo()), pbconv.InfoToProto(testInfo())
	if ia.GetName() != ib.GetName() || ia.GetVersion() != ib.GetVersion() || ia.GetDescription() != ib.GetDescription() ||
		!reflect.DeepEqual(ia.GetFamilies(), ib.GetFamilies()) || !reflect.DeepEqual(ia.GetCovarianceStructures(), ib.GetCovarianceStructures()) ||
		len(ia.GetOptions()) != len(ib.GetOptions()) || !proto.Equal(ia.GetOptions()[0], ib.GetOptions()[0]) {
		t.Fatalf("info messages differ:\n%v\n%v", ia, ib)
	}
	if _, err := fitters.WireInfoFromDescribe(&fitterv1.DescribeResponse{Families: []mixdv1.Family{9}}); err == nil || err.Error() != "describe.families[0]: unknown family value 9" {
		t.Errorf("bad describe error = %v", err)
	}
	p := fitters.Progress{Components: 3, Restart: 2, Iteration: 11, Objective: -5.5, Elapsed: 1234}
	if got := fitters.WireProgressFromProto(fitters.WireProgressToProto(p)); got != p {
		t.Errorf("progress round trip = %+v, want %+v", got, p)
	}
}
