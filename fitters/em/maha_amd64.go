//go:build amd64 && !purego && !amd64.v3

package em

import "golang.org/x/sys/cpu"

// useSIMD selects the blocked E-step with the AVX2 kernel of
// maha_amd64.s. (Not with GOAMD64=v3, where the compiler may fuse the
// row-by-row E-step's multiply-adds, so that its results would differ.)
var useSIMD = cpu.X86.HasAVX2

//go:noescape
func mahaRows(out, y, u *float64, d, n, stride int)

//go:noescape
func addOuterPacked(s, dk *float64, d int, r float64)
