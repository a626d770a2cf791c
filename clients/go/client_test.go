package mixdclient

import (
	"context"
	"errors"
	"fmt"
	"io"
	"net"
	"path/filepath"
	"slices"
	"sync"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// fakeServer is an in-process stand-in for the daemon that checks how the
// client splits and encodes its requests. Its "model" is simple arithmetic
// on each row (log-density = row sum, component = row index mod 3) so the
// client's reassembly of chunks can be checked value by value.
type fakeServer struct {
	mixdv1.UnimplementedMixtureServiceServer

	mu          sync.Mutex
	chunks      int // chunks received by the last streaming call
	specs       int // messages carrying a spec in the last fit
	block       chan struct{}
	notFoundFor string
}

// rowSums decodes a matrix and returns the sum of each row.
func rowSums(pb *mixdv1.Matrix) ([]float64, error) {
	m, err := DecodeMatrix(pb)
	if err != nil {
		return nil, status.Error(codes.InvalidArgument, err.Error())
	}
	out := make([]float64, m.Rows)
	for i := range out {
		for _, v := range m.Row(i) {
			out[i] += v
		}
	}
	return out, nil
}

func col(v []float64) *mixdv1.Matrix {
	return Matrix{Rows: len(v), Cols: 1, Values: v}.ToProto()
}

func (s *fakeServer) fit(recv func() (*mixdv1.FitSpec, *mixdv1.FitChunk, error)) (*mixdv1.Model, error) {
	var spec *mixdv1.FitSpec
	var rows int64
	var sum float64
	chunks, specs := 0, 0
	for {
		sp, ch, err := recv()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, err
		}
		if sp != nil {
			specs++
			spec = sp
		}
		if ch != nil {
			chunks++
			m, err := DecodeMatrix(ch.GetData())
			if err != nil {
				return nil, status.Error(codes.InvalidArgument, "chunk.data: "+err.Error())
			}
			if len(ch.GetData().GetValues()) > 0 {
				return nil, status.Error(codes.InvalidArgument, "client sent packed values")
			}
			rows += int64(m.Rows)
			for _, v := range m.Values {
				sum += v
			}
		}
	}
	s.mu.Lock()
	s.chunks, s.specs = chunks, specs
	s.mu.Unlock()
	if spec == nil {
		return nil, status.Error(codes.InvalidArgument, "spec: missing")
	}
	if spec.GetExpectedRows() != rows {
		return nil, status.Errorf(codes.InvalidArgument, "spec.expected_rows %d, received %d", spec.GetExpectedRows(), rows)
	}
	return &mixdv1.Model{
		Name:    "models/" + spec.GetModel(),
		Version: 1,
		Parameters: &mixdv1.Parameters{Dimension: 1, Components: []*mixdv1.Component{
			{Weight: 1, Mean: []float64{sum}, Covariance: []float64{1}},
		}},
		Report: &mixdv1.FitReport{TrainingRows: rows, Fitter: spec.GetFitter()},
	}, nil
}

func (s *fakeServer) Fit(stream grpc.BidiStreamingServer[mixdv1.FitRequest, mixdv1.FitResponse]) error {
	if err := stream.Send(&mixdv1.FitResponse{Event: &mixdv1.FitResponse_Job{Job: &mixdv1.FitJob{Name: "fitJobs/1"}}}); err != nil {
		return err
	}
	m, err := s.fit(func() (*mixdv1.FitSpec, *mixdv1.FitChunk, error) {
		r, err := stream.Recv()
		return r.GetSpec(), r.GetChunk(), err
	})
	if err != nil {
		return err
	}
	for i := 1; i <= 3; i++ {
		ev := &mixdv1.FitProgress{Iteration: int32(i), Objective: -float64(10 - i)}
		if err := stream.Send(&mixdv1.FitResponse{Event: &mixdv1.FitResponse_Progress{Progress: ev}}); err != nil {
			return err
		}
	}
	return stream.Send(&mixdv1.FitResponse{Event: &mixdv1.FitResponse_Model{Model: m}})
}

func (s *fakeServer) CreateFitJob(stream grpc.ClientStreamingServer[mixdv1.CreateFitJobRequest, mixdv1.CreateFitJobResponse]) error {
	m, err := s.fit(func() (*mixdv1.FitSpec, *mixdv1.FitChunk, error) {
		r, err := stream.Recv()
		return r.GetSpec(), r.GetChunk(), err
	})
	if err != nil {
		return err
	}
	return stream.SendAndClose(&mixdv1.CreateFitJobResponse{Job: &mixdv1.FitJob{
		Name: "fitJobs/2", Model: m.GetName(), Rows: m.GetReport().GetTrainingRows(),
		State: mixdv1.FitJobState_FIT_JOB_STATE_QUEUED,
	}})
}

func (s *fakeServer) WatchFitJob(req *mixdv1.WatchFitJobRequest, stream grpc.ServerStreamingServer[mixdv1.WatchFitJobResponse]) error {
	job := &mixdv1.FitJob{Name: req.GetName(), State: mixdv1.FitJobState_FIT_JOB_STATE_RUNNING}
	if err := stream.Send(&mixdv1.WatchFitJobResponse{Event: &mixdv1.WatchFitJobResponse_Job{Job: job}}); err != nil {
		return err
	}
	failed := &mixdv1.FitJob{Name: req.GetName(), State: mixdv1.FitJobState_FIT_JOB_STATE_FAILED,
		ErrorCode: int32(codes.Unavailable), ErrorMessage: "fitter em exited"}
	return stream.Send(&mixdv1.WatchFitJobResponse{Event: &mixdv1.WatchFitJobResponse_Job{Job: failed}})
}

func (s *fakeServer) Score(_ context.Context, req *mixdv1.ScoreRequest) (*mixdv1.ScoreResponse, error) {
	if req.GetModel() == s.notFoundFor {
		return nil, status.Errorf(codes.NotFound, "model %q not found", req.GetModel())
	}
	sums, err := rowSums(req.GetRows())
	if err != nil {
		return nil, err
	}
	s.mu.Lock()
	s.chunks = 0
	s.mu.Unlock()
	return &mixdv1.ScoreResponse{Model: "models/" + req.GetModel(), Version: 4, LogDensities: col(sums), Percentiles: col(sums)}, nil
}

func (s *fakeServer) ScoreStream(stream grpc.BidiStreamingServer[mixdv1.ScoreStreamRequest, mixdv1.ScoreStreamResponse]) error {
	n := 0
	var model string
	var comp bool
	for {
		req, err := stream.Recv()
		if err == io.EOF {
			s.mu.Lock()
			s.chunks = n
			s.mu.Unlock()
			return nil
		}
		if err != nil {
			return err
		}
		if n == 0 {
			model, comp = req.GetModel(), req.GetIncludeComponentLogDensities()
		} else if req.GetModel() != "" {
			return status.Error(codes.InvalidArgument, "model repeated after the first chunk")
		}
		n++
		sums, err := rowSums(req.GetRows())
		if err != nil {
			return err
		}
		resp := &mixdv1.ScoreStreamResponse{Model: "models/" + model, Version: 4, LogDensities: col(sums), Percentiles: col(sums)}
		if comp {
			two := make([]float64, 0, 2*len(sums))
			for _, v := range sums {
				two = append(two, v, -v)
			}
			resp.ComponentLogDensities = Matrix{Rows: len(sums), Cols: 2, Values: two}.ToProto()
		}
		for _, v := range sums {
			resp.LogLikelihood += v
		}
		if err := stream.Send(resp); err != nil {
			return err
		}
	}
}

func (s *fakeServer) ClassifyStream(stream grpc.BidiStreamingServer[mixdv1.ClassifyStreamRequest, mixdv1.ClassifyStreamResponse]) error {
	n, row := 0, 0
	for {
		req, err := stream.Recv()
		if err == io.EOF {
			s.mu.Lock()
			s.chunks = n
			s.mu.Unlock()
			return nil
		}
		if err != nil {
			return err
		}
		n++
		sums, err := rowSums(req.GetRows())
		if err != nil {
			return err
		}
		labels := make([]int32, len(sums))
		conf := make([]bool, len(sums))
		for i := range sums {
			labels[i] = int32(row % 3)
			conf[i] = row%2 == 0
			row++
		}
		if err := stream.Send(&mixdv1.ClassifyStreamResponse{
			Components: &mixdv1.Labels{LittleEndian: EncodeInt32s(labels)}, MaxPosteriors: col(sums), Confident: conf,
		}); err != nil {
			return err
		}
	}
}

func (s *fakeServer) SampleStream(req *mixdv1.SampleStreamRequest, stream grpc.ServerStreamingServer[mixdv1.SampleStreamResponse]) error {
	const step = 1000
	for lo := int64(0); lo < req.GetCount(); lo += step {
		hi := min(lo+step, req.GetCount())
		vals := make([]float64, 0, 2*(hi-lo))
		labels := make([]int32, 0, hi-lo)
		for i := lo; i < hi; i++ {
			vals = append(vals, float64(i), float64(req.GetSeed()))
			labels = append(labels, int32(i%2))
		}
		if err := stream.Send(&mixdv1.SampleStreamResponse{Model: "models/" + req.GetModel(),
			Rows:       &mixdv1.Matrix{Rows: hi - lo, Cols: 2, Values: vals},
			Components: &mixdv1.Labels{Values: labels}}); err != nil {
			return err
		}
	}
	return nil
}

func (s *fakeServer) GetModel(ctx context.Context, req *mixdv1.GetModelRequest) (*mixdv1.GetModelResponse, error) {
	if s.block != nil {
		select {
		case <-s.block:
		case <-ctx.Done():
			return nil, status.FromContextError(ctx.Err()).Err()
		}
	}
	return &mixdv1.GetModelResponse{Model: &mixdv1.Model{Name: "models/" + req.GetName(), Version: req.GetVersion()}}, nil
}

func (s *fakeServer) ListModels(_ context.Context, req *mixdv1.ListModelsRequest) (*mixdv1.ListModelsResponse, error) {
	// Three pages of two models each.
	page := 0
	if req.GetPageToken() != "" {
		if _, err := fmt.Sscanf(req.GetPageToken(), "p%d", &page); err != nil {
			return nil, status.Error(codes.InvalidArgument, "page_token: bad")
		}
	}
	resp := &mixdv1.ListModelsResponse{Models: []*mixdv1.Model{
		{Name: fmt.Sprintf("models/m%d", 2*page)}, {Name: fmt.Sprintf("models/m%d", 2*page+1)},
	}}
	if page < 2 {
		resp.NextPageToken = fmt.Sprintf("p%d", page+1)
	}
	return resp, nil
}

// startFake serves s on network/address and returns a client with small chunks.
func startFake(t *testing.T, s *fakeServer, network, address, target string, opts ...Option) *Client {
	t.Helper()
	lis, err := net.Listen(network, address)
	if err != nil {
		t.Fatal(err)
	}
	srv := grpc.NewServer()
	mixdv1.RegisterMixtureServiceServer(srv, s)
	go func() { _ = srv.Serve(lis) }()
	t.Cleanup(srv.Stop)
	if target == "" {
		target = lis.Addr().String()
	}
	c, err := Dial(target, append([]Option{WithChunkBytes(1024)}, opts...)...)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = c.Close() })
	return c
}

// testMatrix returns rows×cols values 0, 1, 2, ... row-major.
func testMatrix(rows, cols int) Matrix {
	m := Matrix{Rows: rows, Cols: cols, Values: make([]float64, rows*cols)}
	for i := range m.Values {
		m.Values[i] = float64(i)
	}
	return m
}

func TestFitChunks(t *testing.T) {
	s := &fakeServer{}
	c := startFake(t, s, "tcp", "127.0.0.1:0", "")
	data := testMatrix(1000, 3) // 24 000 bytes: 24 chunks of 42 rows at 1 KiB
	var iters []int32
	var job string
	model, err := c.Fit(context.Background(), "pumps", data, FitOptions{Fitter: "em", OnJob: func(j *mixdv1.FitJob) { job = j.GetName() }},
		func(p *mixdv1.FitProgress) { iters = append(iters, p.GetIteration()) })
	if err != nil {
		t.Fatal(err)
	}
	if got := model.GetReport().GetTrainingRows(); got != 1000 {
		t.Errorf("training rows = %d, want 1000", got)
	}
	// Sum of 0..2999.
	if got := model.GetParameters().GetComponents()[0].GetMean()[0]; got != 2999*3000/2 {
		t.Errorf("server saw sum %v, want %v", got, 2999*3000/2)
	}
	if !slices.Equal(iters, []int32{1, 2, 3}) {
		t.Errorf("progress iterations = %v", iters)
	}
	if job != "fitJobs/1" {
		t.Errorf("job = %q", job)
	}
	s.mu.Lock()
	chunks, specs := s.chunks, s.specs
	s.mu.Unlock()
	if want := (1000 + 41) / 42; chunks != want || specs != 1 {
		t.Errorf("server got %d chunks and %d specs, want %d and 1", chunks, specs, want)
	}
}

func TestFitRejectsMismatchedExtras(t *testing.T) {
	c := startFake(t, &fakeServer{}, "tcp", "127.0.0.1:0", "")
	_, err := c.Fit(context.Background(), "x", testMatrix(4, 2), FitOptions{RowWeights: []float64{1, 2}}, nil)
	if err == nil {
		t.Fatal("Fit accepted 2 row weights for 4 rows")
	}
	_, err = c.Fit(context.Background(), "x", Matrix{Rows: 2, Cols: 2, Values: []float64{1}}, FitOptions{}, nil)
	if err == nil {
		t.Fatal("Fit accepted a matrix whose values do not match its shape")
	}
}

func TestStartFitAndWatch(t *testing.T) {
	s := &fakeServer{}
	c := startFake(t, s, "tcp", "127.0.0.1:0", "")
	job, err := c.StartFit(context.Background(), "pumps", testMatrix(500, 2), FitOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if job.GetName() != "fitJobs/2" || job.GetRows() != 500 {
		t.Fatalf("job = %v", job)
	}
	var states []mixdv1.FitJobState
	_, err = c.WatchJob(context.Background(), job.GetName(), func(j *mixdv1.FitJob) { states = append(states, j.GetState()) }, nil)
	var jerr *JobError
	if !errors.As(err, &jerr) {
		t.Fatalf("WatchJob err = %v, want a *JobError", err)
	}
	if status.Code(err) != codes.Unavailable {
		t.Errorf("status.Code = %v, want Unavailable", status.Code(err))
	}
	if len(states) != 2 || states[1] != mixdv1.FitJobState_FIT_JOB_STATE_FAILED {
		t.Errorf("states = %v", states)
	}
}

func TestScoreUnaryAndStream(t *testing.T) {
	s := &fakeServer{}
	c := startFake(t, s, "tcp", "127.0.0.1:0", "")
	for _, rows := range []int{0, 1, 42, 43, 1000} {
		t.Run(fmt.Sprint(rows), func(t *testing.T) {
			data := testMatrix(rows, 3)
			res, err := c.Score(context.Background(), "m", data, ScoreOptions{ComponentLogDensities: rows > 42})
			if err != nil {
				t.Fatal(err)
			}
			if len(res.LogDensities) != rows || len(res.Percentiles) != rows {
				t.Fatalf("got %d log-densities and %d percentiles for %d rows", len(res.LogDensities), len(res.Percentiles), rows)
			}
			total := 0.0
			for i, v := range res.LogDensities {
				want := float64(9*i + 3)
				if v != want {
					t.Fatalf("row %d: log-density %v, want %v", i, v, want)
				}
				total += want
			}
			if res.Model != "models/m" || res.Version != 4 {
				t.Errorf("model %q version %d", res.Model, res.Version)
			}
			if rows > 42 {
				if res.LogLikelihood != total {
					t.Errorf("log-likelihood %v, want %v", res.LogLikelihood, total)
				}
				cm := res.ComponentLogDensities
				if cm.Rows != rows || cm.Cols != 2 || cm.Row(rows - 1)[1] != -res.LogDensities[rows-1] {
					t.Errorf("component log-densities %d×%d", cm.Rows, cm.Cols)
				}
				s.mu.Lock()
				chunks := s.chunks
				s.mu.Unlock()
				if want := (rows + 41) / 42; chunks != want {
					t.Errorf("stream carried %d chunks, want %d", chunks, want)
				}
			}
		})
	}
}

func TestClassifyStream(t *testing.T) {
	c := startFake(t, &fakeServer{}, "tcp", "127.0.0.1:0", "")
	res, err := c.Classify(context.Background(), "m", testMatrix(300, 4), ClassifyOptions{MinPosterior: 0.5})
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Components) != 300 || len(res.Confident) != 300 || len(res.MaxPosteriors) != 300 {
		t.Fatalf("lengths %d %d %d", len(res.Components), len(res.Confident), len(res.MaxPosteriors))
	}
	for i := range 300 {
		if res.Components[i] != i%3 || res.Confident[i] != (i%2 == 0) || res.MaxPosteriors[i] != float64(16*i+6) {
			t.Fatalf("row %d: component %d confident %v max %v", i, res.Components[i], res.Confident[i], res.MaxPosteriors[i])
		}
	}
}

func TestSampleStream(t *testing.T) {
	c := startFake(t, &fakeServer{}, "tcp", "127.0.0.1:0", "")
	res, err := c.Sample(context.Background(), "m", 5500, SampleOptions{Seed: 9})
	if err != nil {
		t.Fatal(err)
	}
	if res.Rows.Rows != 5500 || res.Rows.Cols != 2 || len(res.Components) != 5500 {
		t.Fatalf("got %d×%d rows and %d labels", res.Rows.Rows, res.Rows.Cols, len(res.Components))
	}
	for i := range 5500 {
		if r := res.Rows.Row(i); r[0] != float64(i) || r[1] != 9 || res.Components[i] != i%2 {
			t.Fatalf("row %d = %v component %d", i, r, res.Components[i])
		}
	}
}

func TestErrorsKeepStatus(t *testing.T) {
	c := startFake(t, &fakeServer{notFoundFor: "gone"}, "tcp", "127.0.0.1:0", "")
	_, err := c.Score(context.Background(), "gone", testMatrix(1, 1), ScoreOptions{})
	if status.Code(err) != codes.NotFound {
		t.Fatalf("status.Code(%v) = %v, want NotFound", err, status.Code(err))
	}
	if msg := StatusOf(err).Message(); msg != `model "gone" not found` {
		t.Errorf("message = %q", msg)
	}
}

func TestDefaultDeadline(t *testing.T) {
	s := &fakeServer{block: make(chan struct{})}
	defer close(s.block)
	c := startFake(t, s, "tcp", "127.0.0.1:0", "", WithTimeout(50*time.Millisecond))
	_, err := c.GetModel(context.Background(), "m", 0)
	if status.Code(err) != codes.DeadlineExceeded {
		t.Fatalf("GetModel without a deadline: %v, want DeadlineExceeded", err)
	}
}

func TestListModelsFollowsPages(t *testing.T) {
	c := startFake(t, &fakeServer{}, "tcp", "127.0.0.1:0", "")
	ms, err := c.ListModels(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, m := range ms {
		names = append(names, m.GetName())
	}
	want := []string{"models/m0", "models/m1", "models/m2", "models/m3", "models/m4", "models/m5"}
	if !slices.Equal(names, want) {
		t.Fatalf("names = %v, want %v", names, want)
	}
}

func TestDialUnixSocket(t *testing.T) {
	sock := filepath.Join(t.TempDir(), "mixd.sock")
	c := startFake(t, &fakeServer{}, "unix", sock, "unix:"+sock)
	m, err := c.GetModel(context.Background(), "pumps", 3)
	if err != nil {
		t.Fatal(err)
	}
	if m.GetName() != "models/pumps" || m.GetVersion() != 3 {
		t.Fatalf("model = %v", m)
	}
}

func TestUnreachableIsUnavailable(t *testing.T) {
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	addr := lis.Addr().String()
	_ = lis.Close()
	c, err := Dial(addr, WithTimeout(5*time.Second))
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	_, err = c.ListFitters(context.Background())
	if status.Code(err) != codes.Unavailable {
		t.Fatalf("err = %v, want Unavailable", err)
	}
}
