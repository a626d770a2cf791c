package tmix

import (
	"math"
	"strconv"
	"strings"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/internal/settings"
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
	settings.Basics
	k         settings.Range
	ridge     []float64 // per feature
	ridgeText string
	minRows   float64
	start     settings.Start
	seed      uint64

	dfMode       dfMode
	dfFixed      float64
	update       dfUpdate
	sharing      dfSharing
	dfStart      float64
	dfStartGiven bool
	sharingGiven bool // dof_sharing was set by the caller
	dfFloor      float64
	dfCap        float64
	outlierLevel float64
}

// resolve validates Settings against the data and fills in defaults.
func resolve(_ fitters.Data, s fitters.Settings, p *problem) (*config, error) {
	cfg := &config{seed: s.Seed}

	switch s.Family {
	case 0, mixture.StudentT:
	case mixture.Gaussian:
		return nil, fitters.Errorf(fitters.Unimplemented, "family: gaussian is not supported by the tmix fitter (it always fits student_t mixtures; use the em fitter for gaussian mixtures)")
	default:
		return nil, fitters.Errorf(fitters.InvalidArgument, "family: %d is not a known family", int(s.Family))
	}

	m := method()
	var err error
	if cfg.Basics, err = m.Basics(s); err != nil {
		return nil, err
	}

	if err := cfg.options(s.Options); err != nil {
		return nil, err
	}
	if cfg.minRows == 0 {
		cfg.minRows = settings.MinRows(cfg.Structure, p.D)
	}

	if cfg.ridge, cfg.ridgeText, err = m.Ridge(s.Ridge, cfg.Structure, p.Var, DefaultRidgeFraction); err != nil {
		return nil, err
	}

	// Start, labels and the number of components. A Gaussian start is
	// accepted (its covariances become the starting scale matrices); a
	// Student-t start also gives starting degrees of freedom (see startDF).
	rules := settings.StartRules{Structure: cfg.Structure}
	if cfg.k, cfg.start, err = m.Starts(s, &p.Rows, rules, &cfg.Basics); err != nil {
		return nil, err
	}
	// A Student-t start whose components have different degrees of freedom
	// keeps them apart unless the caller asked for a shared ν: averaging them
	// would change the start before the first iteration (and a fit asked to
	// evaluate the start without iterating would not return it).
	if st := cfg.start.Params; st != nil && st.Family == mixture.StudentT && cfg.dfMode == dfEstimate &&
		!cfg.sharingGiven && !cfg.dfStartGiven && !sameDF(st.Components) {
		cfg.sharing = sharePerComponent
	}
	return cfg, nil
}

// sameDF reports whether all components have the same degrees of freedom.
func sameDF(cs []mixture.Component) bool {
	for _, c := range cs[1:] {
		if c.DF != cs[0].DF {
			return false
		}
	}
	return true
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
	estimateOnly := []string{}
	for _, name := range settings.OptionNames(opts) {
		raw := opts[name]
		val := strings.TrimSpace(raw)
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
			cfg.sharingGiven = true
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
			v, err := settings.Positive(name, raw)
			if err != nil {
				return err
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
			v, err := settings.Number(name, raw)
			if err != nil {
				return err
			}
			if !(v > 0 && v < 1) {
				return fitters.Errorf(fitters.InvalidArgument, "option %q: value %q must lie strictly between 0 and 1", name, raw)
			}
			cfg.outlierLevel = v
		case optMinRows:
			v, err := settings.RowCount(name, raw)
			if err != nil {
				return err
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

// echo returns the effective settings by name.
func (c *config) echo(components int) map[string]string {
	m := settings.Echo(mixture.StudentT, c.Basics, components, c.seed, c.ridgeText, c.start.Kind)
	m[optMinRows] = fmtFloat(c.minRows)
	m[optOutlier] = fmtFloat(c.outlierLevel)
	if c.dfMode == dfFixed {
		m[optDF] = fmtFloat(c.dfFixed)
	} else {
		m[optDF] = valEstimate
		m[optUpdate] = map[dfUpdate]string{updateECME: valECME, updateECM: valECM}[c.update]
		m[optSharing] = map[dfSharing]string{sharePerComponent: valPerComp, shareAll: valShared}[c.sharing]
		m[optDFStart] = fmtFloat(c.dfStart)
		if c.start.Params != nil && c.start.Params.Family == mixture.StudentT && !c.dfStartGiven {
			m[optDFStart] = "the start's degrees of freedom"
		}
		m[optDFFloor] = fmtFloat(c.dfFloor)
		m[optDFCap] = fmtFloat(c.dfCap)
	}
	settings.EchoRange(m, c.k, c.Criterion)
	return m
}

func fmtFloat(v float64) string { return settings.Float(v) }
