package em

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
}

// run iterates EM from st until the change of the mean per-row
// log-likelihood is at most the tolerance or the iteration cap is reached.
// Each pass is one E-step of the current parameters (its log-likelihood is
// that of the current parameters) fused with the statistics of the next
// M-step, so the parameters returned are always those whose log-likelihood
// was computed last.
func (p *problem) run(ctx context.Context, cfg *config, st *state, restart int, began time.Time, progress func(fitters.Progress)) (*runResult, error) {
	ps := newPass(p, st.K)
	res := &runResult{notes: layout.Notes{Max: maxNotes}}
	climb := loop.Climb{
		Who: Name, MaxIter: cfg.MaxIter, TolAbs: cfg.Tol * p.RelSum, Scale: p.WScale,
		K: st.K, Restart: restart, Began: began, Progress: progress,
	}
	var err error
	res.Trace, err = climb.Run(ctx,
		func() float64 { ps.run(st); return ps.total.ll },
		func(it int) bool { return !p.mstep(st, ps, it, res) })
	if err != nil {
		return nil, err
	}
	res.state = st
	res.logLik = res.History[len(res.History)-1]
	return res, nil
}

// mstep replaces st with the maximiser of the expected complete-data
// log-likelihood given the statistics in ps.total, applying the ridge and
// the collapse policy. It reports whether any component was re-seeded.
func (p *problem) mstep(st *state, ps *pass, it int, res *runResult) bool {
	t := &ps.total
	why := p.Step(&st.State, layout.Stats{N: t.nk, U: t.nk, X: t.sx, XX: t.sxx})
	sharedBad := ""
	if st.Structure == mixture.Tied {
		// Σ_c Σ r w (x−μ_c,new)(x−μ_c,new)ᵀ = sxx − Σ_c sx_c sx_cᵀ / nk_c.
		cov := st.CovOf(0)
		copy(cov, t.sxx)
		for c := 0; c < st.K; c++ {
			if nk := t.nk[c]; nk > 0 {
				layout.SubOuter(cov, t.sx[c*p.D:(c+1)*p.D], nk)
			}
		}
		sharedBad = p.FinishTied(&st.State)
	}
	_, replaced := p.Collapse(&st.State, why, sharedBad, ps.rowLD, it, &res.notes)
	st.setLogConst()
	return replaced
}
