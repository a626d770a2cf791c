package mixture

import (
	"math"
	"math/rand/v2"

	"gonum.org/v1/gonum/stat/distuv"
)

// pcgStream is the fixed second word of every sampler's PCG state.
const pcgStream = 0x6d69786473616d70 // "mixdsamp"

// maxRedraws bounds the redraws of a row that overflowed float64.
const maxRedraws = 64

// Sampler draws rows from a Model. Successive Next calls continue one
// stream: drawing 10 rows and then 20 gives the same 30 rows as drawing 30 at
// once. A Sampler is not safe for concurrent use.
type Sampler struct {
	m   *Model
	rng *rand.Rand
	chi []distuv.ChiSquared // per component (Student-t only)
	z   []float64
}

// Sampler returns a sampler whose stream is fixed by seed (math/rand/v2 PCG
// seeded with seed and a fixed constant).
func (m *Model) Sampler(seed uint64) *Sampler {
	rng := rand.New(rand.NewPCG(seed, pcgStream))
	s := &Sampler{m: m, rng: rng, z: make([]float64, m.dim)}
	if m.family == StudentT {
		s.chi = make([]distuv.ChiSquared, m.k)
		for i, v := range m.df {
			s.chi[i] = distuv.ChiSquared{K: v, Src: rng}
		}
	}
	return s
}

// Next fills len(labels) rows: labels[i] is the component drawn for row i and
// x[i*Dim:(i+1)*Dim] the row. For each row it draws one uniform to pick the
// component by weight, Dim standard normals z and, for Student-t, one χ²_ν
// variate w; the row is μ + L z (Gaussian) or μ + sqrt(ν/w)·L z (Student-t).
// A row that overflows float64 (possible only for extreme scales or for
// very small ν) is redrawn, up to 64 times, and then clamped to
// ±math.MaxFloat64. Next panics if len(x) != len(labels)·Dim: that is a
// programming error.
func (s *Sampler) Next(x []float64, labels []int) {
	m := s.m
	d := m.dim
	if len(x) != len(labels)*d {
		panic("mixture: Sampler.Next: len(x) must equal len(labels) × Dim")
	}
	total := m.cumW[m.k-1]
	for i := range labels {
		u := s.rng.Float64() * total
		c := m.k - 1
		for a, cw := range m.cumW {
			if u < cw {
				c = a
				break
			}
		}
		for m.logW[c] == math.Inf(-1) { // rounding at the top end: last positive weight
			c--
		}
		labels[i] = c
		row := x[i*d : (i+1)*d]
		for attempt := 0; ; attempt++ {
			s.draw(c, row)
			if finiteRow(row) {
				break
			}
			if attempt == maxRedraws {
				for a, v := range row {
					if v != v {
						row[a] = m.means[c*d+a]
					} else {
						row[a] = math.Max(-math.MaxFloat64, math.Min(math.MaxFloat64, v))
					}
				}
				break
			}
		}
	}
}

// draw writes one row from component c into row.
func (s *Sampler) draw(c int, row []float64) {
	m := s.m
	d := m.dim
	z := s.z
	for a := range z {
		z[a] = s.rng.NormFloat64()
	}
	scale := 1.0
	if m.family == StudentT {
		w := 0.0 // ν/2 underflows to 0 only for ν < 1e-323: the draw is 0 too
		if s.chi[c].K/2 > 0 {
			w = s.chi[c].Rand()
		}
		scale = math.Sqrt(m.df[c] / w)
	}
	mu := m.means[c*d : (c+1)*d]
	l := m.factor(c)
	for a := 0; a < d; a++ {
		acc := 0.0
		la := l[packedRow(a) : packedRow(a)+a+1]
		for b, v := range la {
			acc += v * z[b]
		}
		row[a] = mu[a] + scale*acc
	}
}

func finiteRow(row []float64) bool {
	for _, v := range row {
		if v-v != 0 {
			return false
		}
	}
	return true
}

// Sample draws n rows with a new Sampler(seed) and returns them row-major
// with their component labels. It panics if n is negative.
func (m *Model) Sample(n int, seed uint64) (x []float64, labels []int) {
	if n < 0 {
		panic("mixture: Sample: negative row count")
	}
	x = make([]float64, n*m.dim)
	labels = make([]int, n)
	m.Sampler(seed).Next(x, labels)
	return x, labels
}
