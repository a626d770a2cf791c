package tmix

import (
	"math"

	"gonum.org/v1/gonum/mathext"

	"github.com/mixd-dev/mixd/fitters/mixture"
)

// dfSearchTol is the absolute tolerance on log ν of the ECME search and
// the ECM root finder: ν is located to a relative 1e-6.
const dfSearchTol = 1e-6

// dfFirstStep is the first step, in log ν, of an ECME search away from the
// current value (5%); later steps grow fourfold.
const dfFirstStep = 0.05

// dfSearchMaxEvals bounds the evaluations of each phase of one ECME search.
const dfSearchMaxEvals = 200

// dfOutcome says where a degrees-of-freedom step left ν.
type dfOutcome int

const (
	dfInside  dfOutcome = iota // an interior maximiser or root
	dfAtFloor                  // held at the floor
	dfAtCap                    // held at the cap
)

// dfStep is the degrees-of-freedom CM-step of one iteration, after the
// weights, means and scale matrices of st have been updated from the
// statistics of the E-step in ps. reseeded marks components re-seeded in
// this iteration. It returns, per component, whether ECM found no root of
// its equation inside [floor, cap] (ECM only; the value was set to the bound
// named by the outcome).
func (p *problem) dfStep(st *state, ps *pass, reseeded []bool) []dfOutcome {
	cfg := p.cfg
	out := make([]dfOutcome, st.K)
	if cfg.dfMode == dfFixed {
		return out
	}
	switch cfg.update {
	case updateECM:
		p.ecmStep(st, ps, reseeded, out)
	default:
		ps.distances(st)
		if cfg.sharing == shareAll {
			ps.ecmeShared(st)
		} else {
			for k := 0; k < st.K; k++ {
				ps.ecmeComponent(st, k)
			}
		}
	}
	st.setLogConst()
	return out
}

// ecmStep solves, per component (or once for a shared ν), the equation of
// the ECM degrees-of-freedom step (Peel and McLachlan, 2000, section 5):
//
//	1 − ψ(ν/2) + log(ν/2) + (1/n_k) Σ_i τ_ik (log u_ik − u_ik) + ψ((ν⁰+p)/2) − log((ν⁰+p)/2) = 0
//
// where ν⁰ is the current value, u_ik = (ν⁰+p)/(ν⁰+δ_ik) and the sums are
// the E-step's. The left side decreases in ν, so it has at most one root;
// it is found by bisection on log ν inside [floor, cap]. When the sign does
// not change inside the bracket, ν is set to the bound where the expected
// complete-data log-likelihood is largest (the left side is its derivative)
// and the outcome says so.
func (p *problem) ecmStep(st *state, ps *pass, reseeded []bool, out []dfOutcome) {
	cfg := p.cfg
	t := &ps.total
	d := float64(p.D)
	if cfg.sharing == shareAll {
		var slu, nk float64
		for k := 0; k < st.K; k++ {
			slu += t.slu[k]
			nk += t.nk[k]
		}
		nu, o := ecmRoot(slu/nk+digammaLogGap(0.5*(st.df[0]+d)), cfg.dfFloor, cfg.dfCap)
		for k := range st.df {
			st.df[k] = nu
			out[k] = o
		}
		return
	}
	for k := 0; k < st.K; k++ {
		if reseeded[k] || !(t.nk[k] > 0) {
			continue
		}
		st.df[k], out[k] = ecmRoot(t.slu[k]/t.nk[k]+digammaLogGap(0.5*(st.df[k]+d)), cfg.dfFloor, cfg.dfCap)
	}
}

// digammaLogGap returns ψ(a) − log(a) (negative for every a > 0).
func digammaLogGap(a float64) float64 { return mathext.Digamma(a) - math.Log(a) }

// ecmRoot returns the root in [lo, hi] of g(ν) = 1 + c − (ψ(ν/2) − log(ν/2)),
// or the bound where g keeps its sign, with the outcome.
func ecmRoot(c, lo, hi float64) (float64, dfOutcome) {
	g := func(nu float64) float64 { return 1 + c - digammaLogGap(0.5*nu) }
	switch {
	case !(g(lo) > 0):
		return lo, dfAtFloor
	case !(g(hi) < 0):
		return hi, dfAtCap
	}
	a, b := math.Log(lo), math.Log(hi)
	for b-a > dfSearchTol {
		m := 0.5 * (a + b)
		if m <= a || m >= b {
			break
		}
		if g(math.Exp(m)) > 0 {
			a = m
		} else {
			b = m
		}
	}
	return math.Min(math.Max(math.Exp(0.5*(a+b)), lo), hi), dfInside
}

// dfScore returns ½[ψ((ν+p)/2) − ψ(ν/2) − p/ν], the part of
// ∂/∂ν log f(x; μ, Σ, ν) that does not depend on the row; the row's part is
// ½[(ν+p)δ/(ν(ν+δ)) − log(1 + δ/ν)] (differentiating the Student-t
// log-density; see the package documentation).
func dfScore(nu, p float64) float64 {
	return 0.5 * (mathext.Digamma(0.5*(nu+p)) - mathext.Digamma(0.5*nu) - p/nu)
}

// sumChunks adds the per-chunk partial sums in chunk order.
func (ps *pass) sumChunks() (float64, float64) {
	var f, g float64
	for c, v := range ps.sums {
		f += v
		g += ps.gsums[c]
	}
	return f, g
}

// ecmeComponent maximises the observed-data log-likelihood over ν_k with
// every other parameter held at its current value (the ECME step of Liu and
// Rubin, 1995, applied to one component's degrees of freedom at a time) by
// searchDF on log ν in [floor, cap] from the current value, so the
// log-likelihood never decreases. ps.dist and ps.lt must hold st's
// distances and component terms; on return lt holds those of the new ν_k.
func (ps *pass) ecmeComponent(st *state, k int) {
	p := ps.p
	cfg := p.cfg
	K := ps.k
	d := float64(p.D)
	// other[i] = log Σ_{j≠k} w_j f_j(x_i).
	forChunks(len(p.chunks), func(ci int) {
		for i := p.chunks[ci].lo; i < p.chunks[ci].hi; i++ {
			row := ps.lt[i*K : (i+1)*K]
			m := math.Inf(-1)
			for j, v := range row {
				if j != k && v > m {
					m = v
				}
			}
			if math.IsInf(m, -1) {
				ps.other[i] = m
				continue
			}
			var s float64
			for j, v := range row {
				if j != k {
					s += math.Exp(v - m)
				}
			}
			ps.other[i] = m + math.Log(s)
		}
	})
	logW := math.Log(st.Weight[k])
	logDet := st.LogDet[st.CovIndex(k)]
	terms := func(nu float64) (float64, float64, float64) {
		return logW + mixture.LogNormalizer(mixture.StudentT, p.D, nu, logDet), 0.5 * (nu + d), 1 / nu
	}
	// fg returns −L and −∂L/∂log ν at θ = log ν.
	fg := func(theta float64) (float64, float64) {
		nu := math.Exp(theta)
		cst, h, inv := terms(nu)
		cg := dfScore(nu, d)
		forChunks(len(p.chunks), func(ci int) {
			var sf, sg float64
			for i := p.chunks[ci].lo; i < p.chunks[ci].hi; i++ {
				w := p.Weight(i)
				if w == 0 {
					continue
				}
				delta := ps.dist[i*K+k]
				t := math.Log1p(delta * inv)
				v := cst - h*t
				o := ps.other[i]
				var li, tau float64
				switch {
				case v-o < -50: // τ below 2e-22
					sf += w * o
					continue
				case o-v < -50: // also o = −Inf
					li, tau = v, 1
				case v > o:
					e := math.Exp(o - v)
					li, tau = v+math.Log1p(e), 1/(1+e)
				default:
					e := math.Exp(v - o)
					li, tau = o+math.Log1p(e), e/(1+e)
				}
				sf += w * li
				sg += w * tau * (cg + 0.5*(2*h*inv*(delta/(nu+delta))-t))
			}
			ps.sums[ci], ps.gsums[ci] = sf, sg
		})
		f, g := ps.sumChunks()
		return -f, -nu * g
	}
	nu := searchDF(fg, st.df[k], cfg.dfFloor, cfg.dfCap, &ps.curv[k])
	if nu == st.df[k] {
		return
	}
	st.df[k] = nu
	cst, h, inv := terms(nu)
	forChunks(len(p.chunks), func(ci int) {
		for i := p.chunks[ci].lo; i < p.chunks[ci].hi; i++ {
			ps.lt[i*K+k] = cst - h*math.Log1p(ps.dist[i*K+k]*inv)
		}
	})
}

// ecmeShared is ecmeComponent for one ν shared by every component.
func (ps *pass) ecmeShared(st *state) {
	p := ps.p
	cfg := p.cfg
	K := ps.k
	d := float64(p.D)
	logW := make([]float64, K)
	for j := range logW {
		logW[j] = math.Log(st.Weight[j])
	}
	cst := make([]float64, K)
	fg := func(theta float64) (float64, float64) {
		nu := math.Exp(theta)
		for j := 0; j < K; j++ {
			cst[j] = logW[j] + mixture.LogNormalizer(mixture.StudentT, p.D, nu, st.LogDet[st.CovIndex(j)])
		}
		h, inv := 0.5*(nu+d), 1/nu
		cg := dfScore(nu, d)
		forChunks(len(p.chunks), func(ci int) {
			v, tt := ps.chunks[ci].a, ps.chunks[ci].e
			var sf, sg float64
			for i := p.chunks[ci].lo; i < p.chunks[ci].hi; i++ {
				w := p.Weight(i)
				if w == 0 {
					continue
				}
				di := ps.dist[i*K : (i+1)*K]
				m := math.Inf(-1)
				for j, delta := range di {
					t := math.Log1p(delta * inv)
					x := cst[j] - h*t
					v[j], tt[j] = x, t
					if x > m {
						m = x
					}
				}
				var e, ge float64
				for j, x := range v {
					if x-m < -50 {
						continue
					}
					ej := math.Exp(x - m)
					e += ej
					ge += ej * (cg + 0.5*(2*h*inv*(di[j]/(nu+di[j]))-tt[j]))
				}
				sf += w * (m + math.Log(e))
				sg += w * ge / e
			}
			ps.sums[ci], ps.gsums[ci] = sf, sg
		})
		f, g := ps.sumChunks()
		return -f, -nu * g
	}
	nu := searchDF(fg, st.df[0], cfg.dfFloor, cfg.dfCap, &ps.curv[0])
	for j := range st.df {
		st.df[j] = nu
	}
}

// searchDF minimises f(θ), θ = log ν, over ν in [lo, hi] from the current
// value cur, given fg(θ) = (f(θ), f′(θ)). It first brackets a sign change
// of the derivative by steps away from cur in the downhill direction
// (the first step is twice the Newton step −f′/f″ with f″ remembered from
// the previous search, or dfFirstStep; steps grow fourfold and are clamped
// to the bounds), then narrows the bracket by the Illinois variant of
// regula falsi on f′ (Dowell and Jarratt, 1971) until it is narrower than
// dfSearchTol or the Newton step implied by its slope is. When f′ keeps its
// sign up to a bound the bound is the candidate. Every point evaluated is a
// candidate and the best one is returned; it is cur itself unless a
// strictly lower f was found, so f never increases. curv carries an
// estimate of f″ from one search to the next (0 when unknown).
func searchDF(fg func(float64) (float64, float64), cur, lo, hi float64, curv *float64) float64 {
	a, b := math.Log(lo), math.Log(hi)
	x0 := math.Min(math.Max(math.Log(cur), a), b)
	f0, g0 := fg(x0)
	best, fbest := cur, f0
	try := func(x float64) float64 {
		fx, gx := fg(x)
		if fx < fbest {
			fbest = fx
			switch x {
			case a:
				best = lo
			case b:
				best = hi
			default:
				best = math.Min(math.Max(math.Exp(x), lo), hi)
			}
		}
		return gx
	}
	if g0 == 0 || math.IsNaN(g0) {
		return best
	}
	// Bracket: p keeps the sign of g0, q has the other sign. With a
	// curvature f″ remembered from the previous search the first step is
	// twice the Newton step, which brackets the root when f″ has not
	// changed by more than a factor of two.
	dir := -math.Copysign(1, g0)
	p, gp := x0, g0
	q, gq := 0.0, 0.0
	found := false
	step := dfFirstStep
	if c := *curv; c > 0 {
		step = math.Min(math.Max(2*math.Abs(g0)/c, dfSearchTol), 1)
	}
	for evals := 1; evals < dfSearchMaxEvals; step, evals = step*4, evals+1 {
		x := math.Min(math.Max(p+dir*step, a), b)
		if x == p {
			break // at a bound with f still falling towards it
		}
		gx := try(x)
		if gx*g0 <= 0 || math.IsNaN(gx) {
			q, gq, found = x, gx, true
			break
		}
		p, gp = x, gx
	}
	if !found || math.IsNaN(gq) {
		return best
	}
	// Illinois regula falsi on the derivative inside [p, q]; rp, rq keep
	// the unhalved derivatives for the curvature estimate.
	rp, rq := gp, gq
	defer func() {
		if c := (rq - rp) / (q - p); c > 0 && !math.IsInf(c, 0) {
			*curv = c
		}
	}()
	side := 0
	for evals := 0; evals < dfSearchMaxEvals && math.Abs(q-p) > dfSearchTol && gq != 0; evals++ {
		x := (p*gq - q*gp) / (gq - gp)
		if !(x > math.Min(p, q) && x < math.Max(p, q)) {
			x = 0.5 * (p + q)
		}
		gx := try(x)
		if math.IsNaN(gx) {
			return best
		}
		// Stop once the Newton step implied by the bracket's slope is
		// below the tolerance.
		if c := (rq - rp) / (q - p); math.Abs(gx) <= dfSearchTol*math.Abs(c) {
			return best
		}
		switch {
		case gx*gq > 0:
			q, gq, rq = x, gx, gx
			if side == -1 {
				gp *= 0.5
			}
			side = -1
		case gx*gp > 0:
			p, gp, rp = x, gx, gx
			if side == 1 {
				gq *= 0.5
			}
			side = 1
		default: // gx == 0
			return best
		}
	}
	return best
}
