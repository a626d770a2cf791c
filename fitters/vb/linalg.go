package vb

import "math"

// cholesky writes into l the lower factor of the symmetric positive-definite
// d×d row-major matrix a (only its lower triangle is read) and returns
// log|a|, or ok=false when a is not positive definite.
func cholesky(a, l []float64, d int) (logDet float64, ok bool) {
	for i := range l[:d*d] {
		l[i] = 0
	}
	for j := 0; j < d; j++ {
		s := a[j*d+j]
		for k := 0; k < j; k++ {
			s -= l[j*d+k] * l[j*d+k]
		}
		if !(s > 0) || math.IsInf(s, 0) {
			return 0, false
		}
		r := math.Sqrt(s)
		l[j*d+j] = r
		logDet += 2 * math.Log(r)
		for i := j + 1; i < d; i++ {
			t := a[i*d+j]
			for k := 0; k < j; k++ {
				t -= l[i*d+k] * l[j*d+k]
			}
			l[i*d+j] = t / r
		}
	}
	return logDet, true
}

// solveNorm2 returns |L⁻¹v|², the squared norm of the solution y of L y = v
// (forward substitution), using y as scratch.
func solveNorm2(l, v, y []float64, d int) float64 {
	var s float64
	for i := 0; i < d; i++ {
		t := v[i]
		row := l[i*d : i*d+i]
		for k, lv := range row {
			t -= lv * y[k]
		}
		t /= l[i*d+i]
		y[i] = t
		s += t * t
	}
	return s
}

// inverseLower writes into u the inverse L⁻¹ (lower triangular, row-major,
// zeros above the diagonal) of the lower triangular l.
func inverseLower(l, u []float64, d int) {
	for i := range u[:d*d] {
		u[i] = 0
	}
	for c := 0; c < d; c++ {
		for i := c; i < d; i++ {
			t := 0.0
			if i == c {
				t = 1
			}
			for k := c; k < i; k++ {
				t -= l[i*d+k] * u[k*d+c]
			}
			u[i*d+c] = t / l[i*d+i]
		}
	}
}

// whitenNorm2 returns |U v|² for the lower triangular row-major u (each
// component of U v is an independent dot product, summed with four partial
// sums in a fixed order, so the result is deterministic).
func whitenNorm2(u, v []float64, d int) float64 {
	var s float64
	for j := 0; j < d; j++ {
		row := u[j*d : j*d+j+1]
		vv := v[:len(row)]
		var s0, s1, s2, s3 float64
		l := 0
		for ; l+4 <= len(row); l += 4 {
			r4 := row[l : l+4 : l+4]
			v4 := vv[l : l+4 : l+4]
			s0 += r4[0] * v4[0]
			s1 += r4[1] * v4[1]
			s2 += r4[2] * v4[2]
			s3 += r4[3] * v4[3]
		}
		for ; l < len(row); l++ {
			s0 += row[l] * vv[l]
		}
		z := (s0 + s1) + (s2 + s3)
		s += z * z
	}
	return s
}

// inverseFromCholesky writes into out the inverse (L Lᵀ)⁻¹ = L⁻ᵀ L⁻¹ of the
// matrix whose lower Cholesky factor is l; scratch has d×d values.
func inverseFromCholesky(l, out, scratch []float64, d int) {
	inverseLower(l, scratch, d)
	// out = (L⁻¹)ᵀ L⁻¹.
	for a := 0; a < d; a++ {
		for b := 0; b <= a; b++ {
			var s float64
			for k := a; k < d; k++ {
				s += scratch[k*d+a] * scratch[k*d+b]
			}
			out[a*d+b] = s
			out[b*d+a] = s
		}
	}
}
