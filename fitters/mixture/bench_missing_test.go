package mixture

import (
	"fmt"
	"testing"
)

// BenchmarkMarginal measures Marginal (log-densities and posteriors) on
// N=100 000 rows, K=8 full covariances, D=8 and 32, with one feature
// missing in every row: "shared" has one pattern for the whole batch (the
// usual case: one sensor down), "random" has each value missing with
// probability 0.2 (up to one pattern per row, the worst case).
func BenchmarkMarginal(b *testing.B) {
	for _, d := range []int{8, 32} {
		for _, kind := range []string{"shared", "random"} {
			b.Run(fmt.Sprintf("D=%d/%s", d, kind), func(b *testing.B) {
				m, x := benchSetup(b, d)
				obs := make([]bool, len(x))
				r := newTestRand(5)
				for i := range obs {
					if kind == "shared" {
						obs[i] = i%d != 1
					} else {
						obs[i] = r.Float64() >= 0.2
					}
				}
				out := MarginalOutput{LogDensity: make([]float64, benchRows), Posteriors: make([]float64, benchRows*m.K())}
				b.ResetTimer()
				for i := 0; i < b.N; i++ {
					if err := m.Marginal(x, obs, &out); err != nil {
						b.Fatal(err)
					}
				}
				b.ReportMetric(float64(benchRows*b.N)/b.Elapsed().Seconds(), "rows/s")
			})
		}
	}
}

// BenchmarkConditional measures Conditional with standard deviations on
// N=100 000 rows, K=8, D=8, with two features missing in every row.
func BenchmarkConditional(b *testing.B) {
	m, x := benchSetup(b, 8)
	obs := make([]bool, len(x))
	for i := range obs {
		obs[i] = i%8 > 1
	}
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := m.Conditional(x, obs, ConditionalOptions{StdDev: true}); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(benchRows*b.N)/b.Elapsed().Seconds(), "rows/s")
}
