package tmix

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
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
const Name = "tmix"

// Defaults applied when the corresponding Settings field or option is zero
// or absent (for Ridge: negative). See the package documentation.
const (
	// DefaultTolerance is the convergence threshold on the absolute change of
	// the mean per-row log-likelihood (nats per row) between iterations.
	DefaultTolerance = 1e-8
	// DefaultMaxIterations caps the iterations of one restart.
	DefaultMaxIterations = 1000
	// DefaultRestarts is the number of k-means++ starts tried per K.
	DefaultRestarts = 3
	// DefaultRidgeFraction scales the default ridge: feature j's scale-matrix
	// diagonal gets DefaultRidgeFraction times the (weighted) variance of
	// feature j in the data; spherical matrices get that fraction of the
	// mean feature variance.
	DefaultRidgeFraction = 1e-6
	// NoIterations, as Settings.MaxIterations, asks for no iteration at all:
	// the starting parameters are evaluated and returned unchanged.
	NoIterations = -1
	// VarianceFloor is the smallest accepted ratio of a component variance
	// (or conditional variance, for full and tied matrices) to the data's
	// variance of the same feature; below it the component counts as collapsed.
	VarianceFloor = 1e-12
	// MaxAbsValue is the largest accepted magnitude of a data value.
	MaxAbsValue = 1e150

	// DefaultDFStart is the starting degrees of freedom of every component
	// when they are estimated and the start gives none.
	DefaultDFStart = 10.0
	// DefaultDFFloor is the smallest degrees of freedom the estimation may
	// reach. Below ν = 1 a component has no mean; below about 0.5 a handful
	// of extreme rows decide the fit and the likelihood surface is too flat
	// to be informative.
	DefaultDFFloor = 0.5
	// DefaultDFCap is the largest degrees of freedom the estimation may
	// reach. At ν = 200 a component differs from the Gaussian by under
	// 1% in its density within three scale units, and plain ECM would
	// otherwise crawl towards ν = ∞ on Gaussian-looking data.
	DefaultDFCap = 200.0
	// MaxDFCap is the largest accepted dof_cap.
	MaxDFCap = 1e8
)

// Option names (Settings.Options).
const (
	optDF        = "dof"
	optUpdate    = "dof_update"
	optSharing   = "dof_sharing"
	optDFStart   = "dof_start"
	optDFFloor   = "dof_floor"
	optDFCap     = "dof_cap"
	optOutlier   = "outlier_level"
	optMinRows   = "min_component_rows"
	valEstimate  = "estimate"
	valECME      = "ecme"
	valECM       = "ecm"
	valPerComp   = "per_component"
	valShared    = "shared"
	maxNotes     = 20
	optListNames = optDF + ", " + optUpdate + ", " + optSharing + ", " + optDFStart + ", " + optDFFloor + ", " + optDFCap + ", " + optOutlier + ", " + optMinRows
)

// Fitter is the ECM/ECME estimator for mixtures of multivariate Student-t
// distributions. It holds no state between calls and is safe for concurrent
// use.
type Fitter struct{}

var _ fitters.Fitter = (*Fitter)(nil)

// New returns a Student-t mixture fitter.
func New() *Fitter { return &Fitter{} }

// method describes this fitter to the shared settings resolution.
func method() settings.Method {
	return settings.Method{
		Name:       Name,
		Structures: []mixture.Structure{mixture.Full, mixture.Diagonal, mixture.Spherical, mixture.Tied},
		Defaults:   settings.Defaults{MaxIterations: DefaultMaxIterations, Tolerance: DefaultTolerance, Restarts: DefaultRestarts},
		Style:      settings.Labelled,
	}
}

// Describe reports the estimator's name, version, supported family and
// structures, and its method-specific options.
func (f *Fitter) Describe(ctx context.Context) (fitters.Info, error) {
	return method().Describe(ctx, fitters.Info{
		Version: Version,
		Description: "Robust mixtures of multivariate Student-t distributions by ECM " +
			"(Peel and McLachlan, 2000) with ECME degrees-of-freedom steps (Liu and Rubin, 1995): " +
			"heavy-tailed components down-weight gross errors, and training rows beyond the " +
			"outlier level are counted; k-means++ seeding, restarts, choice of K by BIC or AIC",
		Families: []mixture.Family{mixture.StudentT},
		Options: []fitters.OptionInfo{
			{Name: optDF, Default: valEstimate,
				Description: `degrees of freedom: "estimate", or a positive number that every component keeps fixed`},
			{Name: optUpdate, Default: valECME,
				Description: `how estimated degrees of freedom are updated: "ecme" maximises the observed-data ` +
					`log-likelihood in ν by a bounded search on log ν; "ecm" solves the expected ` +
					`complete-data equation by bisection (can crawl when ν is large)`},
			{Name: optSharing, Default: valShared + " (" + valPerComp + " for a Student-t start with unequal ν)",
				Description: `"shared": one ν for all components; "per_component": each component has its own ν ` +
					`(a component that absorbs gross errors may then lower its own ν so far that the outlier rule stops flagging them)`},
			{Name: optDFStart, Default: fmtFloat(DefaultDFStart) + " (or the start's values)",
				Description: "starting degrees of freedom when estimated, within [dof_floor, dof_cap]"},
			{Name: optDFFloor, Default: fmtFloat(DefaultDFFloor),
				Description: "smallest estimated degrees of freedom (positive, below dof_cap)"},
			{Name: optDFCap, Default: fmtFloat(DefaultDFCap),
				Description: "largest estimated degrees of freedom (at most " + fmtFloat(MaxDFCap) + "); a component held there is close to Gaussian"},
			{Name: optOutlier, Default: fmtFloat(mixture.DefaultOutlierLevel),
				Description: "level of the outlier rule used for the report's flagged-row count: a row is flagged when " +
					"the F(p, ν) distribution function of its squared Mahalanobis distance over p exceeds it; in (0, 1)"},
			{Name: optMinRows, Default: "D+1 for full, 2 for diagonal and spherical, 1 for tied scale matrices",
				Description: "smallest effective number of rows a component may explain before it counts as collapsed and is re-seeded (a positive number)"},
		},
	})
}

// Fit estimates a Student-t mixture from data. See the package
// documentation for the method, defaults, collapse policy and determinism.
func (f *Fitter) Fit(ctx context.Context, data fitters.Data, s fitters.Settings, progress func(fitters.Progress)) (*fitters.Result, error) {
	began := time.Now()
	if err := fitters.ContextError(ctx); err != nil {
		return nil, err
	}
	prob, err := newProblem(data)
	if err != nil {
		return nil, err
	}
	cfg, err := resolve(data, s, prob)
	if err != nil {
		return nil, err
	}
	if err := prob.prepare(cfg); err != nil {
		return nil, err
	}
	rng := rand.New(rand.NewPCG(cfg.seed, seedStream))

	best, selection, err := loop.ChooseK(cfg.k.Min, cfg.k.Max, cfg.k.Selecting, cfg.Criterion, func(k int) (*kResult, error) {
		return prob.fitK(ctx, cfg, k, rng, began, progress)
	})
	if err != nil {
		return nil, err
	}
	if err := fitters.ContextError(ctx); err != nil {
		return nil, err
	}
	flagged, err := prob.countFlagged(best.model, cfg.outlierLevel)
	if err != nil {
		return nil, err
	}

	rep := best.Report("log_likelihood", best.run.History, selection)
	rep.FlaggedRows = flagged
	rep.OutlierLevel = cfg.outlierLevel
	rep.Notes = append(best.notes(cfg), cfg.k.Chosen(len(best.params.Components), cfg.Criterion)...)
	rep.Settings = cfg.echo(len(best.params.Components))
	rep.Notes = append(rep.Notes, fmt.Sprintf("%d of %d training rows with positive weight flagged at outlier level %s (statistical rarity under the fitted model, not a diagnosis)",
		flagged, prob.Positive, fmtFloat(cfg.outlierLevel)))
	return &fitters.Result{Params: best.params, Report: rep}, nil
}

// kResult is the best restart for one K, turned into a model.
type kResult struct {
	loop.Outcome
	params  mixture.Params
	model   *mixture.Model
	run     *runResult
	restart int
}

func (r *kResult) notes(cfg *config) []string {
	notes := r.run.notes.Lines()
	for c, n := range r.run.noRoot {
		if n == 0 {
			continue
		}
		who := fmt.Sprintf("component %d", c)
		if cfg.sharing == shareAll {
			who = "the shared degrees of freedom"
		}
		notes = append(notes, fmt.Sprintf("ECM: the degrees-of-freedom equation of %s had no root inside [%s, %s] in %d iterations (first at iteration %d); ν was held at the %s",
			who, fmtFloat(cfg.dfFloor), fmtFloat(cfg.dfCap), n, r.run.noRootFirst[c], boundName(r.run.noRootLast[c])))
		if cfg.sharing == shareAll {
			break
		}
	}
	if cfg.dfMode == dfEstimate {
		for c, comp := range r.params.Components {
			who := fmt.Sprintf("component %d", c)
			if cfg.sharing == shareAll {
				if c > 0 {
					break
				}
				who = "the shared degrees of freedom"
			}
			switch comp.DF {
			case cfg.dfCap:
				notes = append(notes, fmt.Sprintf("%s: degrees of freedom ended at the cap %s (close to Gaussian; raise %s to let it grow)", who, fmtFloat(cfg.dfCap), optDFCap))
			case cfg.dfFloor:
				notes = append(notes, fmt.Sprintf("%s: degrees of freedom ended at the floor %s (very heavy tails)", who, fmtFloat(cfg.dfFloor)))
			}
		}
	}
	return append(notes, loop.EndNotes(r.restart, cfg.Restarts, "log-likelihood", r.run.Iterations, cfg.MaxIter, r.run.Converged)...)
}

func boundName(o dfOutcome) string {
	if o == dfAtFloor {
		return "floor"
	}
	return "cap"
}

// fitK runs every restart for k components and keeps the best.
func (p *problem) fitK(ctx context.Context, cfg *config, k int, rng *rand.Rand, began time.Time, progress func(fitters.Progress)) (*kResult, error) {
	best, bestIdx, err := loop.Restarts(ctx, cfg.Restarts, func(r int) (*runResult, float64, error) {
		st, err := p.startState(cfg, k, rng)
		if err != nil {
			return nil, 0, err
		}
		run, err := p.run(ctx, cfg, st, r, began, progress)
		if err != nil {
			return nil, 0, err
		}
		return run, run.logLik, nil
	})
	if err != nil {
		return nil, err
	}
	params := best.state.params()
	model, err := mixture.New(params)
	if err != nil {
		return nil, fitters.Errorf(fitters.Internal, "tmix: fitted parameters for K=%d rejected by the model: %v", k, err)
	}
	ll, err := loop.LogLikelihood(model, p.X, p.Given, Name, "the fitted model")
	if err != nil {
		return nil, err
	}
	np := float64(cfg.freeParameters(model))
	return &kResult{
		Outcome: loop.Outcome{
			LogLik:     ll,
			BIC:        -2*ll + np*math.Log(p.WSum),
			AIC:        -2*ll + 2*np,
			Converged:  best.Converged,
			Iterations: best.Iterations,
		},
		params:  params,
		model:   model,
		run:     best,
		restart: bestIdx,
	}, nil
}

// freeParameters is the parameter count of BIC and AIC: mixture's count
// (weights, means, scale matrices and one degrees of freedom per component)
// adjusted for how ν was treated: K when estimated per component, 1 when
// one shared value is estimated, 0 when fixed.
func (c *config) freeParameters(m *mixture.Model) int {
	n := m.FreeParameters() - m.K()
	if c.dfMode == dfEstimate {
		if c.sharing == shareAll {
			n++
		} else {
			n += m.K()
		}
	}
	return n
}

// countFlagged applies the shared outlier rule to the training rows and
// counts the flagged rows of positive weight.
func (p *problem) countFlagged(m *mixture.Model, level float64) (int, error) {
	flags := make([]bool, p.N)
	if err := m.Outliers(p.X, level, nil, flags); err != nil {
		return 0, fitters.Errorf(fitters.Internal, "tmix: outlier rule on the training rows: %v", err)
	}
	n := 0
	for i, f := range flags {
		if f && p.Weight(i) > 0 {
			n++
		}
	}
	return n, nil
}
