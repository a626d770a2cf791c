//go:build !amd64 || purego || amd64.v3

package em

// Without the amd64 kernel the row-by-row E-step runs.
const useSIMD = false

func mahaRows(out, y, u *float64, d, n, stride int) { panic("em: no vector kernel on this platform") }

func addOuterPacked(s, dk *float64, d int, r float64) { panic("em: no vector kernel on this platform") }
