package em

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
}

// run iterates EM from st until the change of the mean per-row
// log-likelihood is at most the tolerance or the iteration cap is reached.
// Each pass is one E-step of the current parameters (its log-likelihood is
// that of the current parameters) fused with the statistics of the next
// M-step, so the parameters returned are always those whose log-likelihood
// was computed last.
func (p *problem) run(ctx context.Context, cfg *config, st *state, restart int, began time.Time, progress func(fitters.Progress)) (*runResult, error) {
	ps := newPass(p, st.k)
	res := &runResult{maxIter: cfg.maxIter}
	tolAbs := cfg.tol * p.iwsum
	var prev float64
	checkable := false
	for it := 0; ; it++ {
		if err := fitters.ContextError(ctx); err != nil {
			return nil, err
		}
		ps.run(st)
		ll := ps.total.ll
		if math.IsNaN(ll) || math.IsInf(ll, 0) {
			return nil, fitters.Errorf(fitters.Internal, "em: log-likelihood is %v at iteration %d (K=%d, restart %d)", ll, it, st.k, restart)
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
		reseeded := p.mstep(st, ps, it+1, res)
		prev = ll
		checkable = !reseeded
		res.iterations = it + 1
	}
	res.state = st
	res.logLik = res.history[len(res.history)-1]
	return res, nil
}

// mstep replaces st with the maximiser of the expected complete-data
// log-likelihood given the statistics in ps.total, applying the ridge and
// the collapse policy. It reports whether any component was re-seeded.
func (p *problem) mstep(st *state, ps *pass, it int, res *runResult) bool {
	t := &ps.total
	d, k := p.d, st.k
	cfg := p.cfg
	cl := covLen(st.structure, d)
	why := make([]string, k)

	// Weights and means: μ_new = μ_old + Σ r w (x−μ_old) / Σ r w.
	for c := 0; c < k; c++ {
		nk := t.nk[c]
		if eff := p.effRows(nk); !(eff >= cfg.minRows) {
			why[c] = fmt.Sprintf("%.3g effective rows, below the minimum %g", eff, cfg.minRows)
			continue
		}
		st.weight[c] = nk / p.iwsum
		mu := st.mean[c*d : (c+1)*d]
		sx := t.sx[c*d : (c+1)*d]
		for j := range mu {
			mu[j] += sx[j] / nk
		}
	}

	// Covariances: Σ r w (x−μ_new)(x−μ_new)ᵀ = sxx − sx sxᵀ / nk.
	sharedBad := ""
	switch st.structure {
	case mixture.Full:
		for c := 0; c < k; c++ {
			if why[c] != "" {
				continue
			}
			nk := t.nk[c]
			sx := t.sx[c*d : (c+1)*d]
			cov := st.covOf(c)
			copy(cov, t.sxx[c*cl:(c+1)*cl])
			off := 0
			for j := 0; j < d; j++ {
				for l := 0; l <= j; l++ {
					cov[off+l] -= sx[j] * sx[l] / nk
				}
				off += j + 1
			}
			p.finishCov(cov, nk)
			why[c] = p.factorCov(st, c)
		}
	case mixture.Diagonal, mixture.Spherical:
		for c := 0; c < k; c++ {
			if why[c] != "" {
				continue
			}
			nk := t.nk[c]
			sx := t.sx[c*d : (c+1)*d]
			cov := st.covOf(c)
			for j := 0; j < d; j++ {
				cov[j] = t.sxx[c*d+j] - sx[j]*sx[j]/nk
			}
			p.finishCov(cov, nk)
			why[c] = p.factorCov(st, c)
		}
	case mixture.Tied:
		cov := st.covOf(0)
		copy(cov, t.sxx)
		for c := 0; c < k; c++ {
			nk := t.nk[c]
			if !(nk > 0) {
				continue
			}
			sx := t.sx[c*d : (c+1)*d]
			off := 0
			for j := 0; j < d; j++ {
				for l := 0; l <= j; l++ {
					cov[off+l] -= sx[j] * sx[l] / nk
				}
				off += j + 1
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
		res.addNote(fmt.Sprintf("the shared covariance was not usable at iteration %d (%s) and was replaced by the data covariance", it, sharedBad))
	}
	reseeded := sharedBad != ""
	used := map[int]bool{}
	for c := 0; c < k; c++ {
		if why[c] == "" {
			continue
		}
		reseeded = true
		row := p.worstRow(ps.rowLD, used)
		used[row] = true
		copy(st.mean[c*d:(c+1)*d], p.x[row*d:(row+1)*d])
		st.weight[c] = 1 / float64(k)
		if st.structure != mixture.Tied {
			copy(st.covOf(c), p.fallback)
			_ = p.factorCov(st, c) // checked by prepare
		}
		res.addNote(fmt.Sprintf("component %d collapsed at iteration %d (%s) and was re-seeded at row %d", c, it, why[c], row))
	}
	if reseeded {
		var s float64
		for _, w := range st.weight {
			s += w
		}
		for c := range st.weight {
			st.weight[c] /= s
		}
	}
	st.setLogConst()
	return reseeded
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
