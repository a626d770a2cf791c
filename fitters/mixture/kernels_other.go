//go:build !amd64 || purego

package mixture

// Without the amd64 assembly the portable kernels of kernels.go run.
const (
	useSIMD    = false
	useSIMDExp = false
)

func expFMA4(dst, src *float64, n int) { panic("mixture: no vector kernels on this platform") }

func whitenColumn4(yi, y, li *float64, nj, n int, s float64, d2 *float64, first bool) {
	panic("mixture: no vector kernels on this platform")
}
