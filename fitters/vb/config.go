package vb

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/internal/settings"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

// Names of the method-specific options (fitters.Settings.Options).
const (
	OptWeightPrior   = "weight_prior"
	OptConcentration = "concentration"
	OptMeanStrength  = "mean_strength"
	OptPriorMean     = "prior_mean"
	OptWishartDOF    = "wishart_dof"
	OptInverseScale  = "wishart_inverse_scale"
	OptServedModel   = "served_model"
	OptMinRows       = "min_expected_rows"
)

// Values of OptServedModel.
const (
	ServePredictive = "predictive"
	ServePlugin     = "plugin"
)

var optionNames = []string{OptConcentration, OptMeanStrength, OptMinRows, OptPriorMean, OptServedModel, OptWeightPrior, OptInverseScale, OptWishartDOF}

// config is the validated, defaults-filled form of Settings for one Fit.
type config struct {
	settings.Basics
	k     settings.Range
	ridge float64
	seed  uint64
	start settings.Start

	weights  weightPrior
	alpha    float64 // 0: default for K
	beta0    float64
	m0       []float64 // nil: data mean
	nu0      float64   // 0: default D
	s0       []float64 // nil: from the data
	s0Text   string
	served   string
	minRows  float64
	minRowsD bool // minRows is the default
}

func invalid(format string, args ...any) error {
	return fitters.Errorf(fitters.InvalidArgument, format, args...)
}

// parseHyper reads a positive hyperparameter within [MinHyperparameter, MaxHyperparameter].
func parseHyper(name, val string) (float64, error) {
	v, err := settings.Positive(name, val)
	if err != nil {
		return 0, err
	}
	if v < MinHyperparameter || v > MaxHyperparameter {
		return 0, invalid("option %q: value %q is outside the supported range [%g, %g]", name, val, MinHyperparameter, MaxHyperparameter)
	}
	return v, nil
}

func parseList(name, val string, want int, wantText string) ([]float64, error) {
	parts := strings.Split(val, ",")
	if len(parts) != want {
		return nil, invalid("option %q: %d values given, want %s", name, len(parts), wantText)
	}
	out := make([]float64, want)
	for i, s := range parts {
		v, err := strconv.ParseFloat(strings.TrimSpace(s), 64)
		if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, invalid("option %q: value %d (%q) is not a finite number", name, i, strings.TrimSpace(s))
		}
		out[i] = v
	}
	return out, nil
}

// resolve validates Settings against the data and fills in defaults.
func resolve(_ fitters.Data, s fitters.Settings, p *problem) (*config, error) {
	cfg := &config{seed: s.Seed, weights: dirichlet, beta0: DefaultMeanStrength}
	d := p.D

	// The components are Gaussian; Family names the family of the served
	// model: gaussian is the plug-in mixture, student_t the predictive one.
	switch s.Family {
	case 0, mixture.Gaussian, mixture.StudentT:
	default:
		return nil, invalid("family %d is not a known family", int(s.Family))
	}

	m := method()
	var err error
	if cfg.Basics, err = m.Basics(s); err != nil {
		return nil, err
	}

	switch {
	case math.IsNaN(s.Ridge) || math.IsInf(s.Ridge, 0):
		return nil, invalid("ridge %v must be finite", s.Ridge)
	case s.Ridge > MaxInverseScale:
		return nil, invalid("ridge %v is above the supported %g", s.Ridge, MaxInverseScale)
	case s.Ridge > 0:
		cfg.ridge = s.Ridge
	}

	// Options, in name order so that the first bad one reported is stable.
	for _, name := range settings.OptionNames(s.Options) {
		val := s.Options[name]
		var err error
		switch name {
		case OptWeightPrior:
			switch strings.TrimSpace(val) {
			case "dirichlet":
				cfg.weights = dirichlet
			case "stick_breaking":
				cfg.weights = stickBreaking
			default:
				err = invalid("option %q: value %q is not known (want dirichlet or stick_breaking)", name, val)
			}
		case OptConcentration:
			cfg.alpha, err = parseHyper(name, val)
		case OptMeanStrength:
			cfg.beta0, err = parseHyper(name, val)
		case OptPriorMean:
			cfg.m0, err = parseList(name, val, d, fmt.Sprintf("%d (one per column)", d))
			for j := 0; err == nil && j < d; j++ {
				if z := math.Abs(cfg.m0[j]-p.mean[j]) * p.scale[j]; !(z <= MaxPriorMeanDistance) {
					err = invalid("option %q: value %d (%g) is %.3g standard deviations from the data mean; at most %g are supported", name, j, cfg.m0[j], z, MaxPriorMeanDistance)
				}
			}
		case OptWishartDOF:
			cfg.nu0, err = settings.Number(name, val)
			if err == nil {
				if matrixPrecision(cfg.Structure) && !(cfg.nu0 > float64(d-1)) {
					err = invalid("option %q: value %q must exceed %d (the number of columns minus 1)", name, val, d-1)
				} else if !(cfg.nu0 > 0) {
					err = invalid("option %q: value %q must be positive", name, val)
				} else if cfg.nu0 < MinHyperparameter || cfg.nu0 > MaxHyperparameter {
					err = invalid("option %q: value %q is outside the supported range [%g, %g]", name, val, MinHyperparameter, MaxHyperparameter)
				}
			}
		case OptInverseScale:
			err = cfg.parseInverseScale(name, val, d)
		case OptServedModel:
			switch v := strings.TrimSpace(val); v {
			case ServePredictive, ServePlugin:
				cfg.served = v
			default:
				err = invalid("option %q: value %q is not known (want %s or %s)", name, val, ServePredictive, ServePlugin)
			}
		case OptMinRows:
			cfg.minRows, err = settings.Positive(name, val)
		default:
			err = invalid("option %q is not recognised by the vb fitter (known options: %s)", name, strings.Join(optionNames, ", "))
		}
		if err != nil {
			return nil, err
		}
	}
	fromFamily := map[mixture.Family]string{mixture.Gaussian: ServePlugin, mixture.StudentT: ServePredictive}[s.Family]
	switch {
	case cfg.served != "" && fromFamily != "" && cfg.served != fromFamily:
		return nil, invalid("option %q is %s but family %s asks for the %s model; give one or the other", OptServedModel, cfg.served, s.Family, fromFamily)
	case cfg.served == "" && fromFamily != "":
		cfg.served = fromFamily
	}
	if cfg.served == "" {
		cfg.served = ServePredictive
		if cfg.Structure == mixture.Diagonal || cfg.Structure == mixture.Tied {
			cfg.served = ServePlugin
		}
	} else if cfg.served == ServePredictive && cfg.Structure == mixture.Diagonal {
		return nil, fitters.Errorf(fitters.Unimplemented,
			"the predictive model of a diagonal structure is a product of univariate student_t densities, not a multivariate student_t mixture: with the diagonal structure use family gaussian or option %s=%s, or use the full or spherical structure", OptServedModel, ServePlugin)
	} else if cfg.served == ServePredictive && cfg.Structure == mixture.Tied {
		return nil, fitters.Errorf(fitters.Unimplemented,
			"the predictive model of a tied structure has a different scale matrix per component ((1+β_k)/β_k times the shared one), so it is not a tied student_t mixture: with the tied structure use family gaussian or option %s=%s, or use the full structure", OptServedModel, ServePlugin)
	}
	if cfg.minRows == 0 {
		cfg.minRows = float64(d + 1)
		cfg.minRowsD = true
	}
	if cfg.nu0 == 0 {
		cfg.nu0 = float64(d)
	}
	if cfg.m0 == nil {
		cfg.m0 = append([]float64(nil), p.mean...)
	}
	if err := cfg.defaultInverseScale(p); err != nil {
		return nil, err
	}

	// Start, labels and the number of components.
	if cfg.k, cfg.start, err = m.Starts(s, &p.Rows, settings.StartRules{}, &cfg.Basics); err != nil {
		return nil, err
	}
	return cfg, nil
}

// parseInverseScale reads OptInverseScale for the structure.
func (c *config) parseInverseScale(name, val string, d int) error {
	var err error
	switch c.Structure {
	case mixture.Full, mixture.Tied:
		c.s0, err = parseList(name, val, d*d, fmt.Sprintf("%d (a %dx%d matrix, row-major)", d*d, d, d))
		if err == nil {
			if e := mixture.CheckCovariance(c.s0, d); e != nil {
				err = invalid("option %q: %v", name, e)
			}
		}
	case mixture.Diagonal:
		c.s0, err = parseList(name, val, d, fmt.Sprintf("%d (the diagonal, one per column)", d))
	case mixture.Spherical:
		c.s0, err = parseList(name, val, 1, "1 (one variance for every column)")
	}
	if err != nil {
		return err
	}
	for i, v := range c.s0 {
		if !matrixPrecision(c.Structure) && !(v > 0) {
			return invalid("option %q: value %d (%v) must be positive", name, i, v)
		}
		if a := math.Abs(v); a > MaxInverseScale || (a < MinInverseScale && (!matrixPrecision(c.Structure) || i%(d+1) == 0)) {
			return invalid("option %q: value %d (%v) is outside the supported magnitudes [%g, %g]", name, i, v, MinInverseScale, MaxInverseScale)
		}
	}
	c.s0Text = "given"
	return nil
}

// defaultInverseScale fills s0 from the data when not given, adds the ridge
// and checks that the result is usable.
func (c *config) defaultInverseScale(p *problem) error {
	d := p.D
	if c.s0 == nil {
		c.s0Text = "data covariance"
		switch c.Structure {
		case mixture.Full, mixture.Tied:
			c.s0 = append([]float64(nil), p.cov...)
		case mixture.Diagonal:
			c.s0 = make([]float64, d)
			for j := range c.s0 {
				c.s0[j] = p.cov[j*d+j]
			}
			c.s0Text = "data variances"
		case mixture.Spherical:
			var s float64
			for j := 0; j < d; j++ {
				s += p.cov[j*d+j]
			}
			c.s0 = []float64{s / float64(d)}
			c.s0Text = "mean data variance"
		}
	}
	if c.ridge > 0 {
		switch c.Structure {
		case mixture.Full, mixture.Tied:
			for j := 0; j < d; j++ {
				c.s0[j*d+j] += c.ridge
			}
		default:
			for j := range c.s0 {
				c.s0[j] += c.ridge
			}
		}
		c.s0Text += fmt.Sprintf(" + ridge %s", fmtFloat(c.ridge))
	}
	if matrixPrecision(c.Structure) {
		if err := mixture.CheckCovariance(c.s0, d); err != nil {
			return fitters.Errorf(fitters.FailedPrecondition,
				"prior: the Wishart inverse scale (%s) is unusable: %v; the features are (nearly) linearly dependent: drop a redundant column, use a positive ridge or set option %q", c.s0Text, err, OptInverseScale)
		}
	}
	return nil
}

// priorFor builds the prior for k components.
func (c *config) priorFor(p *problem, k int) (*prior, error) {
	pr := &prior{
		weights: c.weights,
		alpha:   c.alphaFor(k),
		beta0:   c.beta0,
		m0:      c.m0,
		nu0:     c.nu0,
		s0:      c.s0,
	}
	if !pr.setup(c.Structure, p.D) {
		return nil, fitters.Errorf(fitters.FailedPrecondition, "prior: the Wishart inverse scale (%s) is not positive definite", c.s0Text)
	}
	return pr, nil
}

// alphaFor returns the concentration for k components.
func (c *config) alphaFor(k int) float64 {
	if c.alpha > 0 {
		return c.alpha
	}
	if c.weights == stickBreaking {
		return DefaultStickConcentration
	}
	return 1 / float64(k)
}

// echo returns the effective settings by name.
func (c *config) echo(p *problem, k int) map[string]string {
	m := settings.Echo(mixture.Gaussian, c.Basics, k, c.seed, fmtFloat(c.ridge), c.start.Kind)
	m[OptWeightPrior] = c.weights.String()
	m[OptConcentration] = fmtFloat(c.alphaFor(k))
	m[OptMeanStrength] = fmtFloat(c.beta0)
	m[OptPriorMean] = joinFloats(c.m0)
	m[OptWishartDOF] = fmtFloat(c.nu0)
	m[OptInverseScale] = joinFloats(c.s0)
	// Where the inverse scale came from (it includes the ridge).
	m["wishart_inverse_scale_source"] = c.s0Text
	m[OptServedModel] = c.served
	m[OptMinRows] = fmtFloat(c.minRows)
	settings.EchoRange(m, c.k, c.Criterion)
	return m
}

func fmtFloat(v float64) string { return settings.Float(v) }

// joinFloats formats v as comma-separated shortest round-trip values, the
// form the list options accept.
func joinFloats(v []float64) string {
	s := make([]string, len(v))
	for i, x := range v {
		s[i] = fmtFloat(x)
	}
	return strings.Join(s, ",")
}
