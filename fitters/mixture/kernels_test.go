package mixture

import (
	"math"
	"testing"
)

// TestExpIntoMatchesMathExp: expInto returns math.Exp's value bit for bit,
// over the whole range the evaluation uses (arguments ≤ 0, down to and past
// underflow), the vector range's edges and special values.
func TestExpIntoMatchesMathExp(t *testing.T) {
	r := newTestRand(21)
	var src []float64
	for i := 0; i < 20000; i++ {
		src = append(src, -r.Float64()*750, -r.Float64()*40, -r.ExpFloat64(), r.NormFloat64()*300)
	}
	src = append(src, 0, math.Copysign(0, -1), -1e-300, 1e-300, expSIMDMin, expSIMDMax,
		math.Nextafter(expSIMDMin, -1000), math.Nextafter(expSIMDMax, 1000), -708.39, -708.4, -709, -745.1,
		-745.2, -746, -1e6, 709.7, 709.8, 1e6, math.Inf(-1), math.Inf(1), math.NaN(), 37, -37)
	for _, off := range []int{0, 1, 2, 3} { // tails of every length
		s := src[off:]
		dst := make([]float64, len(s))
		expInto(dst, s)
		for i, v := range s {
			want := math.Exp(v)
			if math.Float64bits(dst[i]) != math.Float64bits(want) && !(math.IsNaN(want) && math.IsNaN(dst[i])) {
				t.Fatalf("expInto(%v) = %v (%#x), math.Exp %v (%#x) [vector kernel %v]",
					v, dst[i], math.Float64bits(dst[i]), want, math.Float64bits(want), useSIMDExp)
			}
		}
	}
}

// TestWhitenColumnKernelsAgree: the vector kernel and the portable loop
// give bit-identical columns and distances for every row count of a block.
func TestWhitenColumnKernelsAgree(t *testing.T) {
	if !useSIMD {
		t.Skip("no vector kernel on this machine")
	}
	r := newTestRand(22)
	for _, nj := range []int{0, 1, 3, 4, 7, 31} {
		for _, n := range []int{1, 3, 4, 5, 15, 16, 17, 33, 127, 128} {
			y := make([]float64, (nj+1)*blockRows)
			for i := range y {
				y[i] = r.NormFloat64() * math.Pow(10, float64(r.IntN(6)-3))
			}
			li := make([]float64, nj)
			for i := range li {
				li[i] = r.NormFloat64()
			}
			s := 1 / (0.1 + r.Float64())
			for _, first := range []bool{true, false} {
				d2a := make([]float64, blockRows)
				for i := range d2a {
					d2a[i] = r.Float64()
				}
				ya := append([]float64(nil), y...)
				yb := append([]float64(nil), y...)
				d2b := append([]float64(nil), d2a...)
				whitenColumn(ya[nj*blockRows:nj*blockRows+n], ya, li, n, s, d2a, first)
				whitenColumnGo(yb[nj*blockRows:nj*blockRows+n], yb, li, 0, n, s, d2b, first)
				for i := range ya {
					if math.Float64bits(ya[i]) != math.Float64bits(yb[i]) {
						t.Fatalf("nj %d n %d first %v: y[%d] = %v, portable %v", nj, n, first, i, ya[i], yb[i])
					}
				}
				for i := range d2a {
					if math.Float64bits(d2a[i]) != math.Float64bits(d2b[i]) {
						t.Fatalf("nj %d n %d first %v: d2[%d] = %v, portable %v", nj, n, first, i, d2a[i], d2b[i])
					}
				}
			}
		}
	}
}

// TestBlockMatchesRowByRow: log-densities, posteriors and labels of a batch
// equal, bit for bit, the row-by-row computation with logSumExpParts (the
// log-sum-exp checked against gonum's) and math.Exp, for both families.
func TestBlockMatchesRowByRow(t *testing.T) {
	for _, f := range []Family{Gaussian, StudentT} {
		m := randomModel(t, f, Full, 6, 5, 31)
		rows, k := 3*blockRows+9, m.K()
		x, _ := m.Sample(rows, 8)
		x[0] += 1e5 // a row far from every component
		ld, post, lpost := make([]float64, rows), make([]float64, rows*k), make([]float64, rows*k)
		must(t, m.Posteriors(x, ld, post, lpost))
		ld2 := make([]float64, rows)
		must(t, m.LogDensity(x, ld2))
		comp := make([]float64, rows*k)
		must(t, m.ComponentLogDensity(x, comp))
		for i := 0; i < rows; i++ {
			row := append([]float64(nil), comp[i*k:(i+1)*k]...)
			for a := range row {
				row[a] += m.logW[a]
			}
			mx, logS := logSumExpParts(row)
			if want := logS + mx; math.Float64bits(ld[i]) != math.Float64bits(want) || math.Float64bits(ld2[i]) != math.Float64bits(want) {
				t.Fatalf("%v row %d: log-density %v / %v, row by row %v", f, i, ld[i], ld2[i], want)
			}
			for a, v := range row {
				lp := (v - mx) - logS
				if math.IsInf(mx, -1) {
					lp = m.farLogPost[a]
				}
				if math.Float64bits(lpost[i*k+a]) != math.Float64bits(lp) || math.Float64bits(post[i*k+a]) != math.Float64bits(math.Exp(lp)) {
					t.Fatalf("%v row %d component %d: log-posterior %v, posterior %v; row by row %v, %v", f, i, a, lpost[i*k+a], post[i*k+a], lp, math.Exp(lp))
				}
			}
		}
	}
}
