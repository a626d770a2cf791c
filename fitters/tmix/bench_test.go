package tmix

import (
	"context"
	"math/rand/v2"
	"testing"
	"time"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

// benchModel is a seeded K-component, D-dimensional Student-t mixture with
// well-separated means and random full scale matrices.
func benchModel(tb testing.TB, k, d int) *mixture.Model {
	tb.Helper()
	rng := rand.New(rand.NewPCG(42, 7))
	p := mixture.Params{Dim: d, Family: mixture.StudentT, Structure: mixture.Full}
	for c := 0; c < k; c++ {
		mean := make([]float64, d)
		for j := range mean {
			mean[j] = 8 * rng.NormFloat64()
		}
		a := make([]float64, d*d)
		for i := range a {
			a[i] = rng.NormFloat64()
		}
		cov := make([]float64, d*d)
		for i := 0; i < d; i++ {
			for j := 0; j < d; j++ {
				var s float64
				for l := 0; l < d; l++ {
					s += a[i*d+l] * a[j*d+l]
				}
				cov[i*d+j] = s / float64(d)
			}
			cov[i*d+i] += 0.5
		}
		p.Components = append(p.Components, mixture.Component{Weight: 1 / float64(k), Mean: mean, Cov: cov, DF: 3 + float64(c)})
	}
	m, err := mixture.New(p)
	if err != nil {
		tb.Fatal(err)
	}
	return m
}

// benchIteration times one iteration (CM-step for weights, means and scale
// matrices, degrees-of-freedom step, E-step with the statistics of the next
// CM-step) at N = 100 000 rows, K = 8, D = 8, full scale matrices.
func benchIteration(b *testing.B, opts map[string]string) {
	const n, k, d = 100000, 8, 8
	data, _ := sample(benchModel(b, k, d), n, 3)
	prob, err := newProblem(data)
	if err != nil {
		b.Fatal(err)
	}
	cfg, err := resolve(data, fitters.Settings{Components: k, Seed: 1, Ridge: -1, Options: opts}, prob)
	if err != nil {
		b.Fatal(err)
	}
	if err := prob.prepare(cfg); err != nil {
		b.Fatal(err)
	}
	st, err := prob.startState(cfg, k, rand.New(rand.NewPCG(cfg.seed, seedStream)))
	if err != nil {
		b.Fatal(err)
	}
	ps := newPass(prob, k)
	res := &runResult{}
	iterate := func(it int) {
		reseeded, _ := prob.mstep(st, ps, it, res)
		prob.dfStep(st, ps, reseeded)
		ps.estep(st)
	}
	ps.estep(st)
	for it := 1; it <= 3; it++ { // leave the k-means start behind
		iterate(it)
	}
	b.ResetTimer()
	began := time.Now()
	for i := 0; b.Loop(); i++ {
		iterate(4 + i)
	}
	b.ReportMetric(float64(n)*float64(b.N)/time.Since(began).Seconds(), "rows/s")
}

// BenchmarkECMEIteration is one iteration of the default method (ECME, one
// shared ν).
func BenchmarkECMEIteration(b *testing.B) { benchIteration(b, nil) }

// BenchmarkECMEPerComponentIteration is one ECME iteration with a ν per
// component (K one-dimensional searches).
func BenchmarkECMEPerComponentIteration(b *testing.B) {
	benchIteration(b, map[string]string{optSharing: valPerComp})
}

// BenchmarkFixedDFIteration is one iteration with ν fixed (no search): the
// cost of the E-step and CM-step alone.
func BenchmarkFixedDFIteration(b *testing.B) { benchIteration(b, map[string]string{optDF: "5"}) }

// BenchmarkFit is a whole default fit of 20 000 rows, K = 3, D = 3.
func BenchmarkFit(b *testing.B) {
	data, _ := sample(pumpModel(b, 3, []float64{3, 6, 12}), 20000, 9)
	for b.Loop() {
		if _, err := New().Fit(context.Background(), data, fitters.Settings{Components: 3, Seed: 1, Restarts: 1}, nil); err != nil {
			b.Fatal(err)
		}
	}
}
