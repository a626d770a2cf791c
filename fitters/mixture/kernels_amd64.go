//go:build amd64 && !purego

package mixture

import (
	"math"

	"golang.org/x/sys/cpu"
)

// useSIMD selects the AVX2 kernels of kernels_amd64.s.
var useSIMD = cpu.X86.HasAVX2

// useSIMDExp selects the vector exponential. It computes exactly what
// math.Exp computes when math.Exp takes its FMA path (processors with AVX
// and FMA), so it is used only on those, and only if it agrees with
// math.Exp bit for bit on a sample of arguments (a guard should math.Exp
// ever choose its path differently, e.g. with GODEBUG=cpu.fma=off).
var useSIMDExp = useSIMD && cpu.X86.HasFMA && expAgrees()

//go:noescape
func expFMA4(dst, src *float64, n int)

//go:noescape
func whitenColumn4(yi, y, li *float64, nj, n int, s float64, d2 *float64, first bool)

// expAgrees compares expFMA4 with math.Exp over [-708, 708].
func expAgrees() bool {
	const n = 4096
	src := make([]float64, n)
	dst := make([]float64, n)
	for i := range src {
		// A spread of arguments with varied low-order bits.
		src[i] = expSIMDMin + float64(i)*(expSIMDMax-expSIMDMin)/(n-1)*(1-1e-9*float64(i%7))
	}
	src[0], src[1], src[2], src[3] = 0, -0.5, -1e-300, -37.5
	expFMA4(&dst[0], &src[0], n)
	for i, v := range src {
		if math.Float64bits(dst[i]) != math.Float64bits(math.Exp(v)) {
			return false
		}
	}
	return true
}
