package vb

import (
	"math"
	"runtime"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/internal/loop"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

const (
	// chunkRows is the fixed number of rows one goroutine takes at a time;
	// partial sums are kept per chunk and added in chunk order, so results are
	// bit-identical for any GOMAXPROCS.
	chunkRows = 1024
	// parallelMinRows is the smallest data set whose passes use several goroutines.
	parallelMinRows = 4096
)

var log2Pi = math.Log(2 * math.Pi)

// weightPrior selects the prior on the mixing weights.
type weightPrior int

const (
	dirichlet weightPrior = iota + 1
	stickBreaking
)

func (w weightPrior) String() string {
	if w == stickBreaking {
		return "stick_breaking"
	}
	return "dirichlet"
}

// prior holds the hyperparameters of one fit (see the package documentation).
type prior struct {
	weights weightPrior
	alpha   float64   // concentration α0
	beta0   float64   // mean strength β0
	m0      []float64 // prior mean
	nu0     float64   // Wishart degrees of freedom ν0
	// s0 is the inverse scale: D×D row-major for full, D values (the
	// diagonal) for diagonal, one value for spherical. The ridge is included.
	s0 []float64

	// Derived, full structure.
	logDetW0 float64 // log|W0| = −log|s0|
	lnB0     float64 // log B(W0, ν0)
	// Derived, gamma-precision structures (diagonal, spherical): every block
	// of dg coordinates shares one precision λ ~ Gamma(a0, b0[blk]).
	a0 float64
	b0 []float64
	dg float64
}

// setup fills the derived fields; it fails when s0 is not positive definite.
func (pr *prior) setup(s mixture.Structure, d int) bool {
	switch s {
	case mixture.Full, mixture.Tied:
		l := make([]float64, d*d)
		ld, ok := cholesky(pr.s0, l, d)
		if !ok {
			return false
		}
		pr.logDetW0 = -ld
		pr.lnB0 = logWishartB(pr.logDetW0, pr.nu0, d)
	case mixture.Diagonal:
		pr.dg = 1
		pr.a0 = 0.5 * pr.nu0
		pr.b0 = make([]float64, d)
		for j, v := range pr.s0 {
			if !(v > 0) {
				return false
			}
			pr.b0[j] = 0.5 * v
		}
	case mixture.Spherical:
		pr.dg = float64(d)
		pr.a0 = 0.5 * pr.dg * pr.nu0
		if !(pr.s0[0] > 0) {
			return false
		}
		pr.b0 = []float64{0.5 * pr.dg * pr.s0[0]}
	}
	return true
}

// posterior is the variational distribution q(π) q(μ, Λ) of one fit.
type posterior struct {
	k, d      int
	structure mixture.Structure
	nblk      int // precision blocks per component: 0 full, D diagonal, 1 spherical

	alpha  []float64 // Dirichlet α_k; stick-breaking first Beta shape γ_k1
	gamma2 []float64 // stick-breaking second Beta shape γ_k2 (nil for Dirichlet)
	elogpi []float64 // E[log π_k]
	epi    []float64 // E[π_k]
	beta   []float64 // β_k
	m      []float64 // K×D means m_k

	// Full: Wishart(W_k, ν_k); winv holds W_k⁻¹, chol its lower factor.
	// Tied: one Wishart(W, ν) shared by every component, at index 0 of
	// each of these (see wishart).
	nu      []float64
	winv    []float64
	chol    []float64
	white   []float64 // K×D×D: L_k⁻¹ (lower), so (x−m)ᵀ W_k (x−m) = |L_k⁻¹ (x−m)|²
	logDetW []float64 // log|W_k|

	// Gamma-precision structures: shape a_k, rates b (K×nblk), E[λ] = a/b.
	a     []float64
	b     []float64
	eprec []float64

	elogdet []float64 // E[log|Λ_k|]
	econst  []float64 // E[log π_k] + ½E[log|Λ_k|] − (D/2) log 2π − D/(2β_k)
}

func newPosterior(k, d int, s mixture.Structure, wp weightPrior) *posterior {
	q := &posterior{
		k: k, d: d, structure: s,
		alpha:   make([]float64, k),
		elogpi:  make([]float64, k),
		epi:     make([]float64, k),
		beta:    make([]float64, k),
		m:       make([]float64, k*d),
		elogdet: make([]float64, k),
		econst:  make([]float64, k),
	}
	if wp == stickBreaking {
		q.gamma2 = make([]float64, k)
	}
	switch s {
	case mixture.Full, mixture.Tied:
		nw := k
		if s == mixture.Tied {
			nw = 1
		}
		q.nu = make([]float64, nw)
		q.winv = make([]float64, nw*d*d)
		q.chol = make([]float64, nw*d*d)
		q.white = make([]float64, nw*d*d)
		q.logDetW = make([]float64, nw)
	case mixture.Diagonal:
		q.nblk = d
	case mixture.Spherical:
		q.nblk = 1
	}
	if q.nblk > 0 {
		q.a = make([]float64, k)
		q.b = make([]float64, k*q.nblk)
		q.eprec = make([]float64, k*q.nblk)
	}
	return q
}

// matrixPrecision reports whether s keeps Wishart precision matrices (full
// and tied) rather than gamma-distributed precisions per block.
func matrixPrecision(s mixture.Structure) bool {
	return s == mixture.Full || s == mixture.Tied
}

// wishart returns the index of component c's Wishart factor in nu, winv,
// chol, white and logDetW: c, or 0 for the tied structure.
func (q *posterior) wishart(c int) int {
	if q.structure == mixture.Tied {
		return 0
	}
	return c
}

// block returns the precision block of coordinate j.
func (q *posterior) block(j int) int {
	if q.nblk == 1 {
		return 0
	}
	return j
}

// stats are the responsibility-weighted sufficient statistics of the data.
type stats struct {
	nk    []float64 // N_k = Σ w r_nk
	sx    []float64 // K×D: Σ w r_nk x_n
	xbar  []float64 // K×D: sx/N_k (the prior mean when N_k is 0)
	scat  []float64 // full, tied: K×D×D Σ w r (x−x̄)(x−x̄)ᵀ; otherwise K×D squared deviations
	rlogr float64   // Σ w Σ r log r
}

// scratch is one goroutine's workspace.
type scratch struct {
	diff, y []float64
	diffAll []float64 // K×D deviations of the current row
	lr, ev  []float64 // per component: log ρ and exp(log ρ − max)
	bad     int       // first row (+1) whose log-sum-exp was not finite
}

// engine runs the passes over the data for one K.
type engine struct {
	p        *problem
	pr       *prior
	s        mixture.Structure
	k, d     int
	r        []float64 // N×K responsibilities
	nchunks  int
	workers  int
	ws       []*scratch
	sumBuf   []float64 // per chunk: K (N_k) + K·D (sx) + 1 (rlogr)
	scatBuf  []float64 // per chunk: K × scatLen
	fusedBuf []float64 // per chunk: sumBuf's layout followed by K × scatLen
}

func (e *engine) scatLen() int {
	if matrixPrecision(e.s) {
		return e.d * e.d
	}
	return e.d
}

func newEngine(p *problem, pr *prior, s mixture.Structure, k int) *engine {
	e := &engine{p: p, pr: pr, s: s, k: k, d: p.D}
	e.r = make([]float64, p.N*k)
	e.nchunks = (p.N + chunkRows - 1) / chunkRows
	e.workers = 1
	if p.N >= parallelMinRows {
		e.workers = min(runtime.GOMAXPROCS(0), e.nchunks)
	}
	e.ws = make([]*scratch, e.workers)
	for i := range e.ws {
		e.ws[i] = &scratch{diff: make([]float64, p.D), y: make([]float64, p.D), diffAll: make([]float64, k*p.D), lr: make([]float64, k), ev: make([]float64, k)}
	}
	e.sumBuf = make([]float64, e.nchunks*(k+k*p.D+1))
	e.scatBuf = make([]float64, e.nchunks*k*e.scatLen())
	e.fusedBuf = make([]float64, e.nchunks*(k+k*p.D+1+k*e.scatLen()))
	return e
}

func newStats(k, d int, s mixture.Structure) *stats {
	sl := d
	if matrixPrecision(s) {
		sl = d * d
	}
	return &stats{
		nk:   make([]float64, k),
		sx:   make([]float64, k*d),
		xbar: make([]float64, k*d),
		scat: make([]float64, k*sl),
	}
}

// parallel calls fn for every chunk, on up to e.workers goroutines. Each
// chunk's result depends only on its own rows.
func (e *engine) parallel(fn func(ws *scratch, c, lo, hi int)) {
	loop.Parallel(e.workers, e.nchunks, func(w, c int) {
		fn(e.ws[w], c, c*chunkRows, min((c+1)*chunkRows, e.p.N))
	})
}

// estep sets the responsibilities from q (Bishop 2006, eqs. 10.46–10.49 with
// 10.64–10.66) and accumulates the statistics into st in the same pass,
// against the current means m_k: Σ w r (x−m_k) and Σ w r (x−m_k)(x−m_k)ᵀ,
// from which x̄_k and the scatter about x̄_k follow (as in the em fitter).
// It fails (Internal) when a row's normaliser is not finite, which valid
// data cannot cause.
func (e *engine) estep(q *posterior, st *stats) error {
	k, d := e.k, e.d
	sl := e.scatLen()
	full := matrixPrecision(e.s)
	stride := k + k*d + 1 + k*sl
	for _, ws := range e.ws {
		ws.bad = 0
	}
	e.parallel(func(ws *scratch, ch, lo, hi int) {
		buf := e.fusedBuf[ch*stride : (ch+1)*stride]
		clear(buf)
		nk, sx, sxx := buf[:k], buf[k:k+k*d], buf[k+k*d+1:]
		var rl float64
		for i := lo; i < hi; i++ {
			x := e.p.Row(i)
			for c := 0; c < k; c++ {
				mc := q.m[c*d : (c+1)*d]
				diff := ws.diffAll[c*d : (c+1)*d]
				for j := range x {
					diff[j] = x[j] - mc[j]
				}
				var qf float64
				if q.nblk == 0 {
					wc := q.wishart(c)
					qf = q.nu[wc] * whitenNorm2(q.white[wc*d*d:(wc+1)*d*d], diff, d)
				} else {
					pr := q.eprec[c*q.nblk : (c+1)*q.nblk]
					for j, v := range diff {
						qf += pr[q.block(j)] * v * v
					}
				}
				ws.lr[c] = q.econst[c] - 0.5*qf
			}
			mx := math.Inf(-1)
			for _, v := range ws.lr {
				if v > mx {
					mx = v
				}
			}
			var sum float64
			for c, v := range ws.lr {
				ev := math.Exp(v - mx)
				ws.ev[c] = ev
				sum += ev
			}
			lse := mx + math.Log(sum)
			if math.IsNaN(lse) || math.IsInf(lse, 0) {
				if ws.bad == 0 || i+1 < ws.bad {
					ws.bad = i + 1
				}
				lse, sum = mx, 1
			}
			inv := 1 / sum
			ri := e.r[i*k : (i+1)*k]
			w := e.p.Weight(i)
			for c, v := range ws.lr {
				l := v - lse
				rv := ws.ev[c] * inv
				ri[c] = rv
				wr := w * rv
				if wr == 0 {
					continue
				}
				nk[c] += wr
				rl += wr * l
				diff := ws.diffAll[c*d : (c+1)*d]
				sxc := sx[c*d : (c+1)*d]
				for j, dv := range diff {
					sxc[j] += wr * dv
				}
				sc := sxx[c*sl : (c+1)*sl]
				if full {
					for a := 0; a < d; a++ {
						ra := wr * diff[a]
						row := sc[a*d : a*d+a+1]
						for b := range row {
							row[b] += ra * diff[b]
						}
					}
				} else {
					for j, dv := range diff {
						sc[j] += wr * dv * dv
					}
				}
			}
		}
		buf[k+k*d] = rl
	})
	for _, ws := range e.ws {
		if ws.bad != 0 {
			return fitters.Errorf(fitters.Internal, "vb: row %d: the normaliser of the responsibilities is not finite", ws.bad-1)
		}
	}
	// Reduce in chunk order; sx temporarily holds Σ w r (x−m_k), scat the
	// second moments about m_k.
	clear(st.nk)
	clear(st.sx)
	clear(st.scat)
	st.rlogr = 0
	for ch := 0; ch < e.nchunks; ch++ {
		buf := e.fusedBuf[ch*stride : (ch+1)*stride]
		for i, v := range buf[:k] {
			st.nk[i] += v
		}
		for i, v := range buf[k : k+k*d] {
			st.sx[i] += v
		}
		st.rlogr += buf[k+k*d]
		for i, v := range buf[k+k*d+1:] {
			st.scat[i] += v
		}
	}
	for c := 0; c < k; c++ {
		n := st.nk[c]
		mc := q.m[c*d : (c+1)*d]
		xb := st.xbar[c*d : (c+1)*d]
		sxc := st.sx[c*d : (c+1)*d]
		sc := st.scat[c*sl : (c+1)*sl]
		ok := n > 0
		if ok {
			for j := range xb {
				xb[j] = mc[j] + sxc[j]/n
				if math.IsNaN(xb[j]) || math.IsInf(xb[j], 0) {
					ok = false
				}
			}
		}
		if !ok {
			// No (representable) mass: the component reverts to its prior.
			st.nk[c] = 0
			clear(sxc)
			clear(sc)
			copy(xb, e.pr.m0)
			continue
		}
		// Scatter about x̄: Σ w r (x−m)(x−m)ᵀ − (Σ w r (x−m))(Σ w r (x−m))ᵀ / N.
		if full {
			for a := 0; a < d; a++ {
				for b := 0; b <= a; b++ {
					v := sc[a*d+b] - sxc[a]*sxc[b]/n
					sc[a*d+b] = v
					sc[b*d+a] = v
				}
			}
		} else {
			for j := range sc {
				sc[j] -= sxc[j] * sxc[j] / n
			}
		}
		for j := range sxc {
			sxc[j] = n * xb[j]
		}
	}
	return nil
}

// accumulate computes the statistics of the given responsibilities e.r in
// two passes (means, then the scatter about them); used for the start.
func (e *engine) accumulate(st *stats) {
	k, d := e.k, e.d
	stride := k + k*d + 1
	e.parallel(func(ws *scratch, ch, lo, hi int) {
		buf := e.sumBuf[ch*stride : (ch+1)*stride]
		clear(buf)
		nk, sx := buf[:k], buf[k:k+k*d]
		var rl float64
		for i := lo; i < hi; i++ {
			w := e.p.Weight(i)
			if w == 0 {
				continue
			}
			x := e.p.Row(i)
			for c, rv := range e.r[i*k : (i+1)*k] {
				if rv <= 0 {
					continue
				}
				wr := w * rv
				nk[c] += wr
				if rv < 1 {
					rl += wr * math.Log(rv)
				}
				sxc := sx[c*d : (c+1)*d]
				for j, xv := range x {
					sxc[j] += wr * xv
				}
			}
		}
		buf[k+k*d] = rl
	})
	e.finish(st)
}

// finish reduces accumulate's per-chunk sums in chunk order, computes the
// component means and runs the second pass for the scatter about them.
func (e *engine) finish(st *stats) {
	k, d := e.k, e.d
	stride := k + k*d + 1
	clear(st.nk)
	clear(st.sx)
	st.rlogr = 0
	for c := 0; c < e.nchunks; c++ {
		buf := e.sumBuf[c*stride : (c+1)*stride]
		for i, v := range buf[:k] {
			st.nk[i] += v
		}
		for i, v := range buf[k : k+k*d] {
			st.sx[i] += v
		}
		st.rlogr += buf[k+k*d]
	}
	for c := 0; c < k; c++ {
		xb := st.xbar[c*d : (c+1)*d]
		ok := st.nk[c] > 0
		if ok {
			for j := range xb {
				xb[j] = st.sx[c*d+j] / st.nk[c]
				if math.IsNaN(xb[j]) || math.IsInf(xb[j], 0) {
					ok = false
				}
			}
		}
		if !ok {
			// No (representable) mass: the component reverts to its prior.
			st.nk[c] = 0
			clear(st.sx[c*d : (c+1)*d])
			copy(xb, e.pr.m0)
		}
	}
	sl := e.scatLen()
	full := matrixPrecision(e.s)
	e.parallel(func(ws *scratch, ch, lo, hi int) {
		sb := e.scatBuf[ch*k*sl : (ch+1)*k*sl]
		clear(sb)
		for i := lo; i < hi; i++ {
			w := e.p.Weight(i)
			if w == 0 {
				continue
			}
			x := e.p.Row(i)
			for c, rv := range e.r[i*k : (i+1)*k] {
				wr := w * rv
				if wr == 0 || st.nk[c] == 0 {
					continue
				}
				xb := st.xbar[c*d : (c+1)*d]
				for j := range x {
					ws.diff[j] = x[j] - xb[j]
				}
				s := sb[c*sl : (c+1)*sl]
				if full {
					for a := 0; a < d; a++ {
						ra := wr * ws.diff[a]
						row := s[a*d : a*d+a+1]
						for b := range row {
							row[b] += ra * ws.diff[b]
						}
					}
				} else {
					for j, v := range ws.diff {
						s[j] += wr * v * v
					}
				}
			}
		}
	})
	clear(st.scat)
	for c := 0; c < e.nchunks; c++ {
		for i, v := range e.scatBuf[c*k*sl : (c+1)*k*sl] {
			st.scat[i] += v
		}
	}
	if full {
		for c := 0; c < k; c++ {
			s := st.scat[c*d*d : (c+1)*d*d]
			for a := 0; a < d; a++ {
				for b := 0; b < a; b++ {
					s[b*d+a] = s[a*d+b]
				}
			}
		}
	}
}

// mstep sets q to the optimal variational distribution for the statistics
// (Bishop 2006, eqs. 10.58 and 10.60–10.63; Blei and Jordan 2006, eqs. 18–19
// for the stick-breaking weights). It fails (FailedPrecondition) only when an
// inverse scale matrix is not positive definite in floating point, which a
// prior far from the data or badly conditioned can cause.
func (e *engine) mstep(st *stats, q *posterior) error {
	pr, k, d := e.pr, e.k, e.d
	// Weights.
	if pr.weights == dirichlet {
		var sum float64
		for c := 0; c < k; c++ {
			q.alpha[c] = pr.alpha + st.nk[c]
			sum += q.alpha[c]
		}
		dsum := digamma(sum)
		for c := 0; c < k; c++ {
			q.elogpi[c] = digamma(q.alpha[c]) - dsum
			q.epi[c] = q.alpha[c] / sum
		}
	} else {
		var tail float64 // Σ_{j>c} N_j
		for c := k - 1; c >= 0; c-- {
			q.alpha[c] = 1 + st.nk[c]
			q.gamma2[c] = pr.alpha + tail
			tail += st.nk[c]
		}
		var acc, rest float64 = 0, 1 // Σ_{j<c} E[log(1−v_j)], Π_{j<c} E[1−v_j]
		for c := 0; c < k; c++ {
			if c == k-1 {
				q.elogpi[c] = acc
				q.epi[c] = rest
				break
			}
			ds := digamma(q.alpha[c] + q.gamma2[c])
			q.elogpi[c] = acc + digamma(q.alpha[c]) - ds
			acc += digamma(q.gamma2[c]) - ds
			ev := q.alpha[c] / (q.alpha[c] + q.gamma2[c])
			q.epi[c] = rest * ev
			rest *= q.gamma2[c] / (q.alpha[c] + q.gamma2[c])
		}
	}
	// Means and precisions.
	if e.s == mixture.Tied {
		// One Wishart for all components (Bishop 2006, eqs. 10.62–10.63
		// with the precision shared): ν = ν0 + Σ_k N_k, and W⁻¹ = W0⁻¹ plus
		// every component's scatter and mean-shrinkage terms, added below.
		var total float64
		for c := 0; c < k; c++ {
			total += st.nk[c]
		}
		q.nu[0] = pr.nu0 + total
		copy(q.winv[:d*d], pr.s0)
	}
	for c := 0; c < k; c++ {
		n := st.nk[c]
		q.beta[c] = pr.beta0 + n
		xb := st.xbar[c*d : (c+1)*d]
		mc := q.m[c*d : (c+1)*d]
		for j := range mc {
			mc[j] = (pr.beta0*pr.m0[j] + n*xb[j]) / q.beta[c]
		}
		shrink := pr.beta0 * n / q.beta[c]
		switch e.s {
		case mixture.Full:
			q.nu[c] = pr.nu0 + n
			wi := q.winv[c*d*d : (c+1)*d*d]
			sc := st.scat[c*d*d : (c+1)*d*d]
			for a := 0; a < d; a++ {
				da := xb[a] - pr.m0[a]
				for b := 0; b <= a; b++ {
					v := pr.s0[a*d+b] + sc[a*d+b] + shrink*da*(xb[b]-pr.m0[b])
					wi[a*d+b] = v
					wi[b*d+a] = v
				}
			}
			ld, ok := cholesky(wi, q.chol[c*d*d:(c+1)*d*d], d)
			if !ok {
				return fitters.Errorf(fitters.FailedPrecondition, "component %d: the posterior inverse scale matrix is numerically singular: the prior (options %q, %q, %q) is too far from the data or too ill-conditioned", c, OptPriorMean, OptMeanStrength, OptInverseScale)
			}
			q.logDetW[c] = -ld
			inverseLower(q.chol[c*d*d:(c+1)*d*d], q.white[c*d*d:(c+1)*d*d], d)
			q.elogdet[c] = expectLogDetWishart(q.logDetW[c], q.nu[c], d)
		case mixture.Tied:
			wi := q.winv[:d*d]
			sc := st.scat[c*d*d : (c+1)*d*d]
			for a := 0; a < d; a++ {
				da := xb[a] - pr.m0[a]
				for b := 0; b <= a; b++ {
					v := wi[a*d+b] + sc[a*d+b] + shrink*da*(xb[b]-pr.m0[b])
					wi[a*d+b] = v
					wi[b*d+a] = v
				}
			}
		default:
			sc := st.scat[c*d : (c+1)*d]
			q.a[c] = pr.a0 + 0.5*pr.dg*n
			bs := q.b[c*q.nblk : (c+1)*q.nblk]
			copy(bs, pr.b0)
			for j := 0; j < d; j++ {
				dj := xb[j] - pr.m0[j]
				bs[q.block(j)] += 0.5 * (sc[j] + shrink*dj*dj)
			}
			dpa := digamma(q.a[c])
			var el float64
			for g, bv := range bs {
				q.eprec[c*q.nblk+g] = q.a[c] / bv
				el += pr.dg * (dpa - math.Log(bv))
			}
			q.elogdet[c] = el
		}
	}
	if e.s == mixture.Tied {
		ld, ok := cholesky(q.winv[:d*d], q.chol[:d*d], d)
		if !ok {
			return fitters.Errorf(fitters.FailedPrecondition, "the shared posterior inverse scale matrix is numerically singular: the prior (options %q, %q, %q) is too far from the data or too ill-conditioned", OptPriorMean, OptMeanStrength, OptInverseScale)
		}
		q.logDetW[0] = -ld
		inverseLower(q.chol[:d*d], q.white[:d*d], d)
		el := expectLogDetWishart(q.logDetW[0], q.nu[0], d)
		for c := 0; c < k; c++ {
			q.elogdet[c] = el
		}
	}
	for c := 0; c < k; c++ {
		q.econst[c] = q.elogpi[c] + 0.5*q.elogdet[c] - 0.5*float64(d)*log2Pi - 0.5*float64(d)/q.beta[c]
	}
	return nil
}

// bound returns the evidence lower bound for the responsibilities behind st
// and the distribution q (Bishop 2006, eqs. 10.70–10.77 with the Wishart
// normaliser B.79 and entropy B.82; the Beta terms of Blei and Jordan 2006,
// eq. 16, for stick-breaking weights). Every constant is included, so for
// K = 1 it equals the exact log marginal likelihood of the conjugate model.
func (e *engine) bound(st *stats, q *posterior, wsScratch []float64) float64 {
	pr, k, d := e.pr, e.k, e.d
	fd := float64(d)
	var l float64
	// Weights: E[log p(Z|π)] + E[log p(π)] − E[log q(π)].
	for c := 0; c < k; c++ {
		l += st.nk[c] * q.elogpi[c]
	}
	if pr.weights == dirichlet {
		var sum, sumLG float64
		for c := 0; c < k; c++ {
			sum += q.alpha[c]
			sumLG += lgamma(q.alpha[c])
			l += (pr.alpha - q.alpha[c]) * q.elogpi[c]
		}
		l += lgamma(float64(k)*pr.alpha) - float64(k)*lgamma(pr.alpha)
		l -= lgamma(sum) - sumLG
	} else {
		for c := 0; c < k-1; c++ {
			g1, g2 := q.alpha[c], q.gamma2[c]
			ds := digamma(g1 + g2)
			elv, el1v := digamma(g1)-ds, digamma(g2)-ds
			l += math.Log(pr.alpha) + (pr.alpha-1)*el1v
			l -= lgamma(g1+g2) - lgamma(g1) - lgamma(g2) + (g1-1)*elv + (g2-1)*el1v
		}
	}
	// −E[log q(Z)].
	l -= st.rlogr
	// Components.
	w := wsScratch[:d*d]
	tmp := wsScratch[d*d : 2*d*d]
	v := wsScratch[2*d*d : 2*d*d+d]
	y := wsScratch[2*d*d+d : 2*d*d+2*d]
	if e.s == mixture.Tied {
		// The shared Wishart's terms, once: E[log p(Λ)] − E[log q(Λ)]
		// (B.79, B.82); the per-component terms follow in the loop.
		nu, lnL := q.nu[0], q.elogdet[0]
		inverseFromCholesky(q.chol[:d*d], w, tmp, d)
		var trS0W float64
		for i, wv := range w {
			trS0W += pr.s0[i] * wv
		}
		h := -logWishartB(q.logDetW[0], nu, d) - 0.5*(nu-fd-1)*lnL + 0.5*nu*fd
		l += pr.lnB0 + 0.5*(pr.nu0-fd-1)*lnL - 0.5*nu*trS0W + h
	}
	for c := 0; c < k; c++ {
		n, beta := st.nk[c], q.beta[c]
		xb := st.xbar[c*d : (c+1)*d]
		mc := q.m[c*d : (c+1)*d]
		switch e.s {
		case mixture.Full:
			nu, lnL := q.nu[c], q.elogdet[c]
			chol := q.chol[c*d*d : (c+1)*d*d]
			inverseFromCholesky(chol, w, tmp, d)
			var trSW, trS0W float64
			sc := st.scat[c*d*d : (c+1)*d*d]
			for i, wv := range w {
				trSW += sc[i] * wv
				trS0W += pr.s0[i] * wv
			}
			qx, qm := wishartQuadratics(chol, xb, mc, pr.m0, v, y)
			// E[log p(X|Z,μ,Λ)], eq. 10.71.
			l += 0.5 * (n*(lnL-fd/beta-fd*log2Pi) - nu*(trSW+n*qx))
			// E[log p(μ,Λ)], eq. 10.74.
			l += 0.5*(fd*(math.Log(pr.beta0)-log2Pi)+lnL-fd*pr.beta0/beta-pr.beta0*nu*qm) +
				pr.lnB0 + 0.5*(pr.nu0-fd-1)*lnL - 0.5*nu*trS0W
			// −E[log q(μ,Λ)], eq. 10.77 with the Wishart entropy B.82.
			h := -logWishartB(q.logDetW[c], nu, d) - 0.5*(nu-fd-1)*lnL + 0.5*nu*fd
			l -= 0.5*lnL + 0.5*fd*(math.Log(beta)-log2Pi) - 0.5*fd - h
		case mixture.Tied:
			// w holds the shared W (computed above).
			nu, lnL := q.nu[0], q.elogdet[0]
			chol := q.chol[:d*d]
			var trSW float64
			for i, wv := range w {
				trSW += st.scat[c*d*d+i] * wv
			}
			qx, qm := wishartQuadratics(chol, xb, mc, pr.m0, v, y)
			// E[log p(X_k|Z,μ_k,Λ)], E[log p(μ_k|Λ)] and −E[log q(μ_k|Λ)].
			l += 0.5 * (n*(lnL-fd/beta-fd*log2Pi) - nu*(trSW+n*qx))
			l += 0.5 * (fd*(math.Log(pr.beta0)-log2Pi) + lnL - fd*pr.beta0/beta - pr.beta0*nu*qm)
			l -= 0.5*lnL + 0.5*fd*(math.Log(beta)-log2Pi) - 0.5*fd
		default:
			a := q.a[c]
			dpa := digamma(a)
			sc := st.scat[c*d : (c+1)*d]
			for g := 0; g < q.nblk; g++ {
				bv := q.b[c*q.nblk+g]
				elnl := dpa - math.Log(bv)
				el := a / bv
				var t, qx, qm float64
				for j := 0; j < d; j++ {
					if q.block(j) != g {
						continue
					}
					t += sc[j]
					dx := xb[j] - mc[j]
					dm := mc[j] - pr.m0[j]
					qx += dx * dx
					qm += dm * dm
				}
				dg := pr.dg
				b0 := pr.b0[g]
				l += 0.5 * (n*dg*(elnl-log2Pi-1/beta) - el*(t+n*qx))
				l += 0.5*(dg*(math.Log(pr.beta0)-log2Pi)+dg*elnl-dg*pr.beta0/beta-pr.beta0*el*qm) +
					pr.a0*math.Log(b0) - lgamma(pr.a0) + (pr.a0-1)*elnl - b0*el
				l -= 0.5*(dg*(math.Log(beta)-log2Pi)+dg*elnl-dg) +
					a*math.Log(bv) - lgamma(a) + (a-1)*elnl - a
			}
		}
	}
	return l
}

// wishartQuadratics returns (x̄ − m)ᵀ W (x̄ − m) and (m − m0)ᵀ W (m − m0)
// for the Wishart scale W whose inverse has the lower Cholesky factor chol;
// v and y are scratch of the dimension's length.
func wishartQuadratics(chol, xb, m, m0, v, y []float64) (qx, qm float64) {
	d := len(v)
	for j := range v {
		v[j] = xb[j] - m[j]
	}
	qx = solveNorm2(chol, v, y, d)
	for j := range v {
		v[j] = m[j] - m0[j]
	}
	qm = solveNorm2(chol, v, y, d)
	return qx, qm
}
