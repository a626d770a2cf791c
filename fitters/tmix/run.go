package tmix

import (
	"context"
	"time"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/internal/layout"
	"github.com/mixd-dev/mixd/fitters/internal/loop"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

// runResult is the outcome of one restart.
type runResult struct {
	loop.Trace
	state  *state
	logLik float64 // caller scale, of state
	notes  layout.Notes
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
	ps := newPass(p, st.K)
	res := &runResult{
		notes:       layout.Notes{Max: maxNotes},
		noRoot:      make([]int, st.K),
		noRootFirst: make([]int, st.K),
		noRootLast:  make([]dfOutcome, st.K),
	}
	climb := loop.Climb{
		Who: Name, MaxIter: cfg.MaxIter, TolAbs: cfg.Tol * p.RelSum, Scale: p.WScale,
		K: st.K, Restart: restart, Began: began, Progress: progress,
	}
	update := func(it int) bool {
		reseeded, replaced := p.mstep(st, ps, it, res)
		for c, o := range p.dfStep(st, ps, reseeded) {
			if o == dfInside || cfg.update != updateECM {
				continue
			}
			if res.noRoot[c] == 0 {
				res.noRootFirst[c] = it
			}
			res.noRoot[c]++
			res.noRootLast[c] = o
		}
		return !replaced
	}
	var err error
	res.Trace, err = climb.Run(ctx, func() float64 { ps.estep(st); return ps.total.ll }, update)
	if err != nil {
		return nil, err
	}
	res.state = st
	res.logLik = res.History[len(res.History)-1]
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
	cfg := p.cfg
	why := p.Step(&st.State, layout.Stats{N: t.nk, U: t.su, X: t.sx, XX: t.sxx})
	sharedBad := ""
	if st.Structure == mixture.Tied {
		// Σ_c (sxx_c − sx_c sx_cᵀ / su_c), each component's scatter about its new mean.
		d, cl := p.D, layout.Len(st.Structure, p.D)
		cov := st.CovOf(0)
		clear(cov)
		tmp := make([]float64, cl)
		for c := 0; c < st.K; c++ {
			if !(t.su[c] > 0) {
				continue
			}
			copy(tmp, t.sxx[c*cl:(c+1)*cl])
			layout.SubOuter(tmp, t.sx[c*d:(c+1)*d], t.su[c])
			for i, v := range tmp {
				cov[i] += v
			}
		}
		sharedBad = p.FinishTied(&st.State)
	}

	reseeded, replaced := p.Collapse(&st.State, why, sharedBad, ps.rowLD, it, &res.notes)
	if cfg.dfMode == dfEstimate && cfg.sharing == sharePerComponent {
		for c, again := range reseeded {
			if again {
				st.df[c] = cfg.dfStart
			}
		}
	}
	ps.distValid = false
	st.setLogConst()
	return reseeded, replaced
}
