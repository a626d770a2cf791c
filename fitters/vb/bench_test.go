package vb

import (
	"math/rand/v2"
	"testing"
	"time"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/mixture"

	"github.com/mixd-dev/mixd/fitters/internal/testkit"
)

// BenchmarkIteration times one full iteration (responsibilities and
// statistics in one pass, distribution update and bound) at N = 100 000,
// K = 8, D = 8, full covariances, from a k-means++ start.
func BenchmarkIteration(b *testing.B) {
	const n, k, d = 100000, 8, 8
	// Eight well-spread clusters, the same recipe as the em fitter's
	// benchmark, so the two figures are comparable.
	rng := rand.New(rand.NewPCG(n, d))
	centres := make([][]float64, k)
	for c := range centres {
		centres[c] = make([]float64, d)
		for j := range centres[c] {
			centres[c][j] = 10 * rng.NormFloat64()
		}
	}
	vals := make([]float64, n*d)
	for i := 0; i < n; i++ {
		c := centres[rng.IntN(k)]
		for j := 0; j < d; j++ {
			vals[i*d+j] = c[j] + (1+0.2*float64(j%3))*rng.NormFloat64()
		}
	}
	data := fitters.Data{Rows: n, Cols: d, Values: vals}
	p, err := newProblem(data)
	if err != nil {
		b.Fatal(err)
	}
	cfg, err := resolve(data, fitters.Settings{Components: k}, p)
	if err != nil {
		b.Fatal(err)
	}
	pr, err := cfg.priorFor(p, k)
	if err != nil {
		b.Fatal(err)
	}
	e := newEngine(p, pr, mixture.Full, k)
	seeds, err := p.kmeansPP(k, rand.New(rand.NewPCG(1, 2)))
	if err != nil {
		b.Fatal(err)
	}
	if err := e.oneHot(p.nearest(seeds)); err != nil {
		b.Fatal(err)
	}
	q, st := newPosterior(k, d, mixture.Full, dirichlet), newStats(k, d, mixture.Full)
	scr := make([]float64, 2*d*d+2*d)
	e.accumulate(st)
	if err := e.mstep(st, q); err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	b.ResetTimer()
	start, cpu := time.Now(), testkit.ProcessCPU()
	iters := 0
	for b.Loop() {
		iters++
		if err := e.estep(q, st); err != nil {
			b.Fatal(err)
		}
		if err := e.mstep(st, q); err != nil {
			b.Fatal(err)
		}
		_ = e.bound(st, q, scr)
	}
	b.ReportMetric(float64(time.Since(start).Microseconds())/1000/float64(iters), "ms/iter")
	b.ReportMetric(float64((testkit.ProcessCPU()-cpu).Microseconds())/1000/float64(iters), "cpu-ms/iter")
}
