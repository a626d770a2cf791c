package vb

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/mixd-dev/mixd/fitters"
)

// faithfulLabels reproduces the labelling rules of testdata/vb/make_reference.py.
func faithfulLabels(t testing.TB, data fitters.Data, rule string) []int {
	t.Helper()
	out := make([]int, data.Rows)
	for i := range out {
		row := data.Row(i)
		switch rule {
		case "eruptions_split_3":
			if row[0] >= 3 {
				out[i] = 1
			}
		case "waiting_thirds":
			switch {
			case row[1] >= 77:
				out[i] = 2
			case row[1] >= 60:
				out[i] = 1
			}
		case "row_mod_4":
			out[i] = i % 4
		default:
			t.Fatalf("unknown labelling rule %q", rule)
		}
	}
	return out
}

// blob describes one Gaussian component of a generated data set.
type blob struct {
	weight float64
	mean   []float64
	sd     []float64 // per-axis standard deviations
	rho    float64   // correlation of the first two axes
}

// generate draws n rows from a Gaussian mixture with a seeded generator.
func generate(n int, seed uint64, blobs []blob) (fitters.Data, []int) {
	rng := rand.New(rand.NewPCG(seed, 17))
	d := len(blobs[0].mean)
	vals := make([]float64, 0, n*d)
	labels := make([]int, n)
	for i := 0; i < n; i++ {
		u := rng.Float64()
		c := 0
		for acc := blobs[0].weight; u > acc && c < len(blobs)-1; {
			c++
			acc += blobs[c].weight
		}
		labels[i] = c
		b := blobs[c]
		z := make([]float64, d)
		for j := range z {
			z[j] = rng.NormFloat64()
		}
		if d >= 2 {
			z[1] = b.rho*z[0] + math.Sqrt(1-b.rho*b.rho)*z[1]
		}
		for j := range z {
			vals = append(vals, b.mean[j]+b.sd[j]*z[j])
		}
	}
	return fitters.Data{Rows: n, Cols: d, Values: vals}, labels
}

// relClose reports whether a and b agree within tol relative to scale.
func relClose(a, b, tol, scale float64) bool {
	return math.Abs(a-b) <= tol*scale
}

func maxAbs(v []float64) float64 {
	var m float64
	for _, x := range v {
		m = math.Max(m, math.Abs(x))
	}
	return m
}
