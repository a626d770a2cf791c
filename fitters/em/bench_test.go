package em

import (
	"context"
	"fmt"
	"math/rand/v2"
	"testing"
	"time"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/mixture"

	"github.com/mixd-dev/mixd/fitters/internal/testkit"
)

// benchData draws n rows of d features from eight well-spread Gaussian
// clusters (seeded).
func benchData(n, d int) fitters.Data {
	rng := rand.New(rand.NewPCG(uint64(n), uint64(d)))
	centres := make([][]float64, 8)
	for k := range centres {
		centres[k] = make([]float64, d)
		for j := range centres[k] {
			centres[k][j] = 10 * rng.NormFloat64()
		}
	}
	vals := make([]float64, n*d)
	for i := 0; i < n; i++ {
		c := centres[rng.IntN(8)]
		for j := 0; j < d; j++ {
			vals[i*d+j] = c[j] + (1+0.2*float64(j%3))*rng.NormFloat64()
		}
	}
	return fitters.Data{Rows: n, Cols: d, Values: vals}
}

// BenchmarkIteration times one EM iteration (fused E-step and statistics,
// then the M-step) at N=100000, K=8, full covariances.
func BenchmarkIteration(b *testing.B) {
	for _, d := range []int{2, 8, 32} {
		b.Run(fmt.Sprintf("N100000_K8_D%d_full", d), func(b *testing.B) {
			data := benchData(100000, d)
			p, err := newProblem(data)
			if err != nil {
				b.Fatal(err)
			}
			cfg, err := resolve(data, fitters.Settings{Components: 8, Structure: mixture.Full, Ridge: -1}, p)
			if err != nil {
				b.Fatal(err)
			}
			if err := p.prepare(cfg); err != nil {
				b.Fatal(err)
			}
			st, err := p.startState(cfg, 8, rand.New(rand.NewPCG(1, 2)))
			if err != nil {
				b.Fatal(err)
			}
			ps := newPass(p, 8)
			res := &runResult{}
			b.ResetTimer()
			start, cpu := time.Now(), testkit.ProcessCPU()
			iters := 0
			for b.Loop() {
				ps.run(st)
				p.mstep(st, ps, iters+1, res)
				iters++
			}
			b.ReportMetric(float64(time.Since(start).Microseconds())/1000/float64(iters), "ms/iter")
			b.ReportMetric(float64((testkit.ProcessCPU()-cpu).Microseconds())/1000/float64(iters), "cpu-ms/iter")
		})
	}
}

// BenchmarkFit times a whole default fit of a mid-sized data set.
func BenchmarkFit(b *testing.B) {
	data := benchData(20000, 4)
	for b.Loop() {
		if _, err := New().Fit(context.Background(), data, fitters.Settings{Components: 8, Restarts: 1, Seed: 1, Ridge: -1}, nil); err != nil {
			b.Fatal(err)
		}
	}
}
