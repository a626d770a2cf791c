package tmix

import (
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

// dfMode says whether the degrees of freedom are estimated or fixed.
type dfMode int

const (
	dfEstimate dfMode = iota
	dfFixed
)

// dfUpdate is the method of the degrees-of-freedom step.
type dfUpdate int

const (
	updateECME dfUpdate = iota
	updateECM
)

// dfSharing says whether each component has its own ν.
type dfSharing int

const (
	sharePerComponent dfSharing = iota
	shareAll
)

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

	dfMode       dfMode
	dfFixed      float64
	update       dfUpdate
	sharing      dfSharing
	dfStart      float64
	dfStartGiven bool
	dfFloor      float64
	dfCap        float64
	outlierLevel float64
}

// resolve validates Settings against the data and fills in defaults.
func resolve(data fitters.Data, s fitters.Settings, p *problem) (*config, error) {
	cfg := &config{seed: s.Seed}

	switch s.Family {
	case 0, mixture.StudentT:
	case mixture.Gaussian:
		return nil, fitters.Errorf(fitters.Unimplemented, "family: gaussian is not supported by the tmix fitter (it always fits student_t mixtures; use the em fitter for gaussian mixtures)")
	default:
		return nil, fitters.Errorf(fitters.InvalidArgument, "family: %d is not a known family", int(s.Family))
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
		return nil, fitters.Errorf(fitters.InvalidArgument, "structure: %d is not a known covariance structure", int(cfg.structure))
	}

	switch s.Criterion {
	case 0:
		cfg.criterion = fitters.BIC
	case fitters.BIC, fitters.AIC:
		cfg.criterion = s.Criterion
	default:
		return nil, fitters.Errorf(fitters.InvalidArgument, "criterion: %d is not known (want bic or aic)", int(s.Criterion))
	}

	switch {
	case s.MaxIterations == 0:
		cfg.maxIter = DefaultMaxIterations
	case s.MaxIterations == NoIterations:
		cfg.maxIter = 0
	case s.MaxIterations < NoIterations:
		return nil, fitters.Errorf(fitters.InvalidArgument, "max iterations: %d is negative (use -1 for no iterations, 0 for the default %d)", s.MaxIterations, DefaultMaxIterations)
	default:
		cfg.maxIter = s.MaxIterations
	}

	switch {
	case math.IsNaN(s.Tolerance) || math.IsInf(s.Tolerance, 0) || s.Tolerance < 0:
		return nil, fitters.Errorf(fitters.InvalidArgument, "tolerance: %v must be a finite non-negative number", s.Tolerance)
	case s.Tolerance == 0:
		cfg.tol = DefaultTolerance
	default:
		cfg.tol = s.Tolerance
	}

	switch {
	case s.Restarts < 0:
		return nil, fitters.Errorf(fitters.InvalidArgument, "restarts: %d is negative", s.Restarts)
	case s.Restarts == 0:
		cfg.restarts = DefaultRestarts
	default:
		cfg.restarts = s.Restarts
	}

	if err := cfg.options(s.Options); err != nil {
		return nil, err
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
		return nil, fitters.Errorf(fitters.InvalidArgument, "ridge: %v must be finite", s.Ridge)
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
			return nil, fitters.Errorf(fitters.InvalidArgument, "components: %d must be at least 1", k)
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

// options parses the method-specific options, in name order so that the
// first error reported does not depend on map order.
func (cfg *config) options(opts map[string]string) error {
	cfg.dfMode = dfEstimate
	cfg.update = updateECME
	cfg.sharing = shareAll
	cfg.dfFloor = DefaultDFFloor
	cfg.dfCap = DefaultDFCap
	cfg.outlierLevel = mixture.DefaultOutlierLevel
	names := make([]string, 0, len(opts))
	for name := range opts {
		names = append(names, name)
	}
	sort.Strings(names)
	estimateOnly := []string{}
	for _, name := range names {
		raw := opts[name]
		val := strings.TrimSpace(raw)
		number := func() (float64, error) {
			v, err := strconv.ParseFloat(val, 64)
			if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
				return 0, fitters.Errorf(fitters.InvalidArgument, "option %q: value %q is not a finite number", name, raw)
			}
			return v, nil
		}
		switch name {
		case optDF:
			if val == valEstimate {
				break
			}
			v, err := strconv.ParseFloat(val, 64)
			if err != nil || math.IsNaN(v) || math.IsInf(v, 0) || v <= 0 {
				return fitters.Errorf(fitters.InvalidArgument, "option %q: value %q must be %q or a positive finite number", name, raw, valEstimate)
			}
			cfg.dfMode, cfg.dfFixed = dfFixed, v
		case optUpdate:
			estimateOnly = append(estimateOnly, name)
			switch val {
			case valECME:
				cfg.update = updateECME
			case valECM:
				cfg.update = updateECM
			default:
				return fitters.Errorf(fitters.InvalidArgument, "option %q: value %q must be %q or %q", name, raw, valECME, valECM)
			}
		case optSharing:
			estimateOnly = append(estimateOnly, name)
			switch val {
			case valPerComp:
				cfg.sharing = sharePerComponent
			case valShared:
				cfg.sharing = shareAll
			default:
				return fitters.Errorf(fitters.InvalidArgument, "option %q: value %q must be %q or %q", name, raw, valPerComp, valShared)
			}
		case optDFStart, optDFFloor, optDFCap:
			estimateOnly = append(estimateOnly, name)
			v, err := number()
			if err != nil {
				return err
			}
			if v <= 0 {
				return fitters.Errorf(fitters.InvalidArgument, "option %q: value %q must be positive", name, raw)
			}
			switch name {
			case optDFStart:
				cfg.dfStart, cfg.dfStartGiven = v, true
			case optDFFloor:
				cfg.dfFloor = v
			case optDFCap:
				if v > MaxDFCap {
					return fitters.Errorf(fitters.InvalidArgument, "option %q: value %q exceeds the limit %s", name, raw, fmtFloat(MaxDFCap))
				}
				cfg.dfCap = v
			}
		case optOutlier:
			v, err := number()
			if err != nil {
				return err
			}
			if !(v > 0 && v < 1) {
				return fitters.Errorf(fitters.InvalidArgument, "option %q: value %q must lie strictly between 0 and 1", name, raw)
			}
			cfg.outlierLevel = v
		case optMinRows:
			v, err := number()
			if err != nil || v <= 0 {
				return fitters.Errorf(fitters.InvalidArgument, "option %q: value %q must be a positive number", name, raw)
			}
			cfg.minRows = v
		default:
			return fitters.Errorf(fitters.InvalidArgument, "option %q is not recognised by the tmix fitter (known options: %s)", name, optListNames)
		}
	}
	if cfg.dfMode == dfFixed && len(estimateOnly) > 0 {
		return fitters.Errorf(fitters.InvalidArgument, "option %q applies only when %q is %q, but %q fixes the degrees of freedom at %s",
			estimateOnly[0], optDF, valEstimate, optDF, fmtFloat(cfg.dfFixed))
	}
	if !(cfg.dfFloor < cfg.dfCap) {
		return fitters.Errorf(fitters.InvalidArgument, "option %q: floor %s must be below the cap %s (option %q)", optDFFloor, fmtFloat(cfg.dfFloor), fmtFloat(cfg.dfCap), optDFCap)
	}
	if cfg.dfStartGiven {
		if cfg.dfStart < cfg.dfFloor || cfg.dfStart > cfg.dfCap {
			return fitters.Errorf(fitters.InvalidArgument, "option %q: value %s lies outside [%s, %s] (options %q and %q)",
				optDFStart, fmtFloat(cfg.dfStart), fmtFloat(cfg.dfFloor), fmtFloat(cfg.dfCap), optDFFloor, optDFCap)
		}
	} else {
		cfg.dfStart = math.Min(math.Max(DefaultDFStart, cfg.dfFloor), cfg.dfCap)
	}
	if cfg.dfMode == dfFixed {
		cfg.dfStart = cfg.dfFixed
	}
	return nil
}

// startDF returns the starting degrees of freedom of k components: the fixed
// value; else the start's values (Student-t start, no dof_start option)
// clamped into [floor, cap] and, for a shared ν, averaged with the start's
// weights; else dof_start.
func (cfg *config) startDF(k int, start *mixture.Params) []float64 {
	out := make([]float64, k)
	for i := range out {
		out[i] = cfg.dfStart
	}
	if cfg.dfMode == dfFixed || cfg.dfStartGiven || start == nil || start.Family != mixture.StudentT {
		return out
	}
	var avg float64
	for i, c := range start.Components {
		out[i] = math.Min(math.Max(c.DF, cfg.dfFloor), cfg.dfCap)
		avg += c.Weight * out[i]
	}
	if cfg.sharing == shareAll {
		avg = math.Min(math.Max(avg, cfg.dfFloor), cfg.dfCap)
		for i := range out {
			out[i] = avg
		}
	}
	return out
}

// checkStart validates caller-supplied starting parameters. A Gaussian start
// is accepted (its covariances become the starting scale matrices); a
// Student-t start also gives starting degrees of freedom (see startDF).
func checkStart(st *mixture.Params, d int, structure mixture.Structure) error {
	if st.Dim != d {
		return fitters.Errorf(fitters.InvalidArgument, "start: dim %d differs from the data's %d columns", st.Dim, d)
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
func (c *config) echo(components int) map[string]string {
	m := map[string]string{
		"family":         mixture.StudentT.String(),
		"structure":      c.structure.String(),
		"components":     strconv.Itoa(components),
		"seed":           strconv.FormatUint(c.seed, 10),
		"max_iterations": strconv.Itoa(c.maxIter),
		"tolerance":      fmtFloat(c.tol),
		"restarts":       strconv.Itoa(c.restarts),
		"ridge":          c.ridgeText,
		"start":          c.startKind,
		optMinRows:       fmtFloat(c.minRows),
		optOutlier:       fmtFloat(c.outlierLevel),
	}
	if c.maxIter == 0 {
		m["max_iterations"] = "0 (evaluate the start only)"
	}
	if c.dfMode == dfFixed {
		m[optDF] = fmtFloat(c.dfFixed)
	} else {
		m[optDF] = valEstimate
		m[optUpdate] = map[dfUpdate]string{updateECME: valECME, updateECM: valECM}[c.update]
		m[optSharing] = map[dfSharing]string{sharePerComponent: valPerComp, shareAll: valShared}[c.sharing]
		m[optDFStart] = fmtFloat(c.dfStart)
		if c.start != nil && c.start.Family == mixture.StudentT && !c.dfStartGiven {
			m[optDFStart] = "the start's degrees of freedom"
		}
		m[optDFFloor] = fmtFloat(c.dfFloor)
		m[optDFCap] = fmtFloat(c.dfCap)
	}
	if c.selecting {
		m["criterion"] = c.criterion.String()
		m["min_components"] = strconv.Itoa(c.kMin)
		m["max_components"] = strconv.Itoa(c.kMax)
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
