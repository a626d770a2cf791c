package em

import (
	"context"
	"math/rand/v2"
	"time"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/internal/loop"
	"github.com/mixd-dev/mixd/fitters/internal/seed"
	"github.com/mixd-dev/mixd/fitters/internal/settings"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

// Version is the version of this estimator, reported by Describe and
// recorded in every model it fits.
const Version = "1.0.0"

// Name is the name under which this estimator is registered.
const Name = "em"

// Defaults applied when the corresponding Settings field is zero (or, for
// Ridge, negative). See the package documentation for the reasoning.
const (
	// DefaultTolerance is the convergence threshold on the absolute change of
	// the mean per-row log-likelihood (nats per row) between iterations.
	DefaultTolerance = 1e-8
	// DefaultMaxIterations caps the iterations of one restart.
	DefaultMaxIterations = 1000
	// DefaultRestarts is the number of k-means++ starts tried per K.
	DefaultRestarts = 3
	// DefaultRidgeFraction scales the default ridge: feature j's covariance
	// diagonal gets DefaultRidgeFraction times the (weighted) variance of
	// feature j in the data; spherical covariances get that fraction of the
	// mean feature variance.
	DefaultRidgeFraction = 1e-6
	// NoIterations, as Settings.MaxIterations, asks for no iteration at all:
	// the starting parameters are evaluated and returned unchanged.
	NoIterations = -1
	// VarianceFloor is the smallest accepted ratio of a component variance
	// (or conditional variance, for full and tied covariances) to the data's
	// variance of the same feature; below it the component counts as collapsed.
	VarianceFloor = 1e-12
	// MaxAbsValue is the largest accepted magnitude of a data value. Beyond
	// it squared distances could overflow double precision.
	MaxAbsValue = 1e100
	// MaxWeight is the largest accepted row weight.
	MaxWeight = 1e100
)

// optMinRows is the name of the only method-specific option.
const optMinRows = "min_component_rows"

// maxNotes caps the number of collapse notes kept in a report.
const maxNotes = 20

// Fitter is the expectation-maximisation estimator for Gaussian mixtures.
// It holds no state between calls and is safe for concurrent use.
type Fitter struct{}

var _ fitters.Fitter = (*Fitter)(nil)

// New returns an EM fitter.
func New() *Fitter { return &Fitter{} }

// method describes this fitter to the shared settings resolution.
func method() settings.Method {
	return settings.Method{
		Name:       Name,
		Structures: []mixture.Structure{mixture.Full, mixture.Diagonal, mixture.Spherical, mixture.Tied},
		Defaults:   settings.Defaults{MaxIterations: DefaultMaxIterations, Tolerance: DefaultTolerance, Restarts: DefaultRestarts},
		Style:      settings.Plain,
	}
}

// Describe reports the estimator's name, version, supported families and
// structures, and its method-specific options.
func (f *Fitter) Describe(ctx context.Context) (fitters.Info, error) {
	return method().Describe(ctx, fitters.Info{
		Version: Version,
		Description: "Expectation-maximisation for Gaussian mixtures: k-means++ seeding, " +
			"restarts, ridge-regularised covariances, re-seeding of collapsed components, " +
			"choice of K by BIC or AIC",
		Families: []mixture.Family{mixture.Gaussian},
		Options: []fitters.OptionInfo{{
			Name: optMinRows,
			Description: "smallest effective number of rows a component may explain before it " +
				"counts as collapsed and is re-seeded (a positive number)",
			Default: "D+1 for full, 2 for diagonal and spherical, 1 for tied covariances",
		}},
	})
}

// config is the validated, defaults-filled form of Settings for one Fit.
type config struct {
	settings.Basics
	k         settings.Range
	ridge     []float64 // per feature
	ridgeText string
	minRows   float64
	start     settings.Start
	seed      uint64
}

// Fit estimates a Gaussian mixture from data. See the package documentation
// for defaults, the collapse policy and determinism.
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

	rep := best.Report("log_likelihood", best.run.History, selection)
	rep.Notes = append(best.notes(cfg), cfg.k.Chosen(len(best.params.Components), cfg.Criterion)...)
	rep.Settings = cfg.echo(best.params.Components)
	return &fitters.Result{Params: best.params, Report: rep}, nil
}

// seedStream is the fixed second PCG word; the first is Settings.Seed.
const seedStream = seed.Stream

// kResult is the best restart for one K, turned into a model.
type kResult struct {
	loop.Outcome
	params  mixture.Params
	run     *runResult
	restart int
}

func (r *kResult) notes(cfg *config) []string {
	notes := r.run.notes.Lines()
	return append(notes, loop.EndNotes(r.restart, cfg.Restarts, "log-likelihood", r.run.Iterations, cfg.MaxIter, r.run.Converged)...)
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
	if cfg.start.Params != nil {
		params.Features = append([]string(nil), cfg.start.Params.Features...)
	}
	model, err := mixture.New(params)
	if err != nil {
		return nil, fitters.Errorf(fitters.Internal, "em: fitted parameters for K=%d rejected by the model: %v", k, err)
	}
	ll, err := loop.LogLikelihood(model, p.X, p.Given, Name, "the fitted model")
	if err != nil {
		return nil, err
	}
	return &kResult{
		Outcome: loop.Outcome{
			LogLik:     ll,
			BIC:        model.BIC(ll, p.WSum),
			AIC:        model.AIC(ll),
			Converged:  best.Converged,
			Iterations: best.Iterations,
		},
		params:  params,
		run:     best,
		restart: bestIdx,
	}, nil
}

// resolve validates Settings against the data and fills in defaults.
func resolve(_ fitters.Data, s fitters.Settings, p *problem) (*config, error) {
	cfg := &config{seed: s.Seed}

	switch s.Family {
	case 0, mixture.Gaussian:
	case mixture.StudentT:
		return nil, fitters.Errorf(fitters.Unimplemented, "family %s is not supported by the em fitter (it fits gaussian mixtures only)", s.Family)
	default:
		return nil, fitters.Errorf(fitters.InvalidArgument, "family %d is not a known family", int(s.Family))
	}

	m := method()
	var err error
	if cfg.Basics, err = m.Basics(s); err != nil {
		return nil, err
	}

	// Options.
	for _, name := range settings.OptionNames(s.Options) {
		switch name {
		case optMinRows:
			if cfg.minRows, err = settings.RowCount(name, s.Options[name]); err != nil {
				return nil, err
			}
		default:
			return nil, fitters.Errorf(fitters.InvalidArgument, "option %q is not recognised by the em fitter (known options: %s)", name, optMinRows)
		}
	}
	if cfg.minRows == 0 {
		cfg.minRows = settings.MinRows(cfg.Structure, p.D)
	}

	if cfg.ridge, cfg.ridgeText, err = m.Ridge(s.Ridge, cfg.Structure, p.Var, DefaultRidgeFraction); err != nil {
		return nil, err
	}

	// Start, labels and the number of components.
	rules := settings.StartRules{Family: mixture.Gaussian, Structure: cfg.Structure}
	if cfg.k, cfg.start, err = m.Starts(s, &p.Rows, rules, &cfg.Basics); err != nil {
		return nil, err
	}
	return cfg, nil
}

// echo returns the effective settings by name.
func (c *config) echo(components []mixture.Component) map[string]string {
	m := settings.Echo(mixture.Gaussian, c.Basics, len(components), c.seed, c.ridgeText, c.start.Kind)
	m[optMinRows] = settings.Float(c.minRows)
	settings.EchoRange(m, c.k, c.Criterion)
	return m
}
