package testkit

import (
	"math"
	"testing"
	"time"
)

// TestFaithful checks the file against its published summary: 272 rows,
// eruptions from 1.6 to 5.1 minutes, waiting times from 43 to 96 minutes,
// mean waiting time 70.897 minutes (Azzalini and Bowman, 1990, as
// distributed in R's datasets package; summary(faithful) in R, from memory).
func TestFaithful(t *testing.T) {
	d := Faithful(t)
	if d.Rows != 272 || d.Cols != 2 || len(d.Values) != 544 {
		t.Fatalf("shape %d x %d, %d values", d.Rows, d.Cols, len(d.Values))
	}
	lo, hi := [2]float64{math.Inf(1), math.Inf(1)}, [2]float64{math.Inf(-1), math.Inf(-1)}
	var wait float64
	for i := 0; i < d.Rows; i++ {
		for j, v := range d.Row(i) {
			lo[j], hi[j] = math.Min(lo[j], v), math.Max(hi[j], v)
		}
		wait += d.Row(i)[1]
	}
	if lo != [2]float64{1.6, 43} || hi != [2]float64{5.1, 96} || math.Abs(wait/272-70.897) > 5e-4 {
		t.Fatalf("ranges %v..%v, mean waiting %v", lo, hi, wait/272)
	}
}

func TestProcessCPU(t *testing.T) {
	a := ProcessCPU()
	if a < 0 {
		t.Fatalf("negative CPU time %v", a)
	}
	end := time.Now().Add(20 * time.Millisecond)
	for time.Now().Before(end) {
	}
	if b := ProcessCPU(); b < a {
		t.Fatalf("CPU time went back from %v to %v", a, b)
	}
}
