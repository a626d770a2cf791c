package tmix

import (
	"context"
	"fmt"
	"math"
	"time"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

// runResult is the outcome of one restart.
type runResult struct {
	state      *state
	logLik     float64   // caller scale, of state
	history    []float64 // caller scale; history[t] is after t iterations
	iterations int
	converged  bool
	maxIter    int
	notes      []string
	collapses  int
	// ECM only, per component: iterations whose degrees-of-freedom equation
	// had no root inside [floor, cap], the first of them, and the bound
	// used the last time.
	noRoot      []int
	noRootFirst []int
	noRootLast  []dfOutcome
}

// run iterates ECM or ECME from st until the change of the mean per-row
// log-likelihood is at most the tolerance or the iteration cap is reached.
// Each iteration is an E-step of the current parameters (its log-likelihood
// is that of the current parameters, recorded in the history) followed by
// the CM-step for weights, means and scale matrices and then the
// degrees-of-freedom step; so the parameters returned are always those
// whose log-likelihood was computed last.
func (p *problem) run(ctx context.Context, cfg *config, st *state, restart int, began time.Time, progress func(fitters.Progress)) (*runResult, error) {
	ps := newPass(p, st.k)
	res := &runResult{
		maxIter:     cfg.maxIter,
		noRoot:      make([]int, st.k),
		noRootFirst: make([]int, st.k),
		noRootLast:  make([]dfOutcome, st.k),
	}
	tolAbs := cfg.tol * p.iwsum
	var prev float64
	checkable := false
	for it := 0; ; it++ {
		if err := fitters.ContextError(ctx); err != nil {
			return nil, err
		}
		ps.estep(st)
		ll := ps.total.ll
		if math.IsNaN(ll) || math.IsInf(ll, 0) {
			return nil, fitters.Errorf(fitters.Internal, "tmix: log-likelihood is %v at iteration %d (K=%d, restart %d)", ll, it, st.k, restart)
		}
		callerLL := ll * p.wscale
		res.history = append(res.history, callerLL)
		if progress != nil {
			progress(fitters.Progress{Components: st.k, Restart: restart, Iteration: it, Objective: callerLL, Elapsed: time.Since(began)})
		}
		if checkable && math.Abs(ll-prev) <= tolAbs {
			res.converged = true
			break
		}
		if it >= cfg.maxIter {
			break
		}
		reseeded, replaced := p.mstep(st, ps, it+1, res)
		for c, o := range p.dfStep(st, ps, reseeded) {
			if o == dfInside || cfg.update != updateECM {
				continue
			}
			if res.noRoot[c] == 0 {
				res.noRootFirst[c] = it + 1
			}
			res.noRoot[c]++
			res.noRootLast[c] = o
		}
		prev = ll
		checkable = !replaced
		res.iterations = it + 1
	}
	res.state = st
	res.logLik = res.history[len(res.history)-1]
	return res, nil
}

// mstep replaces the weights, means and scale matrices of st with the
// maximisers of the expected complete-data log-likelihood given the E-step
// statistics in ps.total (the first CM-step of Peel and McLachlan, 2000):
//
//	w_k = n_k / n,   μ_k = Σ τ u x / Σ τ u,   Σ_k = Σ τ u (x−μ_k)(x−μ_k)ᵀ / n_k
//
// with n_k = Σ τ (row weights included), restricted to the structure
// (diagonal: the diagonal; spherical: the mean diagonal; tied: the scatter
// of every component over n), then adds the ridge and applies the collapse
// policy. It reports which components were re-seeded and whether any
// matrix was replaced.
func (p *problem) mstep(st *state, ps *pass, it int, res *runResult) ([]bool, bool) {
	t := &ps.total
	d, k := p.d, st.k
	cfg := p.cfg
	cl := covLen(st.structure, d)
	why := make([]string, k)

	// Weights and means: μ_new = μ_old + Σ τ u w (x−μ_old) / Σ τ u w.
	for c := 0; c < k; c++ {
		nk, su := t.nk[c], t.su[c]
		if eff := p.effRows(nk); !(eff >= cfg.minRows) {
			why[c] = fmt.Sprintf("%.3g effective rows, below the minimum %g", eff, cfg.minRows)
			continue
		}
		if !(su > 0) {
			why[c] = "every latent row weight underflowed"
			continue
		}
		st.weight[c] = nk / p.iwsum
		mu := st.mean[c*d : (c+1)*d]
		sx := t.sx[c*d : (c+1)*d]
		for j := range mu {
			mu[j] += sx[j] / su
		}
	}

	// Scatter about the new means: Σ τ u w (x−μ_new)(x−μ_new)ᵀ = sxx − sx sxᵀ / su.
	sharedBad := ""
	switch st.structure {
	case mixture.Full:
		for c := 0; c < k; c++ {
			if why[c] != "" {
				continue
			}
			cov := st.covOf(c)
			copy(cov, t.sxx[c*cl:(c+1)*cl])
			subOuter(cov, t.sx[c*d:(c+1)*d], t.su[c])
			p.finishCov(cov, t.nk[c])
			why[c] = p.factorCov(st, c)
		}
	case mixture.Diagonal, mixture.Spherical:
		for c := 0; c < k; c++ {
			if why[c] != "" {
				continue
			}
			su := t.su[c]
			sx := t.sx[c*d : (c+1)*d]
			cov := st.covOf(c)
			for j := 0; j < d; j++ {
				cov[j] = t.sxx[c*d+j] - sx[j]*sx[j]/su
			}
			p.finishCov(cov, t.nk[c])
			why[c] = p.factorCov(st, c)
		}
	case mixture.Tied:
		cov := st.covOf(0)
		clear(cov)
		tmp := make([]float64, cl)
		for c := 0; c < k; c++ {
			if !(t.su[c] > 0) {
				continue
			}
			copy(tmp, t.sxx[c*cl:(c+1)*cl])
			subOuter(tmp, t.sx[c*d:(c+1)*d], t.su[c])
			for i, v := range tmp {
				cov[i] += v
			}
		}
		p.finishCov(cov, p.iwsum)
		if bad := p.factorCov(st, 0); bad != "" {
			sharedBad = bad
			copy(cov, p.fallback)
			// The fallback was checked by prepare, so this cannot fail.
			_ = p.factorCov(st, 0)
		}
	}

	if sharedBad != "" {
		res.addNote(fmt.Sprintf("the shared scale matrix was not usable at iteration %d (%s) and was replaced by the data covariance", it, sharedBad))
	}
	replaced := sharedBad != ""
	reseeded := make([]bool, k)
	used := map[int]bool{}
	for c := 0; c < k; c++ {
		if why[c] == "" {
			continue
		}
		replaced = true
		reseeded[c] = true
		row := p.worstRow(ps.rowLD, used)
		used[row] = true
		copy(st.mean[c*d:(c+1)*d], p.row(row))
		st.weight[c] = 1 / float64(k)
		if st.structure != mixture.Tied {
			copy(st.covOf(c), p.fallback)
			_ = p.factorCov(st, c) // checked by prepare
		}
		if cfg.dfMode == dfEstimate && cfg.sharing == sharePerComponent {
			st.df[c] = cfg.dfStart
		}
		res.addNote(fmt.Sprintf("component %d collapsed at iteration %d (%s) and was re-seeded at row %d", c, it, why[c], row))
	}
	if replaced {
		var s float64
		for _, w := range st.weight {
			s += w
		}
		for c := range st.weight {
			st.weight[c] /= s
		}
	}
	ps.distValid = false
	st.setLogConst()
	return reseeded, replaced
}

// subOuter subtracts s sᵀ / su from the packed lower triangle cov.
func subOuter(cov, s []float64, su float64) {
	off := 0
	for j := range s {
		for l := 0; l <= j; l++ {
			cov[off+l] -= s[j] * s[l] / su
		}
		off += j + 1
	}
}

// worstRow returns the row of positive weight with the lowest mixture
// log-density that is not in used; ties go to the lower row index.
func (p *problem) worstRow(rowLD []float64, used map[int]bool) int {
	best, bv := -1, math.Inf(1)
	for i, v := range rowLD {
		if p.rowWeight(i) == 0 || used[i] {
			continue
		}
		if best < 0 || v < bv {
			best, bv = i, v
		}
	}
	if best < 0 { // more collapsed components than rows: reuse the worst row
		return p.worstRow(rowLD, nil)
	}
	return best
}

func (r *runResult) addNote(s string) {
	r.collapses++
	if len(r.notes) < maxNotes {
		r.notes = append(r.notes, s)
	}
}
