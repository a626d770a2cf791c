package em

import (
	"math"

	"github.com/mixd-dev/mixd/fitters/internal/prep"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

// blockRows is the number of rows whose squared Mahalanobis distances to
// every component chunkFullBlocked computes together, four or eight rows
// per instruction.
const blockRows = 64

// chunkFullBlocked computes exactly what chunkFull computes, bit for bit,
// in two phases per block of rows. First the full distance |U(x−μ)|² of
// every row to every component, with chunkFull's arithmetic per row
// (mahaRows). Then, row by row, chunkFull's decisions from those values:
// chunkFull stops a distance as soon as its partial sum exceeds the cut,
// and because the partial sums never decrease, "the full distance exceeds
// the cut" is the same test; a distance that is not finite is recomputed
// row by row as chunkFull does. The rest (log-sum-exp, moments) is
// chunkFull's code.
func (ps *pass) chunkFullBlocked(st *state, a *accum) {
	p := ps.p
	d, k := p.D, st.K
	td := prep.Tri(d)
	wstride := td
	if st.Structure == mixture.Tied {
		wstride = 0
	}
	sstride := a.sxxPerCompLen
	x, iw := p.X, p.W
	diff, lp := a.diff, a.lp[:k]
	logConst := st.logConst[:k]
	rowLD := ps.rowLD
	xb, yb, mb := a.xblk, a.yblk, a.mblk
	guess := 0
	for lo := a.lo; lo < a.hi; lo += blockRows {
		n := min(blockRows, a.hi-lo)
		// The block's rows column by column, then for each component the
		// deviations x − μ (column j at yb[j*blockRows:]).
		for r := 0; r < n; r++ {
			for j, v := range x[(lo+r)*d : (lo+r+1)*d] {
				xb[j*blockRows+r] = v
			}
		}
		for c := 0; c < k; c++ {
			for j, m := range st.Mean[c*d : (c+1)*d] {
				yj := yb[j*blockRows : j*blockRows+n]
				for r, v := range xb[j*blockRows : j*blockRows+n] {
					yj[r] = v - m
				}
			}
			mahaBlock(mb[c*blockRows:c*blockRows+n], yb, st.White[c*wstride:c*wstride+td], d, n)
		}
		for r := 0; r < n; r++ {
			i := lo + r
			xi := x[i*d : (i+1)*d]
			best := math.Inf(-1)
			top := guess
			for q := range lp {
				c := q // order: guess, then the others by index (as chunkFull)
				if q == 0 {
					c = guess
				} else if q <= guess {
					c = q - 1
				}
				lc := logConst[c]
				cut := 2 * (lc - best - negligibleShift)
				maha := mb[c*blockRows+r]
				if !(maha <= math.MaxFloat64) { // +Inf or NaN: decide as chunkFull does
					maha = mahaStopped(st.White[c*wstride:c*wstride+td], xi, st.Mean[c*d:(c+1)*d], diff[c*d:(c+1)*d], cut)
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
				mu := st.Mean[c*d : (c+1)*d]
				dk := diff[c*d : (c+1)*d]
				mu = mu[:len(dk)]
				xi := xi[:len(dk)]
				for j := range dk {
					dk[j] = xi[j] - mu[j]
				}
				sx := a.sx[c*d : (c+1)*d]
				S := a.sxx[c*sstride : c*sstride+td]
				if d >= 4 {
					// sx += r·dk, and the packed S += r·dk·dkᵀ with the
					// same roundings (rd = r·dk[j], then rd·dk[l]).
					for j := range sx {
						sx[j] += r * dk[j]
					}
					addOuterPacked(&S[0], &dk[0], d, r)
					continue
				}
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
}

// mahaBlock sets out[r] (r < n) to the squared distance of block row r
// (column j of the block at y[j*blockRows:]) under the packed whitening
// matrix u, with chunkFull's arithmetic and no early stop.
func mahaBlock(out, y, u []float64, d, n int) {
	r := 0
	if useSIMD && n >= 4 {
		_ = out[n-1]
		_ = y[(d-1)*blockRows+n-1]
		_ = u[prep.Tri(d)-1]
		r = n &^ 3
		mahaRows(&out[0], &y[0], &u[0], d, r, blockRows)
	}
	for ; r < n; r++ {
		var maha float64
		off := 0
		for j := 0; j < d; j++ {
			row := u[off : off+j+1]
			var s0, s1, s2, s3 float64
			l := 0
			for ; l+4 <= len(row); l += 4 {
				s0 += float64(row[l] * y[l*blockRows+r])
				s1 += float64(row[l+1] * y[(l+1)*blockRows+r])
				s2 += float64(row[l+2] * y[(l+2)*blockRows+r])
				s3 += float64(row[l+3] * y[(l+3)*blockRows+r])
			}
			for ; l < len(row); l++ {
				s0 += float64(row[l] * y[l*blockRows+r])
			}
			z := (s0 + s1) + (s2 + s3)
			maha += float64(z * z)
			off += j + 1
		}
		out[r] = maha
	}
}

// mahaStopped is chunkFull's distance loop for one row and component: the
// partial sum at which it stops (the first to exceed cut) or the full sum.
func mahaStopped(u, xi, mu, dk []float64, cut float64) float64 {
	mu = mu[:len(dk)]
	xi = xi[:len(dk)]
	for j := range dk {
		dk[j] = xi[j] - mu[j]
	}
	var maha float64
	off := 0
	for j := range dk {
		row := u[off : off+j+1]
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
	return maha
}
