package mixdclient

import (
	"context"
	"io"
	"net"
	"sync"
	"testing"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// maskServer is a stand-in daemon for the missing-value calls. Score
// returns, per row, the number of observed values (from the mask it
// received); Predict returns the rows with unobserved values replaced by
// -1, log-density first_row + i, and draws filled with first_row + i; it
// records the first_row of every call.
type maskServer struct {
	mixdv1.UnimplementedMixtureServiceServer
	mu        sync.Mutex
	firstRows []int64
	chunkRows []int64
	compare   *mixdv1.CompareModelsRequest
}

func observedCounts(rows *mixdv1.Matrix, mask []byte) ([]float64, error) {
	m, err := DecodeMatrix(rows)
	if err != nil {
		return nil, err
	}
	out := make([]float64, m.Rows)
	for i := range out {
		for j := 0; j < m.Cols; j++ {
			if len(mask) == 0 || mask[i*m.Cols+j] == 1 {
				out[i]++
			}
		}
	}
	return out, nil
}

func (s *maskServer) Score(_ context.Context, req *mixdv1.ScoreRequest) (*mixdv1.ScoreResponse, error) {
	n, err := observedCounts(req.GetRows(), req.GetObservedMask())
	if err != nil {
		return nil, status.Error(codes.InvalidArgument, err.Error())
	}
	return &mixdv1.ScoreResponse{LogDensities: col(n), Percentiles: col(n)}, nil
}

func (s *maskServer) ScoreStream(stream grpc.BidiStreamingServer[mixdv1.ScoreStreamRequest, mixdv1.ScoreStreamResponse]) error {
	for {
		req, err := stream.Recv()
		if err == io.EOF {
			return nil
		}
		if err != nil {
			return err
		}
		n, err := observedCounts(req.GetRows(), req.GetObservedMask())
		if err != nil {
			return status.Error(codes.InvalidArgument, err.Error())
		}
		if err := stream.Send(&mixdv1.ScoreStreamResponse{LogDensities: col(n), Percentiles: col(n)}); err != nil {
			return err
		}
	}
}

func (s *maskServer) GetModel(_ context.Context, req *mixdv1.GetModelRequest) (*mixdv1.GetModelResponse, error) {
	return &mixdv1.GetModelResponse{Model: &mixdv1.Model{Name: "models/" + req.GetName(), Version: 7,
		Parameters: &mixdv1.Parameters{Components: []*mixdv1.Component{{}, {}}}}}, nil
}

func (s *maskServer) Predict(_ context.Context, req *mixdv1.PredictRequest) (*mixdv1.PredictResponse, error) {
	if req.GetVersion() != 7 {
		return nil, status.Errorf(codes.InvalidArgument, "version %d not pinned", req.GetVersion())
	}
	m, err := DecodeMatrix(req.GetRows())
	if err != nil {
		return nil, status.Error(codes.InvalidArgument, err.Error())
	}
	s.mu.Lock()
	s.firstRows = append(s.firstRows, req.GetFirstRow())
	s.chunkRows = append(s.chunkRows, int64(m.Rows))
	s.mu.Unlock()
	mask := req.GetObservedMask()
	means := append([]float64(nil), m.Values...)
	ld := make([]float64, m.Rows)
	var draws []float64
	for i := 0; i < m.Rows; i++ {
		ld[i] = float64(req.GetFirstRow() + int64(i))
		for j := 0; j < m.Cols; j++ {
			if len(mask) > 0 && mask[i*m.Cols+j] == 0 {
				means[i*m.Cols+j] = -1
			}
		}
		for a := 0; a < int(req.GetDraws())*m.Cols; a++ {
			draws = append(draws, ld[i])
		}
	}
	resp := &mixdv1.PredictResponse{Model: "models/" + req.GetModel(), Version: 7,
		Means: Matrix{Rows: m.Rows, Cols: m.Cols, Values: means}.ToProto(), LogDensities: col(ld)}
	if req.GetDraws() > 0 {
		resp.Draws = Matrix{Rows: m.Rows * int(req.GetDraws()), Cols: m.Cols, Values: draws}.ToProto()
	}
	if req.GetIncludeStandardDeviations() {
		resp.StandardDeviations = Matrix{Rows: m.Rows, Cols: m.Cols, Values: make([]float64, m.Rows*m.Cols)}.ToProto()
	}
	return resp, nil
}

func (s *maskServer) CompareModels(_ context.Context, req *mixdv1.CompareModelsRequest) (*mixdv1.CompareModelsResponse, error) {
	s.mu.Lock()
	s.compare = req
	s.mu.Unlock()
	return &mixdv1.CompareModelsResponse{KlForward: 0.5, KlForwardStandardError: 0.01}, nil
}

// startMask serves s on 127.0.0.1 and returns a client with 1 KiB chunks.
func startMask(t *testing.T, s *maskServer) *Client {
	t.Helper()
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	srv := grpc.NewServer()
	mixdv1.RegisterMixtureServiceServer(srv, s)
	go func() { _ = srv.Serve(lis) }()
	t.Cleanup(srv.Stop)
	c, err := Dial(lis.Addr().String(), WithChunkBytes(1024))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = c.Close() })
	return c
}

// checkerMask marks value i observed unless i % 3 == 1.
func checkerMask(n int) []bool {
	obs := make([]bool, n)
	for i := range obs {
		obs[i] = i%3 != 1
	}
	return obs
}

// TestScoreSendsMaskPerChunk checks that the mask travels with its rows in
// the unary call and in every chunk of a stream.
func TestScoreSendsMaskPerChunk(t *testing.T) {
	c := startMask(t, &maskServer{})
	for _, rows := range []int{5, 500} { // 1 KiB chunks: 500 rows of 3 values stream
		data := testMatrix(rows, 3)
		obs := checkerMask(rows * 3)
		res, err := c.Score(context.Background(), "m", data, ScoreOptions{Observed: obs})
		if err != nil {
			t.Fatal(err)
		}
		for i, v := range res.LogDensities {
			want := 0.0
			for _, o := range obs[i*3 : i*3+3] {
				if o {
					want++
				}
			}
			if v != want {
				t.Fatalf("%d rows: row %d saw %v observed values, mask has %v", rows, i, v, want)
			}
		}
	}
	if _, err := c.Score(context.Background(), "m", testMatrix(2, 3), ScoreOptions{Observed: make([]bool, 5)}); err == nil {
		t.Error("a mask of the wrong length was sent")
	}
}

// TestPredictSplitsWithFirstRow checks that a batch larger than one message
// is split into Predict calls whose first_row is the offset of their first
// row, with the version pinned, and reassembled in order.
func TestPredictSplitsWithFirstRow(t *testing.T) {
	s := &maskServer{}
	c := startMask(t, s)
	rows := 100
	data := testMatrix(rows, 2)
	obs := checkerMask(rows * 2)
	res, err := c.Predict(context.Background(), "m", data, obs, PredictOptions{Draws: 2, StdDevs: true})
	if err != nil {
		t.Fatal(err)
	}
	if len(s.firstRows) < 2 {
		t.Fatalf("%d calls; the batch should have been split", len(s.firstRows))
	}
	next := int64(0)
	for i, fr := range s.firstRows {
		if fr != next {
			t.Fatalf("call %d: first_row %d, want %d (first rows %v, rows %v)", i, fr, next, s.firstRows, s.chunkRows)
		}
		next += s.chunkRows[i]
	}
	if res.Model != "models/m" || res.Version != 7 || res.Means.Rows != rows || res.Draws.Rows != 2*rows || res.StdDevs.Rows != rows {
		t.Fatalf("result %s@%d means %d rows, draws %d rows, sd %d rows", res.Model, res.Version, res.Means.Rows, res.Draws.Rows, res.StdDevs.Rows)
	}
	for i := 0; i < rows; i++ {
		if res.LogDensities[i] != float64(i) || res.Draws.Row(2*i + 1)[0] != float64(i) {
			t.Fatalf("row %d: first_row-based values %v %v", i, res.LogDensities[i], res.Draws.Row(2*i+1))
		}
		for j := 0; j < 2; j++ {
			want := data.Row(i)[j]
			if !obs[i*2+j] {
				want = -1
			}
			if res.Means.Row(i)[j] != want {
				t.Fatalf("row %d column %d: %v, want %v", i, j, res.Means.Row(i)[j], want)
			}
		}
	}
	if _, err := c.Predict(context.Background(), "m", data, obs, PredictOptions{Draws: -1}); err == nil {
		t.Error("negative draws accepted")
	}
}

func TestCompareModelsSendsRequest(t *testing.T) {
	s := &maskServer{}
	c := startMask(t, s)
	resp, err := c.CompareModels(context.Background(), "pumps", 1, "", 2, CompareOptions{Samples: 500, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	if resp.KlForward != 0.5 || s.compare.GetModel() != "pumps" || s.compare.GetVersion() != 1 ||
		s.compare.GetOtherVersion() != 2 || s.compare.GetSamples() != 500 || s.compare.GetSeed() != 3 {
		t.Errorf("request %v, response %v", s.compare, resp)
	}
}
