package daemon

import (
	"context"
	"math/rand/v2"
	"testing"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// benchModel stores a 4-component, 8-dimensional Gaussian mixture.
func benchModel(b *testing.B) (*Server, *mixdv1.Matrix) {
	const k, d, rows = 4, 8, 10_000
	st := newMemStore()
	p := &mixdv1.Parameters{Dimension: d, Family: mixdv1.Family_FAMILY_GAUSSIAN, CovarianceStructure: mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_FULL}
	for c := range k {
		mean := make([]float64, d)
		for j := range mean {
			mean[j] = float64(c * j)
		}
		cov := identity(d)
		cov[1], cov[d] = 0.3, 0.3
		p.Components = append(p.Components, &mixdv1.Component{Weight: 1.0 / k, Mean: mean, Covariance: cov})
	}
	if _, err := st.Create(context.Background(), &mixdv1.Model{Name: "models/bench", Parameters: p}); err != nil {
		b.Fatal(err)
	}
	s, err := NewServer(Options{Store: st, Host: newFakeHost()})
	if err != nil {
		b.Fatal(err)
	}
	b.Cleanup(s.Close)
	r := rand.New(rand.NewPCG(1, 2))
	x := make([]float64, rows*d)
	for i := range x {
		x[i] = 3 * r.NormFloat64()
	}
	return s, encodeMatrix(rows, d, x, true)
}

// BenchmarkScore measures Score of 10 000 rows × 8 columns (little-endian
// input) on a cached model, without the transport.
func BenchmarkScore(b *testing.B) {
	s, rows := benchModel(b)
	req := &mixdv1.ScoreRequest{Model: "bench", Rows: rows}
	ctx := context.Background()
	b.SetBytes(int64(len(rows.LittleEndian)))
	for b.Loop() {
		if _, err := s.Score(ctx, req); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkClassify measures Classify with posteriors of 10 000 rows × 8 columns.
func BenchmarkClassify(b *testing.B) {
	s, rows := benchModel(b)
	req := &mixdv1.ClassifyRequest{Model: "bench", Rows: rows, IncludePosteriors: true}
	ctx := context.Background()
	b.SetBytes(int64(len(rows.LittleEndian)))
	for b.Loop() {
		if _, err := s.Classify(ctx, req); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkDecodeMatrix measures decoding and checking little-endian rows.
func BenchmarkDecodeMatrix(b *testing.B) {
	_, rows := benchModel(b)
	b.SetBytes(int64(len(rows.LittleEndian)))
	for b.Loop() {
		if _, err := decodeMatrix("rows", rows, rowLimit{1 << 30, ""}, 1<<20); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkOneRowOverGRPC measures one call of a single row through the
// whole serving path over loopback TCP, beside a health check on the same
// connection (the transport's floor): the request-id and default-deadline
// interceptors, panic recovery, decoding, the cached model, encoding. The
// client runs in the same process, so ns/op and allocs/op count both ends;
// compare the two sub-benchmarks, not absolute times.
func BenchmarkOneRowOverGRPC(b *testing.B) {
	s, rows := benchModel(b)
	lines, _ := runWith(b, Config{Store: s.store, DefaultTimeout: DefaultCallTimeout})
	conn := dialWith(b, lines[ListeningPrefix], grpc.WithTransportCredentials(insecure.NewCredentials()))
	c := mixdv1.NewMixtureServiceClient(conn)
	h := healthpb.NewHealthClient(conn)
	one := &mixdv1.Matrix{Rows: 1, Cols: rows.Cols, LittleEndian: rows.LittleEndian[:8*rows.Cols]}
	ctx := context.Background()
	b.Run("classify", func(b *testing.B) {
		req := &mixdv1.ClassifyRequest{Model: "bench", Rows: one}
		b.ReportAllocs()
		for b.Loop() {
			if _, err := c.Classify(ctx, req); err != nil {
				b.Fatal(err)
			}
		}
	})
	b.Run("health", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			if _, err := h.Check(ctx, &healthpb.HealthCheckRequest{}); err != nil {
				b.Fatal(err)
			}
		}
	})
}
