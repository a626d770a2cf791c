package vb

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"time"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/internal/loop"
	"github.com/mixd-dev/mixd/fitters/internal/settings"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

// Version is the version of this estimator, reported by Describe and
// recorded in every model it fits.
const Version = "1.0.0"

// Name is the name under which this estimator is registered.
const Name = "vb"

// Defaults and thresholds; see the package documentation for the reasoning.
const (
	// DefaultTolerance is the convergence threshold on the relative change of
	// the bound between iterations: |L_t − L_{t−1}| ≤ tol·|L_t|.
	DefaultTolerance = 1e-10
	// DefaultMaxIterations caps the iterations of one restart.
	DefaultMaxIterations = 2000
	// DefaultRestarts is the number of k-means++ starts tried per K.
	DefaultRestarts = 3
	// NoIterations, as Settings.MaxIterations, asks for no iteration at all:
	// the variational distribution is the one computed from the start.
	NoIterations = -1
	// DefaultMeanStrength is the default β0, the prior's weight on its mean in
	// units of rows.
	DefaultMeanStrength = 1.0
	// DefaultStickConcentration is the default concentration of the
	// stick-breaking prior (the Dirichlet prior's default is 1/K).
	DefaultStickConcentration = 1.0
	// MinServedWeight is the expected weight below which a component is left
	// out of the served model (the remaining weights are renormalised).
	MinServedWeight = 1e-10
	// MaxPriorMeanDistance is the largest accepted distance of a prior mean
	// (option prior_mean) from the data mean, per column, in standard
	// deviations of the data; farther means make the posterior inverse scale
	// matrices numerically singular.
	MaxPriorMeanDistance = 1e6
	// MinHyperparameter and MaxHyperparameter bound the options concentration
	// and mean_strength (and, above, wishart_dof), so that no term of the
	// bound overflows.
	MinHyperparameter = 1e-300
	MaxHyperparameter = 1e12
	// MinInverseScale and MaxInverseScale bound the magnitude of the values
	// of option wishart_inverse_scale (its diagonal, for the lower bound) and
	// of the ridge.
	MinInverseScale = 1e-250
	MaxInverseScale = 1e250
)

// maxListed caps the number of component indices listed in one note.
const maxListed = 20

// Fitter is the variational Bayesian estimator for Gaussian mixtures. It
// holds no state between calls and is safe for concurrent use.
type Fitter struct{}

var _ fitters.Fitter = (*Fitter)(nil)

// New returns a variational Bayesian fitter.
func New() *Fitter { return &Fitter{} }

// method describes this fitter to the shared settings resolution.
func method() settings.Method {
	return settings.Method{
		Name:       Name,
		Structures: []mixture.Structure{mixture.Full, mixture.Tied, mixture.Diagonal, mixture.Spherical},
		Defaults:   settings.Defaults{MaxIterations: DefaultMaxIterations, Tolerance: DefaultTolerance, Restarts: DefaultRestarts},
		Style:      settings.Plain,
	}
}

// Describe reports the estimator's name, version, supported families and
// structures, and its method-specific options.
func (f *Fitter) Describe(ctx context.Context) (fitters.Info, error) {
	return method().Describe(ctx, fitters.Info{
		Version: Version,
		Description: "Variational Bayes for Gaussian mixtures (Dirichlet or stick-breaking weights, " +
			"Normal-Wishart components): surplus components shrink to their prior; serves the " +
			"posterior predictive Student-t mixture (family student_t) or the plug-in Gaussian mixture (family gaussian)",
		Families: []mixture.Family{mixture.Gaussian, mixture.StudentT},
		Options: []fitters.OptionInfo{
			{Name: OptWeightPrior, Description: "prior on the weights: dirichlet (finite, symmetric) or stick_breaking (truncated Dirichlet process)", Default: "dirichlet"},
			{Name: OptConcentration, Description: "concentration of the weight prior (a positive number); small values favour few components", Default: "1/K for dirichlet, 1 for stick_breaking"},
			{Name: OptMeanStrength, Description: "strength of the prior on each mean, in rows (a positive number)", Default: "1"},
			{Name: OptPriorMean, Description: "prior mean of every component: one comma-separated value per column", Default: "the (weighted) data mean"},
			{Name: OptWishartDOF, Description: "degrees of freedom of the Wishart prior on each precision (full, tied: more than D-1; diagonal, spherical: positive)", Default: "D, the number of columns"},
			{Name: OptInverseScale, Description: "inverse scale matrix of the Wishart prior: D*D comma-separated values, row-major (full, tied), D values (diagonal) or 1 value (spherical); the ridge is added to its diagonal", Default: "the data covariance (divisor n-1); diagonal: the data variances; spherical: their mean"},
			{Name: OptServedModel, Description: "model stored and served: predictive (posterior predictive Student-t mixture) or plugin (Gaussian mixture at the expected precisions); a requested family (student_t or gaussian) chooses the same way", Default: "from the family if given; otherwise predictive for full and spherical, plugin for tied and diagonal"},
			{Name: OptMinRows, Description: "expected row count from which a component counts as effective (a positive number)", Default: "D+1"},
		},
	})
}

// Posterior is a fitted variational distribution q(π) Π_k q(μ_k, Λ_k), in the
// parametrisation of Bishop (2006, section 10.2): q(μ_k, Λ_k) =
// N(μ_k | m_k, (β_k Λ_k)⁻¹) W(Λ_k | W_k, ν_k). For the diagonal structure
// each coordinate j has its own one-dimensional Wishart (a gamma
// distribution) with ν_k degrees of freedom and inverse scale InverseScale[k][j];
// for the spherical one, Λ_k = λ_k I with λ_k ~ Gamma(Dν_k/2, D·InverseScale[k][0]/2)
// (shape, rate). For the tied structure one Wishart(W, ν) is shared by
// every component (μ_k | Λ ~ N(m_k, (β_k Λ)⁻¹)): each entry of DOF and of
// InverseScale holds that one distribution.
type Posterior struct {
	Structure mixture.Structure
	// WeightPrior is "dirichlet" or "stick_breaking".
	WeightPrior string
	// Concentration holds the Dirichlet parameters α_k (K values), or for
	// stick-breaking the first shapes γ_k1 of the K−1 Beta sticks.
	Concentration []float64
	// StickShape2 holds the second shapes γ_k2 of the Beta sticks
	// (stick-breaking only, K−1 values).
	StickShape2 []float64
	// ExpectedWeights are E[π_k]; ExpectedRows are N_k = Σ_n w_n r_nk.
	ExpectedWeights []float64
	ExpectedRows    []float64
	// MeanStrength holds β_k; Means the m_k.
	MeanStrength []float64
	Means        [][]float64
	// DOF holds ν_k.
	DOF []float64
	// InverseScale holds W_k⁻¹: D×D row-major (full), D values (diagonal) or
	// one value (spherical).
	InverseScale [][]float64
}

// Fit estimates a Gaussian mixture by variational Bayes and returns the
// served model (see the package documentation).
func (f *Fitter) Fit(ctx context.Context, data fitters.Data, s fitters.Settings, progress func(fitters.Progress)) (*fitters.Result, error) {
	res, _, err := f.FitPosterior(ctx, data, s, progress)
	return res, err
}

// FitPosterior is Fit that also returns the fitted variational distribution
// of the chosen K.
func (f *Fitter) FitPosterior(ctx context.Context, data fitters.Data, s fitters.Settings, progress func(fitters.Progress)) (*fitters.Result, *Posterior, error) {
	began := time.Now()
	if err := fitters.ContextError(ctx); err != nil {
		return nil, nil, err
	}
	prob, err := newProblem(data)
	if err != nil {
		return nil, nil, err
	}
	cfg, err := resolve(data, s, prob)
	if err != nil {
		return nil, nil, err
	}
	rng := rand.New(rand.NewPCG(cfg.seed, seedStream))

	best, selection, err := loop.ChooseK(cfg.k.Min, cfg.k.Max, cfg.k.Selecting, cfg.Criterion, func(k int) (*kResult, error) {
		return prob.fitK(ctx, cfg, k, rng, began, progress)
	})
	if err != nil {
		return nil, nil, err
	}
	rep := best.Report("variational_bound", best.run.history, selection)
	rep.Bound = best.run.bound
	rep.EffectiveComponents = best.effective
	rep.Notes = append(best.notes, cfg.k.Chosen(best.k, cfg.Criterion)...)
	rep.Settings = cfg.echo(prob, best.k)
	return &fitters.Result{Params: best.params, Report: rep}, best.run.export(prob.D, cfg), nil
}

// seedStream is the fixed second PCG word; the first is Settings.Seed.
const seedStream = 0x6d69786476623031 // "mixdvb01"

// runResult is one restart's outcome.
type runResult struct {
	q          *posterior
	st         *stats
	bound      float64
	history    []float64
	iterations int
	converged  bool
	restart    int
}

// kResult is the best restart for one K with its served model.
type kResult struct {
	loop.Outcome
	k         int
	run       *runResult
	params    mixture.Params
	effective int
	notes     []string
}

// fitK runs every restart for k components, keeps the one with the highest
// bound and builds its served model.
func (p *problem) fitK(ctx context.Context, cfg *config, k int, rng *rand.Rand, began time.Time, progress func(fitters.Progress)) (*kResult, error) {
	pr, err := cfg.priorFor(p, k)
	if err != nil {
		return nil, err
	}
	e := newEngine(p, pr, cfg.Structure, k)
	best, _, err := loop.Restarts(ctx, cfg.Restarts, func(r int) (*runResult, float64, error) {
		if err := e.startResp(cfg, rng); err != nil {
			return nil, 0, err
		}
		run, err := e.run(ctx, cfg, r, began, progress)
		if err != nil {
			return nil, 0, err
		}
		return run, run.bound, nil
	})
	if err != nil {
		return nil, err
	}
	return p.serve(cfg, k, best)
}

// startResp sets the starting responsibilities: from caller parameters
// (their posterior probabilities), caller labels, or k-means++ seeds with a
// nearest-seed assignment.
func (e *engine) startResp(cfg *config, rng *rand.Rand) error {
	k := e.k
	switch {
	case cfg.start.Params != nil:
		m, err := mixture.New(*cfg.start.Params)
		if err != nil {
			return &fitters.Error{Code: fitters.InvalidArgument, Msg: "start", Err: err}
		}
		if err := m.Posteriors(e.p.X, nil, e.r, nil); err != nil {
			return fitters.Errorf(fitters.Internal, "vb: posteriors of the start: %v", err)
		}
		return nil
	case cfg.start.Labels != nil:
		return e.oneHot(cfg.start.Labels)
	}
	seeds, err := e.p.kmeansPP(k, rng)
	if err != nil {
		return err
	}
	return e.oneHot(e.p.nearest(seeds))
}

func (e *engine) oneHot(labels []int) error {
	k := e.k
	clear(e.r)
	seen := make([]bool, k)
	for i, l := range labels {
		e.r[i*k+l] = 1
		if e.p.Weight(i) > 0 {
			seen[l] = true
		}
	}
	for c, ok := range seen {
		if !ok {
			return invalid("labels: component %d has no rows with positive weight", c)
		}
	}
	return nil
}

// run performs the initial update from the starting responsibilities, then
// alternates responsibilities and distribution updates until the bound's
// relative change is within the tolerance or the iterations run out.
func (e *engine) run(ctx context.Context, cfg *config, restart int, began time.Time, progress func(fitters.Progress)) (*runResult, error) {
	q := newPosterior(e.k, e.d, e.s, e.pr.weights)
	st := newStats(e.k, e.d, e.s)
	scr := make([]float64, 2*e.d*e.d+2*e.d)
	e.accumulate(st)
	if err := e.mstep(st, q); err != nil {
		return nil, err
	}
	prev := e.bound(st, q, scr)
	if math.IsNaN(prev) || math.IsInf(prev, 0) {
		return nil, fitters.Errorf(fitters.Internal, "vb: the bound at the start is %v", prev)
	}
	res := &runResult{q: q, st: st, bound: prev, restart: restart}
	for t := 1; t <= cfg.MaxIter; t++ {
		if err := fitters.ContextError(ctx); err != nil {
			return nil, err
		}
		if err := e.estep(q, st); err != nil {
			return nil, err
		}
		if err := e.mstep(st, q); err != nil {
			return nil, err
		}
		b := e.bound(st, q, scr)
		if math.IsNaN(b) || math.IsInf(b, 0) {
			return nil, fitters.Errorf(fitters.Internal, "vb: the bound at iteration %d is %v", t, b)
		}
		res.history = append(res.history, b)
		res.iterations = t
		res.bound = b
		if progress != nil {
			progress(fitters.Progress{Components: e.k, Restart: restart, Iteration: t, Objective: b, Elapsed: time.Since(began)})
		}
		if math.Abs(b-prev) <= cfg.Tol*math.Abs(b) {
			res.converged = true
			break
		}
		prev = b
	}
	return res, nil
}

// serve turns the best run into the served model and its report fields.
func (p *problem) serve(cfg *config, k int, run *runResult) (*kResult, error) {
	q, st, d := run.q, run.st, p.D
	params := mixture.Params{Dim: d, Family: mixture.Gaussian, Structure: cfg.Structure}
	predictive := cfg.served == ServePredictive
	if predictive {
		params.Family = mixture.StudentT
	}
	var dropped, small []int
	var total float64
	for c := 0; c < k; c++ {
		if st.nk[c] < cfg.minRows {
			small = append(small, c)
		}
		if q.epi[c] < MinServedWeight {
			dropped = append(dropped, c)
			continue
		}
		total += q.epi[c]
		comp := mixture.Component{
			Weight: q.epi[c],
			Mean:   append([]float64(nil), q.m[c*d:(c+1)*d]...),
			Cov:    make([]float64, d*d),
		}
		beta := q.beta[c]
		switch cfg.Structure {
		case mixture.Full:
			nu := q.nu[c]
			wi := q.winv[c*d*d : (c+1)*d*d]
			// Plug-in: E[Λ]⁻¹ = (ν W)⁻¹. Predictive (Bishop 2006, eqs.
			// 10.81–10.82): Student-t with ν+1−D degrees of freedom and
			// scale matrix ((ν+1−D) β/(1+β) W)⁻¹ = (1+β)/((ν+1−D) β) W⁻¹.
			f := 1 / nu
			if predictive {
				comp.DF = nu + 1 - float64(d)
				f = (1 + beta) / (comp.DF * beta)
			}
			for i, v := range wi {
				comp.Cov[i] = f * v
			}
		case mixture.Tied:
			// Plug-in only: E[Λ]⁻¹ = (ν W)⁻¹, the same for every component.
			for i, v := range q.winv[:d*d] {
				comp.Cov[i] = v / q.nu[0]
			}
		case mixture.Diagonal:
			// Plug-in only: E[λ_j]⁻¹ = b_j/a.
			for j := 0; j < d; j++ {
				comp.Cov[j*d+j] = q.b[c*d+j] / q.a[c]
			}
		case mixture.Spherical:
			a, b := q.a[c], q.b[c]
			v := b / a
			if predictive {
				// λ ~ Gamma(a, b) and x | λ ~ N(m, (1+1/β)/λ I) give a
				// Student-t with 2a degrees of freedom and scale (b/a)(1+β)/β I.
				comp.DF = 2 * a
				v *= (1 + beta) / beta
			}
			for j := 0; j < d; j++ {
				comp.Cov[j*d+j] = v
			}
		}
		params.Components = append(params.Components, comp)
	}
	if len(params.Components) == 0 {
		return nil, fitters.Errorf(fitters.Internal, "vb: every component has an expected weight below %g", MinServedWeight)
	}
	if len(dropped) > 0 {
		for i := range params.Components {
			params.Components[i].Weight /= total
		}
	}
	model, err := mixture.New(params)
	if err != nil {
		return nil, fitters.Errorf(fitters.FailedPrecondition, "the served parameters for K=%d are not usable (%v): the prior (options %q, %q, %q) is too far from the data or too ill-conditioned", k, err, OptPriorMean, OptMeanStrength, OptInverseScale)
	}
	ll, err := loop.LogLikelihood(model, p.X, p.W, Name, "the served model")
	if err != nil {
		return nil, err
	}
	kr := &kResult{
		Outcome: loop.Outcome{
			LogLik:     ll,
			BIC:        model.BIC(ll, p.wsum),
			AIC:        model.AIC(ll),
			Converged:  run.converged,
			Iterations: run.iterations,
		},
		k:         k,
		run:       run,
		params:    params,
		effective: k - len(small),
	}
	what := "the posterior predictive mixture (student_t components)"
	if !predictive {
		what = "the plug-in gaussian mixture (expected precisions)"
	}
	kr.notes = append(kr.notes, "served model: "+what)
	if len(small) > 0 {
		kr.notes = append(kr.notes, fmt.Sprintf("%d of %d components have fewer than %s expected rows (components %s): they carry little more than their prior",
			len(small), k, fmtFloat(cfg.minRows), listInts(small)))
	}
	if len(dropped) > 0 {
		kr.notes = append(kr.notes, fmt.Sprintf("components %s have an expected weight below %g and are left out of the served model; the other weights are renormalised",
			listInts(dropped), MinServedWeight))
	}
	kr.notes = append(kr.notes, loop.EndNotes(run.restart, cfg.Restarts, "bound", run.iterations, cfg.MaxIter, run.converged)...)
	return kr, nil
}

func listInts(v []int) string {
	s := make([]string, 0, min(len(v), maxListed)+1)
	for i, x := range v {
		if i == maxListed {
			s = append(s, fmt.Sprintf("and %d more", len(v)-maxListed))
			break
		}
		s = append(s, fmt.Sprint(x))
	}
	return strings.Join(s, ", ")
}

// export converts the run's variational distribution into a Posterior.
func (r *runResult) export(d int, cfg *config) *Posterior {
	q, st := r.q, r.st
	k := q.k
	out := &Posterior{
		Structure:       q.structure,
		WeightPrior:     cfg.weights.String(),
		ExpectedWeights: append([]float64(nil), q.epi...),
		ExpectedRows:    append([]float64(nil), st.nk...),
		MeanStrength:    append([]float64(nil), q.beta...),
		Means:           make([][]float64, k),
		DOF:             make([]float64, k),
		InverseScale:    make([][]float64, k),
	}
	if cfg.weights == dirichlet {
		out.Concentration = append([]float64(nil), q.alpha...)
	} else {
		out.Concentration = append([]float64(nil), q.alpha[:k-1]...)
		out.StickShape2 = append([]float64(nil), q.gamma2[:k-1]...)
	}
	for c := 0; c < k; c++ {
		out.Means[c] = append([]float64(nil), q.m[c*d:(c+1)*d]...)
		switch q.structure {
		case mixture.Full, mixture.Tied:
			wc := q.wishart(c)
			out.DOF[c] = q.nu[wc]
			out.InverseScale[c] = append([]float64(nil), q.winv[wc*d*d:(wc+1)*d*d]...)
		case mixture.Diagonal:
			out.DOF[c] = 2 * q.a[c]
			out.InverseScale[c] = make([]float64, d)
			for j := range out.InverseScale[c] {
				out.InverseScale[c][j] = 2 * q.b[c*d+j]
			}
		case mixture.Spherical:
			fd := float64(d)
			out.DOF[c] = 2 * q.a[c] / fd
			out.InverseScale[c] = []float64{2 * q.b[c] / fd}
		}
	}
	return out
}
