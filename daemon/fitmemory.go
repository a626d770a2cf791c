package daemon

import (
	"math"
	"strconv"
)

// fitOverheadBytes is the fixed part of EstimateFitBytes: the plugin
// process's runtime and buffers.
const fitOverheadBytes = 32 << 20

// EstimateFitBytes estimates the peak memory, in bytes, of a fit of n rows
// of d columns with (at most) k components, in the daemon and the fitter
// process together. It counts 8-byte floats:
//
//	daemon:  the training rows (n·d) and row weights (n)
//	fitter:  its copy of the rows (n·d) and weights (n), one n·d scratch
//	         matrix, the per-row log-densities and posteriors (2·n·k),
//	         and per component a covariance, its Cholesky factor and a
//	         scatter matrix (3·k·d²)
//
// plus 32 MiB for the fitter process itself. It is an estimate for
// admission, not an account: the estimators keep about this much (EM;
// the variational and Student-t fitters keep a few more n·k arrays, which
// the margin of a cap should allow for). The result saturates at
// math.MaxInt64.
func EstimateFitBytes(n, d, k int64) int64 {
	fn, fd, fk := float64(n), float64(d), float64(k)
	v := 8*(3*fn*fd+2*fn+2*fn*fk+3*fk*fd*fd) + fitOverheadBytes
	if v >= math.MaxInt64 {
		return math.MaxInt64
	}
	return int64(v)
}

// checkMemory refuses an upload once the fit's estimated memory with n
// rows exceeds Limits.MaxFitMemory.
func (u *uploader) checkMemory(field string, n int64) error {
	st := u.plan.settings
	k := int64(max(st.Components, st.MaxComponents, 1))
	est := EstimateFitBytes(n, int64(u.cols), k)
	if est <= u.lim.MaxFitMemory {
		return nil
	}
	return exhaustedf("%s: a fit of %d rows × %d columns with %d components needs about %s, above the limit of %s (mixd serve --max-fit-memory)",
		field, n, u.cols, k, formatBytes(est), formatBytes(u.lim.MaxFitMemory))
}

// formatBytes writes a byte count in KiB, MiB or GiB with one decimal.
func formatBytes(b int64) string {
	unit, div := "KiB", float64(1<<10)
	switch {
	case b >= 1<<30:
		unit, div = "GiB", 1<<30
	case b >= 1<<20:
		unit, div = "MiB", 1<<20
	}
	return strconv.FormatFloat(float64(b)/div, 'f', 1, 64) + " " + unit
}
