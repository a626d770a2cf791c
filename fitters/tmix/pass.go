package tmix

import (
	"math"
	"runtime"

	"github.com/mixd-dev/mixd/fitters/internal/layout"
	"github.com/mixd-dev/mixd/fitters/internal/loop"
	"github.com/mixd-dev/mixd/fitters/internal/prep"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

// Chunking of every pass over the rows. The chunks are fixed by N alone,
// never by GOMAXPROCS; each chunk sums in row order into its own
// accumulator and the chunk sums are added in chunk order, so results are
// bit-identical however many goroutines run.
const chunkRows = 2048

// mahaCap bounds a squared Mahalanobis distance so that every log-density
// stays finite (the density has underflowed long before).
const mahaCap = 1e300

// forChunks runs fn(c) for every c in [0, n) on up to GOMAXPROCS goroutines.
// fn must write only to state owned by chunk c.
func forChunks(n int, fn func(c int)) {
	loop.Parallel(min(runtime.GOMAXPROCS(0), n), n, func(_, c int) { fn(c) })
}

// accum holds one chunk's sufficient statistics, computed against the
// current means, with responsibilities τ, latent row weights u and internal
// row weights w:
//
//	nk = Σ w τ, su = Σ w τ u, slu = Σ w τ (log u − u),
//	sx = Σ w τ u (x−μ), sxx = Σ w τ u (x−μ)(x−μ)ᵀ
//
// (sxx packed lower triangle per component for full and tied, squared
// deviations per feature for diagonal and spherical) and ll = Σ w log p(x).
type accum struct {
	ll                   float64
	nk, su, slu, sx, sxx []float64
	diff, z, a, e        []float64 // scratch
}

func newAccum(k, d, sxxLen int, scratch bool) accum {
	a := accum{
		nk:  make([]float64, k),
		su:  make([]float64, k),
		slu: make([]float64, k),
		sx:  make([]float64, k*d),
		sxx: make([]float64, sxxLen),
	}
	if scratch {
		a.diff = make([]float64, k*d)
		a.z = make([]float64, d)
		a.a = make([]float64, k)
		a.e = make([]float64, k)
	}
	return a
}

func (a *accum) reset() {
	a.ll = 0
	clear(a.nk)
	clear(a.su)
	clear(a.slu)
	clear(a.sx)
	clear(a.sxx)
}

// pass is the reusable machinery of the E-step and the ECME search for one K.
type pass struct {
	p      *problem
	k      int
	chunks []accum
	total  accum
	// dist holds the squared Mahalanobis distances (N×K) of the rows from
	// the current means and scale matrices when distValid.
	dist      []float64
	distValid bool
	// needLogU asks the E-step for slu (the ECM degrees-of-freedom step).
	needLogU bool
	rowLD    []float64 // per-row log mixture density (internal, unweighted)
	// ECME scratch: lt[i*K+j] = log w_j + log f_j(x_i); other[i] the
	// log-sum-exp of the other components; sums one value per chunk.
	lt, other, sums, gsums []float64
	// curv holds, per search (component, or 0 when shared), the curvature
	// of the negative log-likelihood in log ν seen by the last search.
	curv []float64
	// per-component constants of the current state: (ν+D)/2, 1/ν, ν+D.
	half, inv, nupd []float64
}

func newPass(p *problem, k int) *pass {
	d := p.D
	sxxLen := k * layout.Len(p.Structure, d)
	ps := &pass{
		p: p, k: k,
		chunks: make([]accum, len(p.chunks)),
		total:  newAccum(k, d, sxxLen, false),
		dist:   make([]float64, p.N*k),
		rowLD:  make([]float64, p.N),
		sums:   make([]float64, len(p.chunks)),
		gsums:  make([]float64, len(p.chunks)),
		curv:   make([]float64, k),
		half:   make([]float64, k),
		inv:    make([]float64, k),
		nupd:   make([]float64, k),
	}
	for c := range ps.chunks {
		ps.chunks[c] = newAccum(k, d, sxxLen, true)
	}
	if p.cfg.dfMode == dfEstimate && p.cfg.update == updateECME {
		ps.lt = make([]float64, p.N*k)
		ps.other = make([]float64, p.N)
	}
	ps.needLogU = p.cfg.dfMode == dfEstimate && p.cfg.update == updateECM
	return ps
}

// setDFConst caches the per-component degrees-of-freedom constants of st.
func (ps *pass) setDFConst(st *state) {
	d := float64(st.D)
	for c, v := range st.df {
		ps.half[c] = 0.5 * (v + d)
		ps.inv[c] = 1 / v
		ps.nupd[c] = v + d
	}
}

// maha returns the squared Mahalanobis distance of the deviation dk from
// component c of st (z is scratch of length D), capped at mahaCap.
func maha(st *state, c int, dk, z []float64) float64 {
	d := st.D
	ci := st.CovIndex(c)
	inv := st.InvD[ci*d : (ci+1)*d]
	var s float64
	switch st.Structure {
	case mixture.Full, mixture.Tied:
		td := prep.Tri(d)
		L := st.Chol[ci*td : (ci+1)*td]
		off := 0
		for j := 0; j < d; j++ {
			row := L[off : off+j]
			zz := z[:j]
			v := dk[j]
			for l, lv := range row {
				v -= lv * zz[l]
			}
			zj := v * inv[j]
			z[j] = zj
			s += zj * zj
			off += j + 1
		}
	default:
		for j, v := range dk {
			t := v * inv[j]
			s += t * t
		}
	}
	if !(s <= mahaCap) {
		s = mahaCap
	}
	return s
}

// estep evaluates st on every row: per-row log-densities into rowLD, the
// distances into dist (unless they are already valid for st's means and
// scale matrices) and the reduced statistics into ps.total.
func (ps *pass) estep(st *state) {
	ps.setDFConst(st)
	forChunks(len(ps.chunks), func(c int) { ps.estepChunk(st, c) })
	ps.distValid = true
	t := &ps.total
	t.reset()
	for c := range ps.chunks {
		a := &ps.chunks[c]
		t.ll += a.ll
		loop.AddTo(t.nk, a.nk)
		loop.AddTo(t.su, a.su)
		loop.AddTo(t.slu, a.slu)
		loop.AddTo(t.sx, a.sx)
		loop.AddTo(t.sxx, a.sxx)
	}
}

// estepChunk is the fused E-step and statistics of one chunk of rows.
func (ps *pass) estepChunk(st *state, ci int) {
	p := ps.p
	a := &ps.chunks[ci]
	a.reset()
	d, k := p.D, ps.k
	full := st.Structure == mixture.Full || st.Structure == mixture.Tied
	cl := layout.Len(st.Structure, d)
	computeDist := !ps.distValid
	diff, z, lp, e := a.diff, a.z, a.a, a.e
	dist := ps.dist
	for i := p.chunks[ci].lo; i < p.chunks[ci].hi; i++ {
		xi := p.Row(i)
		di := dist[i*k : (i+1)*k]
		best := math.Inf(-1)
		for c := 0; c < k; c++ {
			mu := st.Mean[c*d : (c+1)*d]
			dk := diff[c*d : (c+1)*d]
			for j, v := range xi {
				dk[j] = v - mu[j]
			}
			if computeDist {
				di[c] = maha(st, c, dk, z)
			}
			v := st.logConst[c] - ps.half[c]*math.Log1p(di[c]*ps.inv[c])
			lp[c] = v
			if v > best {
				best = v
			}
		}
		var sum float64
		for c := 0; c < k; c++ {
			x := math.Exp(lp[c] - best)
			e[c] = x
			sum += x
		}
		lse := best + math.Log(sum)
		ps.rowLD[i] = lse
		wi := p.Weight(i)
		if wi == 0 {
			continue
		}
		a.ll += wi * lse
		scale := wi / sum
		for c := 0; c < k; c++ {
			r := e[c] * scale
			if r == 0 {
				continue
			}
			u := ps.nupd[c] / (st.df[c] + di[c])
			ru := r * u
			a.nk[c] += r
			a.su[c] += ru
			if ps.needLogU {
				a.slu[c] += r * (math.Log(u) - u)
			}
			dk := diff[c*d : (c+1)*d]
			sx := a.sx[c*d : (c+1)*d]
			S := a.sxx[c*cl : (c+1)*cl]
			if full {
				off := 0
				for j := 0; j < d; j++ {
					rd := ru * dk[j]
					sx[j] += rd
					row := S[off : off+j+1]
					dd := dk[:j+1]
					for l := range row {
						row[l] += rd * dd[l]
					}
					off += j + 1
				}
			} else {
				for j, dj := range dk {
					rd := ru * dj
					sx[j] += rd
					S[j] += rd * dj
				}
			}
		}
	}
}

// distances computes dist for st's means and scale matrices and, for the
// ECME search, lt = log w_j + log f_j(x_i) at st's degrees of freedom.
func (ps *pass) distances(st *state) {
	ps.setDFConst(st)
	p := ps.p
	d, k := p.D, ps.k
	forChunks(len(ps.chunks), func(ci int) {
		a := &ps.chunks[ci]
		dk, z := a.diff[:d], a.z
		for i := p.chunks[ci].lo; i < p.chunks[ci].hi; i++ {
			xi := p.Row(i)
			for c := 0; c < k; c++ {
				mu := st.Mean[c*d : (c+1)*d]
				for j, v := range xi {
					dk[j] = v - mu[j]
				}
				s := maha(st, c, dk, z)
				ps.dist[i*k+c] = s
				ps.lt[i*k+c] = st.logConst[c] - ps.half[c]*math.Log1p(s*ps.inv[c])
			}
		}
	})
	ps.distValid = true
}
