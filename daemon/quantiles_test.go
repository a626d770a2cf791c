package daemon

import (
	"math"
	"testing"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

func TestQuantileLevels(t *testing.T) {
	l := QuantileLevels
	if len(l) != 110 || l[0] != 0 || l[len(l)-1] != 1 {
		t.Fatalf("%d levels from %v to %v", len(l), l[0], l[len(l)-1])
	}
	for i := 1; i < len(l); i++ {
		if !(l[i] > l[i-1]) {
			t.Fatalf("levels[%d] = %v does not increase", i, l[i])
		}
	}
}

// The reference values are numpy.quantile(x, p) with numpy 2.4.6's default
// ("linear") method.
func TestTrainingQuantilesMatchNumpy(t *testing.T) {
	x := []float64{3.1, -2.0, 0.5, 7.25, 1.0, -0.75, 4.0}
	q := trainingQuantiles(x, nil)
	want := map[float64]float64{
		0: -2.0, 0.0001: -1.99925, 0.25: -0.125, 0.5: 1.0, 0.9: 5.300000000000001, 0.995: 7.152499999999999, 1: 7.25,
	}
	found := 0
	for i, p := range q.Levels {
		if w, ok := want[p]; ok {
			found++
			if !closeTo(q.LogDensities[i], w, 1e-14) {
				t.Errorf("quantile at %v = %v, numpy gives %v", p, q.LogDensities[i], w)
			}
		}
	}
	if found != len(want) {
		t.Fatalf("only %d of %d reference levels are in the grid", found, len(want))
	}
	if err := validQuantiles(q); err != nil {
		t.Fatal(err)
	}
}

func TestTrainingQuantilesWeightsAndInfinity(t *testing.T) {
	q := trainingQuantiles([]float64{1, 100, 2, math.Inf(-1)}, []float64{1, 0, 1, 1})
	if q.LogDensities[0] != -math.MaxFloat64 || q.LogDensities[len(q.LogDensities)-1] != 2 {
		t.Fatalf("min %v max %v; want -MaxFloat64 and 2 (the zero-weight row left out)", q.LogDensities[0], q.LogDensities[len(q.LogDensities)-1])
	}
	if err := validQuantiles(q); err != nil {
		t.Fatal(err)
	}
	if trainingQuantiles([]float64{1}, []float64{0}) != nil {
		t.Fatal("no rows of positive weight should give no quantiles")
	}
}

func TestPercentile(t *testing.T) {
	q := &mixdv1.DensityQuantiles{Levels: []float64{0, 0.1, 0.5, 0.5001, 1}, LogDensities: []float64{-10, -5, -2, -2, 0}}
	for _, c := range []struct{ ld, want float64 }{
		{-11, 0}, {math.Inf(-1), 0}, {-10, 0}, {-7.5, 5}, {-5, 10}, {-3.5, 30},
		{-2, 50}, // a plateau: the fraction strictly below is the lower level
		{-1, 75.005}, {0, 100}, {5, 100}, {math.Inf(1), 100},
	} {
		if got := percentile(q, c.ld); !closeTo(got, c.want, 1e-12) {
			t.Errorf("percentile(%v) = %v, want %v", c.ld, got, c.want)
		}
	}
	// Monotone in the log-density.
	prev := -1.0
	for ld := -12.0; ld <= 1; ld += 0.01 {
		p := percentile(q, ld)
		if p < prev {
			t.Fatalf("percentile decreases at %v: %v < %v", ld, p, prev)
		}
		prev = p
	}
	// Extreme spans stay in range.
	wide := &mixdv1.DensityQuantiles{Levels: []float64{0, 1}, LogDensities: []float64{-math.MaxFloat64, math.MaxFloat64}}
	if p := percentile(wide, 0); !(p >= 0 && p <= 100) {
		t.Fatalf("percentile over an overflowing span = %v", p)
	}
}

func TestValidQuantiles(t *testing.T) {
	for _, c := range []struct {
		name string
		q    *mixdv1.DensityQuantiles
	}{
		{"one level", &mixdv1.DensityQuantiles{Levels: []float64{0}, LogDensities: []float64{1}}},
		{"lengths", &mixdv1.DensityQuantiles{Levels: []float64{0, 1}, LogDensities: []float64{1}}},
		{"level range", &mixdv1.DensityQuantiles{Levels: []float64{0, 1.5}, LogDensities: []float64{1, 2}}},
		{"levels order", &mixdv1.DensityQuantiles{Levels: []float64{0.5, 0.5}, LogDensities: []float64{1, 2}}},
		{"values order", &mixdv1.DensityQuantiles{Levels: []float64{0, 1}, LogDensities: []float64{2, 1}}},
		{"values finite", &mixdv1.DensityQuantiles{Levels: []float64{0, 1}, LogDensities: []float64{math.NaN(), 1}}},
	} {
		if validQuantiles(c.q) == nil {
			t.Errorf("%s: accepted", c.name)
		}
	}
}
