package em

import (
	"math"
	"runtime"

	"github.com/mixd-dev/mixd/fitters/internal/layout"
	"github.com/mixd-dev/mixd/fitters/internal/loop"
	"github.com/mixd-dev/mixd/fitters/internal/prep"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

// Chunking of the E-step. Rows are split into contiguous chunks whose
// number depends only on N, K and D, never on GOMAXPROCS; each chunk sums in
// row order into its own accumulator and the chunk sums are added in chunk
// order, so results are bit-identical however many goroutines run.
const (
	minChunkRows = 2048
	maxChunks    = 64
	// maxAccumBytes bounds the memory of all chunk accumulators together.
	maxAccumBytes = 64 << 20
)

// mahaCap bounds a squared Mahalanobis distance so that a log-density is
// always finite (exp of it underflows to zero long before).
const mahaCap = 1e300

// accum holds one chunk's sufficient statistics, computed against the
// current means: nk = Σ r w, sx = Σ r w (x−μ), sxx = Σ r w (x−μ)(x−μ)ᵀ
// (packed lower triangle; one shared matrix for tied; squared deviations per
// feature for diagonal and spherical), and ll = Σ w log p(x).
type accum struct {
	ll            float64
	nk, sx, sxx   []float64
	diff, lp      []float64 // scratch
	xblk, yblk    []float64 // scratch of chunkFullBlocked: D×blockRows each
	mblk          []float64 // scratch of chunkFullBlocked: K×blockRows
	lo, hi        int
	sxxPerCompLen int
}

// pass is the reusable machinery of the E-step for one K.
type pass struct {
	p      *problem
	k      int
	chunks []accum
	total  accum
	rowLD  []float64 // per-row log mixture density (internal, unweighted)
}

func newPass(p *problem, k int) *pass {
	d := p.D
	s := p.Structure
	sxxLen := k * layout.Len(s, d)
	per := layout.Len(s, d)
	if s == mixture.Tied {
		sxxLen = prep.Tri(d)
		per = 0
	}
	accLen := k + k*d + sxxLen
	rows := max(minChunkRows, (p.N+maxChunks-1)/maxChunks)
	if budget := maxAccumBytes / (8 * accLen); budget >= 1 {
		rows = max(rows, (p.N+budget-1)/budget)
	} else {
		rows = p.N
	}
	nc := (p.N + rows - 1) / rows
	ps := &pass{p: p, k: k, chunks: make([]accum, nc), rowLD: make([]float64, p.N)}
	mk := func(a *accum) {
		a.nk = make([]float64, k)
		a.sx = make([]float64, k*d)
		a.sxx = make([]float64, sxxLen)
		a.sxxPerCompLen = per
	}
	for c := range ps.chunks {
		a := &ps.chunks[c]
		mk(a)
		a.diff = make([]float64, k*d)
		a.lp = make([]float64, k)
		if useSIMD && (s == mixture.Full || s == mixture.Tied) {
			a.xblk = make([]float64, d*blockRows)
			a.yblk = make([]float64, d*blockRows)
			a.mblk = make([]float64, k*blockRows)
		}
		a.lo = c * rows
		a.hi = min(p.N, (c+1)*rows)
	}
	mk(&ps.total)
	return ps
}

// run evaluates st on every row: per-row log-densities into rowLD and the
// reduced statistics into ps.total.
func (ps *pass) run(st *state) {
	nc := len(ps.chunks)
	loop.Parallel(min(runtime.GOMAXPROCS(0), nc), nc, func(_, c int) { ps.chunk(st, &ps.chunks[c]) })
	t := &ps.total
	t.ll = 0
	clear(t.nk)
	clear(t.sx)
	clear(t.sxx)
	for c := range ps.chunks {
		a := &ps.chunks[c]
		t.ll += a.ll
		loop.AddTo(t.nk, a.nk)
		loop.AddTo(t.sx, a.sx)
		loop.AddTo(t.sxx, a.sxx)
	}
}

// chunk runs the fused E-step over one chunk of rows.
func (ps *pass) chunk(st *state, a *accum) {
	a.ll = 0
	clear(a.nk)
	clear(a.sx)
	clear(a.sxx)
	switch st.Structure {
	case mixture.Full, mixture.Tied:
		if useSIMD {
			ps.chunkFullBlocked(st, a)
		} else {
			ps.chunkFull(st, a)
		}
	default:
		ps.chunkDiag(st, a)
	}
}

// chunkFull is the E-step and statistics for full and tied covariances:
// per row and component the whitened deviation z = U (x − μ) (U = L⁻¹,
// packed, so each z_j is an independent dot product), then log-sum-exp over
// components, then the responsibility-weighted moments.
func (ps *pass) chunkFull(st *state, a *accum) {
	p := ps.p
	d, k := p.D, st.K
	td := prep.Tri(d)
	wstride := td // stride between whitening matrices
	if st.Structure == mixture.Tied {
		wstride = 0
	}
	sstride := a.sxxPerCompLen
	x, iw := p.X, p.W
	diff, lp := a.diff, a.lp[:k]
	logConst := st.logConst[:k]
	rowLD := ps.rowLD
	guess := 0 // the previous row's best component is tried first
	for i := a.lo; i < a.hi; i++ {
		xi := x[i*d : (i+1)*d]
		best := math.Inf(-1)
		top := guess
		for n := range lp {
			c := n // order: guess, then the others by index
			if n == 0 {
				c = guess
			} else if n <= guess {
				c = n - 1
			}
			mu := st.Mean[c*d : (c+1)*d]
			U := st.White[c*wstride : c*wstride+td]
			dk := diff[c*d : (c+1)*d]
			mu = mu[:len(dk)]
			xi := xi[:len(dk)]
			for j := range dk {
				dk[j] = xi[j] - mu[j]
			}
			// maha = |U dk|²; each row's dot product uses four partial sums
			// (a fixed order, so deterministic) to shorten the dependency
			// chain. maha only grows, so once logConst − maha/2 falls below
			// the best term so far by more than negligibleShift the
			// component's term is exactly zero whatever follows, and the
			// rest of the product is skipped.
			lc := logConst[c]
			cut := 2 * (lc - best - negligibleShift)
			var maha float64
			off := 0
			for j := range dk {
				row := U[off : off+j+1]
				dd := dk[:len(row)]
				var s0, s1, s2, s3 float64
				l := 0
				for ; l+4 <= len(row); l += 4 {
					r4 := row[l : l+4 : l+4]
					d4 := dd[l : l+4 : l+4]
					s0 += r4[0] * d4[0]
					s1 += r4[1] * d4[1]
					s2 += r4[2] * d4[2]
					s3 += r4[3] * d4[3]
				}
				for ; l < len(row); l++ {
					s0 += row[l] * dd[l]
				}
				z := (s0 + s1) + (s2 + s3)
				maha += z * z
				off += j + 1
				if maha > cut {
					break
				}
			}
			if maha > cut {
				lp[c] = math.Inf(-1)
				continue
			}
			if !(maha <= mahaCap) {
				maha = mahaCap
			}
			v := lc - 0.5*maha
			lp[c] = v
			if v > best {
				best, top = v, c
			}
		}
		guess = top
		sum := expShift(lp, best)
		lse := best + math.Log(sum)
		rowLD[i] = lse
		wi := 1.0
		if iw != nil {
			wi = iw[i]
			if wi == 0 {
				continue
			}
		}
		a.ll += wi * lse
		scale := wi / sum
		for c, e := range lp {
			r := e * scale
			if r == 0 {
				continue
			}
			a.nk[c] += r
			dk := diff[c*d : (c+1)*d]
			sx := a.sx[c*d : (c+1)*d]
			S := a.sxx[c*sstride : c*sstride+td]
			off := 0
			for j := range sx {
				rd := r * dk[j]
				sx[j] += rd
				row := S[off : off+j+1]
				dd := dk[:len(row)]
				for l, v := range dd {
					row[l] += rd * v
				}
				off += j + 1
			}
		}
	}
}

// negligibleShift is the log-ratio to a row's largest component term below
// which a term is treated as exactly zero: e^-37 ≈ 8.5e-17 is under half a
// unit in the last place of the sum (which is at least 1), so the term
// could not change the row's log-density, and its responsibility is below
// 1e-16. Treating it as zero skips its exponential and its share of the
// moment sums, which is most of the work when components are well apart.
const negligibleShift = -37

// expShift replaces every lp[c] by exp(lp[c] − best), or by zero when that is
// below e^negligibleShift, and returns their sum (at least 1).
func expShift(lp []float64, best float64) float64 {
	var sum float64
	for c, v := range lp {
		t := v - best
		if t < negligibleShift {
			lp[c] = 0
			continue
		}
		e := math.Exp(t)
		lp[c] = e
		sum += e
	}
	return sum
}

// chunkDiag is chunkFull for diagonal and spherical covariances.
func (ps *pass) chunkDiag(st *state, a *accum) {
	p := ps.p
	d, k := p.D, st.K
	x, iw := p.X, p.W
	diff, lp := a.diff, a.lp
	rowLD := ps.rowLD
	for i := a.lo; i < a.hi; i++ {
		xi := x[i*d : (i+1)*d]
		best := math.Inf(-1)
		for c := 0; c < k; c++ {
			mu := st.Mean[c*d : (c+1)*d]
			inv := st.InvD[c*d : (c+1)*d]
			dk := diff[c*d : (c+1)*d]
			var maha float64
			for j := 0; j < d; j++ {
				dj := xi[j] - mu[j]
				dk[j] = dj
				zj := dj * inv[j]
				maha += zj * zj
			}
			if !(maha <= mahaCap) {
				maha = mahaCap
			}
			v := st.logConst[c] - 0.5*maha
			lp[c] = v
			if v > best {
				best = v
			}
		}
		sum := expShift(lp, best)
		lse := best + math.Log(sum)
		rowLD[i] = lse
		wi := 1.0
		if iw != nil {
			wi = iw[i]
			if wi == 0 {
				continue
			}
		}
		a.ll += wi * lse
		scale := wi / sum
		for c := 0; c < k; c++ {
			r := lp[c] * scale
			if r == 0 {
				continue
			}
			a.nk[c] += r
			dk := diff[c*d : (c+1)*d]
			sx := a.sx[c*d : (c+1)*d]
			S := a.sxx[c*d : (c+1)*d]
			for j, dj := range dk {
				rd := r * dj
				sx[j] += rd
				S[j] += rd * dj
			}
		}
	}
}
