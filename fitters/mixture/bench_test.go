package mixture

import (
	"fmt"
	"testing"
)

const benchRows = 100000

func benchSetup(b *testing.B, dim int) (*Model, []float64) {
	b.Helper()
	m := randomModel(b, Gaussian, Full, dim, 8, 77)
	x, _ := m.Sample(benchRows, 1)
	return m, x
}

// BenchmarkLogDensity measures LogDensity on N=100 000 rows, K=8 full
// covariances, D=2, 8, 32, reporting rows per second.
func BenchmarkLogDensity(b *testing.B) {
	for _, d := range []int{2, 8, 32} {
		b.Run(fmt.Sprintf("D=%d", d), func(b *testing.B) {
			m, x := benchSetup(b, d)
			out := make([]float64, benchRows)
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				if err := m.LogDensity(x, out); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(benchRows*b.N)/b.Elapsed().Seconds(), "rows/s")
		})
	}
}

// BenchmarkPosteriors measures Posteriors (log-density, posteriors and
// log-posteriors) on N=100 000 rows, K=8 full covariances, D=2, 8, 32.
func BenchmarkPosteriors(b *testing.B) {
	for _, d := range []int{2, 8, 32} {
		b.Run(fmt.Sprintf("D=%d", d), func(b *testing.B) {
			m, x := benchSetup(b, d)
			ld := make([]float64, benchRows)
			post := make([]float64, benchRows*m.K())
			lpost := make([]float64, benchRows*m.K())
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				if err := m.Posteriors(x, ld, post, lpost); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(benchRows*b.N)/b.Elapsed().Seconds(), "rows/s")
		})
	}
}
