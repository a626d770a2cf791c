package mixture

import "math"

// The two innermost loops of the evaluation, in portable Go. On amd64 with
// AVX2 and FMA they run four rows per instruction in assembly
// (kernels_amd64.s) with the same floating-point operations in the same
// order per row, so the results are bit-identical whichever runs; the
// tests check it on every build that has both.

// Compile-time check: the assembly steps from one column of a block to the
// next by 128 rows × 8 bytes.
var _ = [1]struct{}{}[blockRows-128]

// whitenColumn sets, for rows r < n, v = yi[r] − Σ_j li[j]·y[j·blockRows+r]
// (the products subtracted one after another in j order, each rounded
// before the subtraction), v = v·s, yi[r] = v and d2[r] = v·v (first) or
// d2[r] + v·v.
func whitenColumn(yi, y, li []float64, n int, s float64, d2 []float64, first bool) {
	r := 0
	if useSIMD && n >= 4 && len(li) > 0 {
		// Bounds the assembly relies on.
		_ = yi[n-1]
		_ = d2[n-1]
		_ = y[(len(li)-1)*blockRows+n-1]
		n4 := n &^ 3
		whitenColumn4(&yi[0], &y[0], &li[0], len(li), n4, s, &d2[0], first)
		r = n4
	} else if useSIMD && n >= 4 {
		_ = yi[n-1]
		_ = d2[n-1]
		n4 := n &^ 3
		whitenColumn4(&yi[0], &y[0], nil, 0, n4, s, &d2[0], first)
		r = n4
	}
	whitenColumnGo(yi, y, li, r, n, s, d2, first)
}

// whitenColumnGo is whitenColumn for rows lo ≤ r < n in Go. The explicit
// float64 conversions keep the compiler from fusing a multiplication and
// a subtraction into one FMA (which would round once instead of twice).
func whitenColumnGo(yi, y, li []float64, lo, n int, s float64, d2 []float64, first bool) {
	for r := lo; r < n; r++ {
		v := yi[r]
		for j, l := range li {
			v -= float64(l * y[j*blockRows+r])
		}
		v *= s
		yi[r] = v
		if first {
			d2[r] = float64(v * v)
		} else {
			d2[r] += float64(v * v)
		}
	}
}

// expSIMDMin and expSIMDMax bound the arguments the assembly exponential
// computes exactly as math.Exp does (outside them math.Exp takes its
// overflow, subnormal or special-value paths).
const (
	expSIMDMin = -708
	expSIMDMax = 708
)

// expInto sets dst[i] = math.Exp(src[i]) for every i, bit for bit.
func expInto(dst, src []float64) {
	dst = dst[:len(src)]
	i := 0
	if useSIMD && useSIMDExp && len(src) >= 4 {
		n4 := len(src) &^ 3
		expFMA4(&dst[0], &src[0], n4)
		for j, v := range src[:n4] {
			if !(v >= expSIMDMin && v <= expSIMDMax) {
				dst[j] = math.Exp(v)
			}
		}
		i = n4
	}
	for ; i < len(src); i++ {
		dst[i] = math.Exp(src[i])
	}
}
