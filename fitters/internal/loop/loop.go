// Package loop is the outer machinery the em, tmix and vb fitters share
// around their own iteration steps: the restarts of one K, the choice among
// several K by a criterion, the iteration loop of a monotone
// log-likelihood ascent (em, tmix), the parallel passes over fixed chunks of
// rows, and the closing notes of a report.
//
// Determinism: every function here runs its callbacks in a fixed order, and
// Parallel leaves the combination of chunk results to the caller, who adds
// them in chunk order; so results do not depend on GOMAXPROCS.
package loop

import (
	"context"
	"fmt"
	"math"
	"sync"
	"sync/atomic"
	"time"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

// Parallel calls fn(worker, c) once for every chunk c in [0, n) on up to
// workers goroutines; worker, in [0, workers), identifies the goroutine, so
// fn may use per-worker scratch. With workers ≤ 1 the chunks run in order on
// the calling goroutine as worker 0. fn must write only to what chunk c or
// the worker owns.
func Parallel(workers, n int, fn func(worker, c int)) {
	if workers <= 1 {
		for c := 0; c < n; c++ {
			fn(0, c)
		}
		return
	}
	var next atomic.Int64
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Go(func() {
			for {
				c := int(next.Add(1) - 1)
				if c >= n {
					return
				}
				fn(w, c)
			}
		})
	}
	wg.Wait()
}

// AddTo adds src[i] to dst[i] for every i < len(dst), as when chunk sums
// are combined in chunk order.
func AddTo(dst, src []float64) {
	src = src[:len(dst)]
	for i, v := range src {
		dst[i] += v
	}
}

// Restarts runs n restarts in order, checking ctx before each, and keeps
// the first one with the highest objective; run returns a restart's result
// and objective. It returns the best result and its index.
func Restarts[T any](ctx context.Context, n int, run func(r int) (T, float64, error)) (best T, index int, err error) {
	have := false
	var top float64
	for r := 0; r < n; r++ {
		if err := fitters.ContextError(ctx); err != nil {
			return best, 0, err
		}
		res, obj, err := run(r)
		if err != nil {
			return best, 0, err
		}
		if !have || obj > top {
			best, index, top, have = res, r, obj, true
		}
	}
	return best, index, nil
}

// Outcome is what the choice of K needs to know about the fit kept for one K.
type Outcome struct {
	LogLik     float64
	BIC, AIC   float64
	Converged  bool
	Iterations int
}

// Score is the outcome's value of criterion c (AIC, otherwise BIC); lower
// is better.
func (o Outcome) Score(c fitters.Criterion) float64 {
	if c == fitters.AIC {
		return o.AIC
	}
	return o.BIC
}

// Report starts the report of the fit o summarises: its iterations,
// convergence, log-likelihood and criteria, with the objective's name and
// history and the model-selection table.
func (o Outcome) Report(objective string, history []float64, table []fitters.SelectionRow) fitters.Report {
	return fitters.Report{
		Iterations:    o.Iterations,
		Converged:     o.Converged,
		Objective:     objective,
		LogLikelihood: o.LogLik,
		BIC:           o.BIC,
		AIC:           o.AIC,
		History:       history,
		Selection:     table,
	}
}

// Summary returns o; a fit result that embeds an Outcome thereby satisfies
// Summarised.
func (o Outcome) Summary() Outcome { return o }

// Summarised is a fit result that carries its Outcome.
type Summarised interface{ Summary() Outcome }

// ChooseK fits every K from kMin to kMax in order and keeps the first with
// the lowest criterion c. When selecting it also returns the table of all
// of them (nil otherwise).
func ChooseK[T Summarised](kMin, kMax int, selecting bool, c fitters.Criterion, fit func(k int) (T, error)) (best T, table []fitters.SelectionRow, err error) {
	var top Outcome
	for k := kMin; k <= kMax; k++ {
		res, err := fit(k)
		if err != nil {
			return best, nil, err
		}
		out := res.Summary()
		if selecting {
			table = append(table, fitters.SelectionRow{
				Components:    k,
				LogLikelihood: out.LogLik,
				BIC:           out.BIC,
				AIC:           out.AIC,
				Converged:     out.Converged,
				Iterations:    out.Iterations,
			})
		}
		if k == kMin || out.Score(c) < top.Score(c) {
			best, top = res, out
		}
	}
	return best, table, nil
}

// EndNotes are the closing notes of a report: which of several restarts
// won (by the highest objective, e.g. "log-likelihood" or "bound"), and that
// the iteration cap stopped the winner before it converged.
func EndNotes(restart, restarts int, objective string, iterations, maxIter int, converged bool) []string {
	var notes []string
	if restarts > 1 {
		notes = append(notes, fmt.Sprintf("restart %d of %d gave the highest %s", restart+1, restarts, objective))
	}
	if !converged && maxIter > 0 {
		notes = append(notes, fmt.Sprintf("stopped after %d iterations without meeting the tolerance", iterations))
	}
	return notes
}

// LogLikelihood returns the total weighted log-likelihood of the rows x
// (weights w, nil for unit weights) under m. A failure, or a value that is
// not finite, is an Internal error "<who>: log-likelihood of <what>...".
func LogLikelihood(m *mixture.Model, x, w []float64, who, what string) (float64, error) {
	ll, err := m.LogLikelihood(x, w)
	if err != nil {
		return 0, fitters.Errorf(fitters.Internal, "%s: log-likelihood of %s: %v", who, what, err)
	}
	if math.IsNaN(ll) || math.IsInf(ll, 0) {
		return 0, fitters.Errorf(fitters.Internal, "%s: log-likelihood of %s is %v", who, what, ll)
	}
	return ll, nil
}

// Climb drives the iterations of one restart of a log-likelihood ascent.
type Climb struct {
	// Who is the fitter's name, the prefix of its internal errors.
	Who string
	// MaxIter caps the iterations (0: evaluate the start only).
	MaxIter int
	// TolAbs is the convergence threshold on the change of the internal
	// log-likelihood between iterations.
	TolAbs float64
	// Scale turns an internal log-likelihood into the caller's.
	Scale float64
	// K and Restart identify the run in progress events and errors.
	K, Restart int
	Began      time.Time
	Progress   func(fitters.Progress)
}

// Trace is the record of one Climb.
type Trace struct {
	// History holds the caller-scale log-likelihood after each iteration;
	// History[t] is after t iterations, History[0] that of the start.
	History    []float64
	Iterations int
	Converged  bool
}

// Run alternates evaluate, which computes the internal log-likelihood of the
// current parameters (an E-step), and update, which moves the parameters to
// iteration it (an M-step) and reports whether the next log-likelihood may
// be compared with this one (false after a re-seed). It stops when two
// comparable log-likelihoods differ by at most TolAbs, or after MaxIter
// updates; the parameters are then always those evaluated last. It checks
// ctx before every evaluation and fails (Internal) on a log-likelihood that
// is not finite.
func (c *Climb) Run(ctx context.Context, evaluate func() float64, update func(it int) bool) (Trace, error) {
	var t Trace
	var prev float64
	checkable := false
	for it := 0; ; it++ {
		if err := fitters.ContextError(ctx); err != nil {
			return Trace{}, err
		}
		ll := evaluate()
		if math.IsNaN(ll) || math.IsInf(ll, 0) {
			return Trace{}, fitters.Errorf(fitters.Internal, "%s: log-likelihood is %v at iteration %d (K=%d, restart %d)", c.Who, ll, it, c.K, c.Restart)
		}
		callerLL := ll * c.Scale
		t.History = append(t.History, callerLL)
		if c.Progress != nil {
			c.Progress(fitters.Progress{Components: c.K, Restart: c.Restart, Iteration: it, Objective: callerLL, Elapsed: time.Since(c.Began)})
		}
		if checkable && math.Abs(ll-prev) <= c.TolAbs {
			t.Converged = true
			break
		}
		if it >= c.MaxIter {
			break
		}
		checkable = update(it + 1)
		prev = ll
		t.Iterations = it + 1
	}
	return t, nil
}
