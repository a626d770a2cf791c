package daemon

import (
	"context"
	"math/rand/v2"
	"testing"

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
