package seed

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"github.com/mixd-dev/mixd/fitters/internal/prep"
)

// stations returns rows of flow (m³/h) and motor current (A) around three
// pumping regimes, from a seeded generator.
func stations(n int) *prep.Rows {
	rng := rand.New(rand.NewPCG(11, 3))
	centres := [][2]float64{{40, 8}, {120, 25}, {200, 41}}
	x := make([]float64, 0, 2*n)
	for i := 0; i < n; i++ {
		c := centres[i%3]
		x = append(x, c[0]+3*rng.NormFloat64(), c[1]+rng.NormFloat64())
	}
	return &prep.Rows{N: n, D: 2, X: x}
}

func TestDist2(t *testing.T) {
	r := &prep.Rows{N: 2, D: 2, X: []float64{1, 10, 4, 6}}
	// ((1−4)·2)² + ((10−6)·0.5)² = 36 + 4.
	if got := Dist2(r, []float64{2, 0.5}, 0, 1); got != 40 {
		t.Fatalf("Dist2 = %v, want 40", got)
	}
}

// TestKMeansPPDraws: one draw per seed and nothing else, so that a fitter's
// later draws do not depend on how the seeding went; the same rng state
// gives the same seeds.
func TestKMeansPPDraws(t *testing.T) {
	r := stations(300)
	scale := []float64{1.0 / 60, 1.0 / 12}
	for _, k := range []int{1, 3, 7} {
		rng := rand.New(rand.NewPCG(5, 9))
		seeds, ok := KMeansPP(r, scale, k, rng)
		if !ok || len(seeds) != k {
			t.Fatalf("k=%d: seeds %v ok %v", k, seeds, ok)
		}
		ref := rand.New(rand.NewPCG(5, 9))
		for i := 0; i < k; i++ {
			ref.Float64()
		}
		if a, b := rng.Uint64(), ref.Uint64(); a != b {
			t.Fatalf("k=%d: the rng moved by other than %d draws", k, k)
		}
		again, _ := KMeansPP(r, scale, k, rand.New(rand.NewPCG(5, 9)))
		if !slices.Equal(seeds, again) {
			t.Fatalf("k=%d: %v then %v", k, seeds, again)
		}
		if got := slices.Compact(slices.Sorted(slices.Values(seeds))); len(got) != k {
			t.Fatalf("k=%d: a row was picked twice: %v", k, seeds)
		}
	}
}

// TestKMeansPPSpreads: with three well separated regimes, three seeds land
// in three different regimes nearly always; k-means++ picks a far row with
// probability proportional to its squared distance (Arthur and
// Vassilvitskii, 2007).
func TestKMeansPPSpreads(t *testing.T) {
	r := stations(300)
	scale := []float64{1.0 / 60, 1.0 / 12}
	spread := 0
	for s := uint64(0); s < 50; s++ {
		seeds, ok := KMeansPP(r, scale, 3, rand.New(rand.NewPCG(s, 1)))
		if !ok {
			t.Fatal("not seeded")
		}
		regimes := map[int]bool{}
		for _, i := range seeds {
			regimes[i%3] = true
		}
		if len(regimes) == 3 {
			spread++
		}
	}
	if spread < 45 {
		t.Fatalf("only %d of 50 seedings found all three regimes", spread)
	}
}

func TestKMeansPPWeights(t *testing.T) {
	r := stations(90)
	r.W = make([]float64, r.N)
	for i := 0; i < r.N; i += 10 {
		r.W[i] = 1
	}
	for s := uint64(0); s < 20; s++ {
		seeds, ok := KMeansPP(r, []float64{1, 1}, 4, rand.New(rand.NewPCG(s, 2)))
		if !ok {
			t.Fatal("not seeded")
		}
		for _, i := range seeds {
			if r.W[i] == 0 {
				t.Fatalf("seed %d: row %d has zero weight", s, i)
			}
		}
	}
}

// TestKMeansPPShort: when the rows of positive weight hold fewer distinct
// values than k, ok is false and the seeds found so far are returned.
func TestKMeansPPShort(t *testing.T) {
	r := &prep.Rows{N: 5, D: 1, X: []float64{2, 2, 7, 2, 7}}
	seeds, ok := KMeansPP(r, []float64{1}, 3, rand.New(rand.NewPCG(1, 1)))
	if ok || len(seeds) != 2 || r.X[seeds[0]] == r.X[seeds[1]] {
		t.Fatalf("seeds %v ok %v", seeds, ok)
	}
}

func TestNearest(t *testing.T) {
	r := &prep.Rows{N: 5, D: 1, X: []float64{0, 1, 2, 3, 4}}
	// Seeds at rows 4 (x=4) and 0 (x=0): row 2 is as far from both and goes
	// to the lower index, seed 0 (row 4).
	got := Nearest(r, []float64{1}, []int{4, 0})
	if want := []int{1, 1, 0, 0, 0}; !slices.Equal(got, want) {
		t.Fatalf("labels %v, want %v", got, want)
	}
	if d := Dist2(r, []float64{math.Sqrt2}, 0, 4); math.Abs(d-32) > 1e-13 {
		t.Fatalf("scaled distance %v", d)
	}
}
