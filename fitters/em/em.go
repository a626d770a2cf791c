package em

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"sort"
	"strconv"
	"strings"
	"time"

	"github.com/mixd-dev/mixd/fitters"
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

// Describe reports the estimator's name, version, supported families and
// structures, and its method-specific options.
func (f *Fitter) Describe(ctx context.Context) (fitters.Info, error) {
	if err := fitters.ContextError(ctx); err != nil {
		return fitters.Info{}, err
	}
	return fitters.Info{
		Name:    Name,
		Version: Version,
		Description: "Expectation-maximisation for Gaussian mixtures: k-means++ seeding, " +
			"restarts, ridge-regularised covariances, re-seeding of collapsed components, " +
			"choice of K by BIC or AIC",
		Families:   []mixture.Family{mixture.Gaussian},
		Structures: []mixture.Structure{mixture.Full, mixture.Diagonal, mixture.Spherical, mixture.Tied},
		Options: []fitters.OptionInfo{{
			Name: optMinRows,
			Description: "smallest effective number of rows a component may explain before it " +
				"counts as collapsed and is re-seeded (a positive number)",
			Default: "D+1 for full, 2 for diagonal and spherical, 1 for tied covariances",
		}},
	}, nil
}

// config is the validated, defaults-filled form of Settings for one Fit.
type config struct {
	structure  mixture.Structure
	criterion  fitters.Criterion
	kMin, kMax int
	selecting  bool
	maxIter    int
	tol        float64
	restarts   int
	ridge      []float64 // per feature
	ridgeText  string
	minRows    float64
	start      *mixture.Params
	labels     []int
	seed       uint64
	startKind  string
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

	var (
		best      *kResult
		selection []fitters.SelectionRow
	)
	for k := cfg.kMin; k <= cfg.kMax; k++ {
		kr, err := prob.fitK(ctx, cfg, k, rng, began, progress)
		if err != nil {
			return nil, err
		}
		if cfg.selecting {
			selection = append(selection, fitters.SelectionRow{
				Components:    k,
				LogLikelihood: kr.logLik,
				BIC:           kr.bic,
				AIC:           kr.aic,
				Converged:     kr.run.converged,
				Iterations:    kr.run.iterations,
			})
		}
		if best == nil || kr.score(cfg.criterion) < best.score(cfg.criterion) {
			best = kr
		}
	}

	rep := fitters.Report{
		Iterations:    best.run.iterations,
		Converged:     best.run.converged,
		Objective:     "log_likelihood",
		LogLikelihood: best.logLik,
		BIC:           best.bic,
		AIC:           best.aic,
		History:       best.run.history,
		Selection:     selection,
		Notes:         best.notes(),
		Settings:      cfg.echo(best.params.Components),
	}
	if cfg.selecting {
		rep.Notes = append(rep.Notes, fmt.Sprintf("K=%d has the lowest %s of K=%d..%d",
			len(best.params.Components), strings.ToUpper(cfg.criterion.String()), cfg.kMin, cfg.kMax))
	}
	return &fitters.Result{Params: best.params, Report: rep}, nil
}

// seedStream is the fixed second PCG word; the first is Settings.Seed.
const seedStream = 0x6d697864656d3031 // "mixdem01"

// kResult is the best restart for one K, turned into a model.
type kResult struct {
	params   mixture.Params
	run      *runResult
	restart  int
	restarts int
	logLik   float64
	bic, aic float64
}

func (r *kResult) score(c fitters.Criterion) float64 {
	if c == fitters.AIC {
		return r.aic
	}
	return r.bic
}

func (r *kResult) notes() []string {
	notes := append([]string(nil), r.run.notes...)
	if r.run.collapses > len(r.run.notes) {
		notes = append(notes, fmt.Sprintf("%d further collapses were handled the same way", r.run.collapses-len(r.run.notes)))
	}
	if r.restarts > 1 {
		notes = append(notes, fmt.Sprintf("restart %d of %d gave the highest log-likelihood", r.restart+1, r.restarts))
	}
	if !r.run.converged && r.run.maxIter > 0 {
		notes = append(notes, fmt.Sprintf("stopped after %d iterations without meeting the tolerance", r.run.iterations))
	}
	return notes
}

// fitK runs every restart for k components and keeps the best.
func (p *problem) fitK(ctx context.Context, cfg *config, k int, rng *rand.Rand, began time.Time, progress func(fitters.Progress)) (*kResult, error) {
	var (
		best    *runResult
		bestIdx int
	)
	for r := 0; r < cfg.restarts; r++ {
		if err := fitters.ContextError(ctx); err != nil {
			return nil, err
		}
		st, err := p.startState(cfg, k, rng)
		if err != nil {
			return nil, err
		}
		run, err := p.run(ctx, cfg, st, r, began, progress)
		if err != nil {
			return nil, err
		}
		if best == nil || run.logLik > best.logLik {
			best, bestIdx = run, r
		}
	}
	params := best.state.params()
	if cfg.start != nil {
		params.Features = append([]string(nil), cfg.start.Features...)
	}
	model, err := mixture.New(params)
	if err != nil {
		return nil, fitters.Errorf(fitters.Internal, "em: fitted parameters for K=%d rejected by the model: %v", k, err)
	}
	ll, err := model.LogLikelihood(p.x, p.w)
	if err != nil {
		return nil, fitters.Errorf(fitters.Internal, "em: log-likelihood of the fitted model: %v", err)
	}
	if math.IsNaN(ll) || math.IsInf(ll, 0) {
		return nil, fitters.Errorf(fitters.Internal, "em: log-likelihood of the fitted model is %v", ll)
	}
	return &kResult{
		params:   params,
		run:      best,
		restart:  bestIdx,
		restarts: cfg.restarts,
		logLik:   ll,
		bic:      model.BIC(ll, p.wsum),
		aic:      model.AIC(ll),
	}, nil
}

// resolve validates Settings against the data and fills in defaults.
func resolve(data fitters.Data, s fitters.Settings, p *problem) (*config, error) {
	cfg := &config{seed: s.Seed}

	switch s.Family {
	case 0, mixture.Gaussian:
	case mixture.StudentT:
		return nil, fitters.Errorf(fitters.Unimplemented, "family %s is not supported by the em fitter (it fits gaussian mixtures only)", s.Family)
	default:
		return nil, fitters.Errorf(fitters.InvalidArgument, "family %d is not a known family", int(s.Family))
	}

	cfg.structure = s.Structure
	if s.Start != nil && cfg.structure == 0 {
		cfg.structure = s.Start.Structure
	}
	switch cfg.structure {
	case 0:
		cfg.structure = mixture.Full
	case mixture.Full, mixture.Diagonal, mixture.Spherical, mixture.Tied:
	default:
		return nil, fitters.Errorf(fitters.InvalidArgument, "structure %d is not a known covariance structure", int(cfg.structure))
	}

	switch s.Criterion {
	case 0:
		cfg.criterion = fitters.BIC
	case fitters.BIC, fitters.AIC:
		cfg.criterion = s.Criterion
	default:
		return nil, fitters.Errorf(fitters.InvalidArgument, "criterion %d is not known (want bic or aic)", int(s.Criterion))
	}

	switch {
	case s.MaxIterations == 0:
		cfg.maxIter = DefaultMaxIterations
	case s.MaxIterations == NoIterations:
		cfg.maxIter = 0
	case s.MaxIterations < NoIterations:
		return nil, fitters.Errorf(fitters.InvalidArgument, "max iterations %d is negative (use -1 for no iterations, 0 for the default %d)", s.MaxIterations, DefaultMaxIterations)
	default:
		cfg.maxIter = s.MaxIterations
	}

	switch {
	case math.IsNaN(s.Tolerance) || math.IsInf(s.Tolerance, 0) || s.Tolerance < 0:
		return nil, fitters.Errorf(fitters.InvalidArgument, "tolerance %v must be a finite non-negative number", s.Tolerance)
	case s.Tolerance == 0:
		cfg.tol = DefaultTolerance
	default:
		cfg.tol = s.Tolerance
	}

	switch {
	case s.Restarts < 0:
		return nil, fitters.Errorf(fitters.InvalidArgument, "restarts %d is negative", s.Restarts)
	case s.Restarts == 0:
		cfg.restarts = DefaultRestarts
	default:
		cfg.restarts = s.Restarts
	}

	// Options.
	names := make([]string, 0, len(s.Options))
	for name := range s.Options {
		names = append(names, name)
	}
	sort.Strings(names)
	for _, name := range names {
		val := s.Options[name]
		switch name {
		case optMinRows:
			v, err := strconv.ParseFloat(strings.TrimSpace(val), 64)
			if err != nil || math.IsNaN(v) || math.IsInf(v, 0) || v <= 0 {
				return nil, fitters.Errorf(fitters.InvalidArgument, "option %q: value %q must be a positive number", name, val)
			}
			cfg.minRows = v
		default:
			return nil, fitters.Errorf(fitters.InvalidArgument, "option %q is not recognised by the em fitter (known options: %s)", name, optMinRows)
		}
	}
	if cfg.minRows == 0 {
		switch cfg.structure {
		case mixture.Full:
			cfg.minRows = float64(p.d + 1)
		case mixture.Diagonal, mixture.Spherical:
			cfg.minRows = 2
		case mixture.Tied:
			cfg.minRows = 1
		}
	}

	// Ridge.
	cfg.ridge = make([]float64, p.d)
	switch {
	case math.IsNaN(s.Ridge) || math.IsInf(s.Ridge, 0):
		return nil, fitters.Errorf(fitters.InvalidArgument, "ridge %v must be finite", s.Ridge)
	case s.Ridge < 0:
		mv := meanOf(p.dataVar)
		for j := range cfg.ridge {
			if cfg.structure == mixture.Spherical {
				cfg.ridge[j] = DefaultRidgeFraction * mv
			} else {
				cfg.ridge[j] = DefaultRidgeFraction * p.dataVar[j]
			}
		}
		if cfg.structure == mixture.Spherical {
			cfg.ridgeText = fmt.Sprintf("%s x mean feature variance = %s", fmtFloat(DefaultRidgeFraction), fmtFloat(cfg.ridge[0]))
		} else {
			cfg.ridgeText = fmt.Sprintf("%s x feature variance = %s", fmtFloat(DefaultRidgeFraction), joinFloats(cfg.ridge))
		}
	default:
		for j := range cfg.ridge {
			cfg.ridge[j] = s.Ridge
		}
		cfg.ridgeText = fmtFloat(s.Ridge)
	}

	// Start, labels and the number of components.
	if s.Start != nil && s.Labels != nil {
		return nil, fitters.Errorf(fitters.InvalidArgument, "start and labels are both set; give at most one")
	}
	if s.MaxComponents < 0 || s.MinComponents < 0 {
		return nil, fitters.Errorf(fitters.InvalidArgument, "component range [%d, %d] has a negative bound", s.MinComponents, s.MaxComponents)
	}
	if s.MaxComponents > 0 {
		if s.Start != nil || s.Labels != nil {
			return nil, fitters.Errorf(fitters.InvalidArgument, "max components is set (choosing K) but start or labels fix K; give one or the other")
		}
		cfg.selecting = true
		cfg.kMin, cfg.kMax = s.MinComponents, s.MaxComponents
		if cfg.kMin == 0 {
			cfg.kMin = 1
		}
		if cfg.kMin > cfg.kMax {
			return nil, fitters.Errorf(fitters.InvalidArgument, "min components %d exceeds max components %d", cfg.kMin, cfg.kMax)
		}
	} else {
		k := s.Components
		switch {
		case s.Start != nil:
			if k == 0 {
				k = len(s.Start.Components)
			} else if k != len(s.Start.Components) {
				return nil, fitters.Errorf(fitters.InvalidArgument, "components is %d but start has %d components", k, len(s.Start.Components))
			}
		case s.Labels != nil && k == 0:
			for _, l := range s.Labels {
				if l+1 > k {
					k = l + 1
				}
			}
		}
		if k < 1 {
			return nil, fitters.Errorf(fitters.InvalidArgument, "components %d must be at least 1", k)
		}
		cfg.kMin, cfg.kMax = k, k
	}
	if need := cfg.kMax; p.distinctAtLeast(need) < need {
		return nil, fitters.Errorf(fitters.FailedPrecondition, "%d components requested but the data has only %d distinct rows with positive weight", need, p.distinctAtLeast(need))
	}

	cfg.startKind = "kmeans++"
	switch {
	case s.Start != nil:
		if err := checkStart(s.Start, p.d, cfg.structure); err != nil {
			return nil, err
		}
		st := s.Start.Clone()
		cfg.start = &st
		cfg.startKind = "params"
		cfg.restarts = 1
	case s.Labels != nil:
		if len(s.Labels) != data.Rows {
			return nil, fitters.Errorf(fitters.InvalidArgument, "labels: %d labels for %d rows", len(s.Labels), data.Rows)
		}
		for i, l := range s.Labels {
			if l < 0 || l >= cfg.kMax {
				return nil, fitters.Errorf(fitters.InvalidArgument, "labels: row %d has label %d, want 0..%d", i, l, cfg.kMax-1)
			}
		}
		cfg.labels = append([]int(nil), s.Labels...)
		cfg.startKind = "labels"
		cfg.restarts = 1
	}
	return cfg, nil
}

// checkStart validates caller-supplied starting parameters.
func checkStart(st *mixture.Params, d int, structure mixture.Structure) error {
	if st.Dim != d {
		return fitters.Errorf(fitters.InvalidArgument, "start: dim %d differs from the data's %d columns", st.Dim, d)
	}
	if st.Family != mixture.Gaussian {
		return fitters.Errorf(fitters.InvalidArgument, "start: family %s, want gaussian", st.Family)
	}
	if st.Structure != structure {
		return fitters.Errorf(fitters.InvalidArgument, "start: structure %s differs from the requested %s", st.Structure, structure)
	}
	if err := st.Validate(); err != nil {
		return &fitters.Error{Code: fitters.InvalidArgument, Msg: "start", Err: err}
	}
	return nil
}

// echo returns the effective settings by name.
func (c *config) echo(components []mixture.Component) map[string]string {
	m := map[string]string{
		"family":         mixture.Gaussian.String(),
		"structure":      c.structure.String(),
		"components":     strconv.Itoa(len(components)),
		"seed":           strconv.FormatUint(c.seed, 10),
		"max_iterations": strconv.Itoa(c.maxIter),
		"tolerance":      fmtFloat(c.tol),
		"restarts":       strconv.Itoa(c.restarts),
		"ridge":          c.ridgeText,
		"start":          c.startKind,
		optMinRows:       fmtFloat(c.minRows),
	}
	if c.maxIter == 0 {
		m["max_iterations"] = "0 (evaluate the start only)"
	}
	if c.selecting {
		m["criterion"] = c.criterion.String()
		m["components_min"] = strconv.Itoa(c.kMin)
		m["components_max"] = strconv.Itoa(c.kMax)
	}
	return m
}

func fmtFloat(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

func joinFloats(v []float64) string {
	s := make([]string, len(v))
	for i, x := range v {
		s[i] = strconv.FormatFloat(x, 'g', 6, 64)
	}
	return strings.Join(s, ",")
}

func meanOf(v []float64) float64 {
	var s float64
	for _, x := range v {
		s += x
	}
	return s / float64(len(v))
}
