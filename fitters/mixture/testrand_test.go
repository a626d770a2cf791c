package mixture

import "math/rand/v2"

// testRand is a seeded source for building test models.
type testRand struct{ *rand.Rand }

func newTestRand(seed uint64) testRand { return testRand{rand.New(rand.NewPCG(seed, 99))} }

// spd returns a random symmetric positive-definite dim×dim matrix A Aᵀ/dim + 0.3 I.
func (r testRand) spd(dim int) []float64 {
	a := make([]float64, dim*dim)
	for i := range a {
		a[i] = r.NormFloat64()
	}
	s := make([]float64, dim*dim)
	for i := 0; i < dim; i++ {
		for j := 0; j <= i; j++ {
			v := 0.0
			for l := 0; l < dim; l++ {
				v += a[i*dim+l] * a[j*dim+l]
			}
			v /= float64(dim)
			if i == j {
				v += 0.3
			}
			s[i*dim+j], s[j*dim+i] = v, v
		}
	}
	return s
}
