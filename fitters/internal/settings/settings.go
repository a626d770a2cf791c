// Package settings resolves the parts of fitters.Settings that the em, tmix
// and vb fitters treat alike: the covariance structure, the model-selection
// criterion, the iteration cap, the tolerance, the restarts, the number of
// components (one K or a range), the caller's start or labels, and the
// per-feature ridge; plus the parsing of numeric option values and the
// formatting of the settings echoed in a report.
//
// What differs between the fitters on purpose is described by a Method:
// the structures a fitter fits, its defaults and the Style of its messages
// (tmix writes "restarts: -1 is negative" where em and vb write "restarts -1
// is negative"); which starting parameters it accepts is a StartRules. The
// family and the method-specific options stay with each fitter.
package settings

import (
	"context"
	"fmt"
	"math"
	"slices"
	"sort"
	"strconv"
	"strings"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/internal/prep"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

// NoIterations, as Settings.MaxIterations, asks for no iteration at all.
const NoIterations = -1

// Style is how a message names the setting it is about.
type Style int

const (
	// Plain puts a space after the setting's name: "restarts -1 is negative".
	Plain Style = iota
	// Labelled puts a colon after it: "restarts: -1 is negative".
	Labelled
)

// name returns the setting's name as style writes it before a value.
func (s Style) name(setting string) string {
	if s == Labelled {
		return setting + ":"
	}
	return setting
}

func invalid(format string, args ...any) error {
	return fitters.Errorf(fitters.InvalidArgument, format, args...)
}

// Method describes a fitter to the shared resolution.
type Method struct {
	// Name is the fitter's registered name, used in messages.
	Name string
	// Structures are the covariance structures the fitter fits, in the
	// order Describe lists them.
	Structures []mixture.Structure
	// Defaults apply to the iteration settings left at zero.
	Defaults Defaults
	// Style is how the fitter's messages name a setting.
	Style Style
}

// Defaults are a fitter's values for iteration settings left at zero.
type Defaults struct {
	MaxIterations int
	Tolerance     float64
	Restarts      int
}

// Describe checks ctx and completes info with the method's name and
// structures.
func (m Method) Describe(ctx context.Context, info fitters.Info) (fitters.Info, error) {
	if err := fitters.ContextError(ctx); err != nil {
		return fitters.Info{}, err
	}
	info.Name = m.Name
	info.Structures = slices.Clone(m.Structures)
	return info, nil
}

// Basics are the resolved structure, criterion and iteration settings.
type Basics struct {
	Structure mixture.Structure
	Criterion fitters.Criterion
	// MaxIter is the iteration cap of one restart; 0 evaluates the start only.
	MaxIter  int
	Tol      float64
	Restarts int
}

// Basics validates the structure, criterion, iteration cap, tolerance and
// restarts of s, in that order, and fills in the defaults. The structure is
// Settings.Structure, else the start's structure, else Full; a known
// structure that the method does not fit is Unimplemented.
func (m Method) Basics(s fitters.Settings) (Basics, error) {
	var b Basics
	def, style := m.Defaults, m.Style
	b.Structure = s.Structure
	if b.Structure == 0 && s.Start != nil {
		b.Structure = s.Start.Structure
	}
	switch b.Structure {
	case 0:
		b.Structure = mixture.Full
	case mixture.Full, mixture.Diagonal, mixture.Spherical, mixture.Tied:
	default:
		return Basics{}, invalid("%s %d is not a known covariance structure", style.name("structure"), int(b.Structure))
	}
	if !slices.Contains(m.Structures, b.Structure) {
		names := make([]string, len(m.Structures))
		for i, st := range m.Structures {
			names[i] = st.String()
		}
		return Basics{}, fitters.Errorf(fitters.Unimplemented, "%s %s is not supported by the %s fitter (supported: %s)",
			style.name("structure"), b.Structure, m.Name, strings.Join(names, ", "))
	}

	switch s.Criterion {
	case 0:
		b.Criterion = fitters.BIC
	case fitters.BIC, fitters.AIC:
		b.Criterion = s.Criterion
	default:
		return Basics{}, invalid("%s %d is not known (want bic or aic)", style.name("criterion"), int(s.Criterion))
	}

	switch {
	case s.MaxIterations == 0:
		b.MaxIter = def.MaxIterations
	case s.MaxIterations == NoIterations:
		b.MaxIter = 0
	case s.MaxIterations < NoIterations:
		return Basics{}, invalid("%s %d is negative (use -1 for no iterations, 0 for the default %d)", style.name("max iterations"), s.MaxIterations, def.MaxIterations)
	default:
		b.MaxIter = s.MaxIterations
	}

	switch {
	case math.IsNaN(s.Tolerance) || math.IsInf(s.Tolerance, 0) || s.Tolerance < 0:
		return Basics{}, invalid("%s %v must be a finite non-negative number", style.name("tolerance"), s.Tolerance)
	case s.Tolerance == 0:
		b.Tol = def.Tolerance
	default:
		b.Tol = s.Tolerance
	}

	switch {
	case s.Restarts < 0:
		return Basics{}, invalid("%s %d is negative", style.name("restarts"), s.Restarts)
	case s.Restarts == 0:
		b.Restarts = def.Restarts
	default:
		b.Restarts = s.Restarts
	}
	return b, nil
}

// Range is the resolved number of components: K from Min to Max, chosen
// by the criterion when Selecting (otherwise Min == Max).
type Range struct {
	Min, Max  int
	Selecting bool
}

// Chosen is the report note naming the K chosen by criterion c when r is
// a range to choose from (none otherwise).
func (r Range) Chosen(k int, c fitters.Criterion) []string {
	if !r.Selecting {
		return nil
	}
	return []string{fmt.Sprintf("K=%d has the lowest %s of K=%d..%d", k, strings.ToUpper(c.String()), r.Min, r.Max)}
}

// Components resolves the number of components from Settings.Components,
// the component range, the start (its K) or the labels (their largest
// value + 1). It rejects a start together with labels, and either together
// with a range.
func (m Method) Components(s fitters.Settings) (Range, error) {
	if s.Start != nil && s.Labels != nil {
		return Range{}, invalid("start and labels are both set; give at most one")
	}
	if s.MaxComponents < 0 || s.MinComponents < 0 {
		return Range{}, invalid("component range [%d, %d] has a negative bound", s.MinComponents, s.MaxComponents)
	}
	if s.MaxComponents > 0 {
		if s.Start != nil || s.Labels != nil {
			return Range{}, invalid("max components is set (choosing K) but start or labels fix K; give one or the other")
		}
		r := Range{Min: s.MinComponents, Max: s.MaxComponents, Selecting: true}
		if r.Min == 0 {
			r.Min = 1
		}
		if r.Min > r.Max {
			return Range{}, invalid("min components %d exceeds max components %d", r.Min, r.Max)
		}
		return r, nil
	}
	k := s.Components
	switch {
	case s.Start != nil:
		if k == 0 {
			k = len(s.Start.Components)
		} else if k != len(s.Start.Components) {
			return Range{}, invalid("components is %d but start has %d components", k, len(s.Start.Components))
		}
	case s.Labels != nil && k == 0:
		for _, l := range s.Labels {
			if l+1 > k {
				k = l + 1
			}
		}
	}
	if k < 1 {
		return Range{}, invalid("%s %d must be at least 1", m.Style.name("components"), k)
	}
	return Range{Min: k, Max: k}, nil
}

// Starts resolves how the restarts start: the number of components (see
// Components), a check that the rows r have enough distinct rows of
// positive weight for the largest K, then the caller's start or labels (see
// ResolveStart). A start fixed by the caller leaves one restart in b.
func (m Method) Starts(s fitters.Settings, r *prep.Rows, rules StartRules, b *Basics) (Range, Start, error) {
	k, err := m.Components(s)
	if err != nil {
		return Range{}, Start{}, err
	}
	if err := r.RequireDistinct(k.Max); err != nil {
		return Range{}, Start{}, err
	}
	st, err := ResolveStart(s, r.N, r.D, k.Max, rules)
	if err != nil {
		return Range{}, Start{}, err
	}
	if st.Given() {
		b.Restarts = 1
	}
	return k, st, nil
}

// Start kinds, as echoed under "start".
const (
	KindSeeded = "kmeans++"
	KindParams = "params"
	KindLabels = "labels"
)

// Start is the resolved starting point of a fit.
type Start struct {
	// Params is a private copy of the caller's start, or nil.
	Params *mixture.Params
	// Labels is a private copy of the caller's labels, or nil.
	Labels []int
	// Kind is KindParams, KindLabels or KindSeeded.
	Kind string
}

// Given reports whether the caller fixed the start (so one restart suffices).
func (s Start) Given() bool { return s.Kind != KindSeeded }

// StartRules say which caller starts a fitter accepts, beyond a matching
// dimension and valid parameters: Family and Structure, when non-zero, must
// match the start's.
type StartRules struct {
	Family    mixture.Family
	Structure mixture.Structure
}

// ResolveStart checks the caller's start against d columns and the rules,
// or the caller's labels against rows rows and kMax components, and copies
// whichever is given.
func ResolveStart(s fitters.Settings, rows, d, kMax int, rules StartRules) (Start, error) {
	switch {
	case s.Start != nil:
		if err := CheckStart(s.Start, d, rules); err != nil {
			return Start{}, err
		}
		st := s.Start.Clone()
		return Start{Params: &st, Kind: KindParams}, nil
	case s.Labels != nil:
		if len(s.Labels) != rows {
			return Start{}, invalid("labels: %d labels for %d rows", len(s.Labels), rows)
		}
		for i, l := range s.Labels {
			if l < 0 || l >= kMax {
				return Start{}, invalid("labels: row %d has label %d, want 0..%d", i, l, kMax-1)
			}
		}
		return Start{Labels: append([]int(nil), s.Labels...), Kind: KindLabels}, nil
	}
	return Start{Kind: KindSeeded}, nil
}

// CheckStart validates caller-supplied starting parameters: the dimension,
// then the family and structure the rules ask for, then the parameters.
func CheckStart(st *mixture.Params, d int, rules StartRules) error {
	if st.Dim != d {
		return invalid("start: dim %d differs from the data's %d columns", st.Dim, d)
	}
	if rules.Family != 0 && st.Family != rules.Family {
		return invalid("start: family %s, want %s", st.Family, rules.Family)
	}
	if rules.Structure != 0 && st.Structure != rules.Structure {
		return invalid("start: structure %s differs from the requested %s", st.Structure, rules.Structure)
	}
	if err := st.Validate(); err != nil {
		return &fitters.Error{Code: fitters.InvalidArgument, Msg: "start", Err: err}
	}
	return nil
}

// Ridge resolves Settings.Ridge into one value per feature. A negative
// value asks for the default: fraction × the feature's variance, or, for
// the spherical structure, fraction × the mean feature variance. It also
// returns the ridge as echoed in a report.
func (m Method) Ridge(value float64, structure mixture.Structure, variance []float64, fraction float64) ([]float64, string, error) {
	ridge := make([]float64, len(variance))
	switch {
	case math.IsNaN(value) || math.IsInf(value, 0):
		return nil, "", invalid("%s %v must be finite", m.Style.name("ridge"), value)
	case value < 0:
		var mv float64
		for _, v := range variance {
			mv += v
		}
		mv /= float64(len(variance))
		for j := range ridge {
			if structure == mixture.Spherical {
				ridge[j] = fraction * mv
			} else {
				ridge[j] = fraction * variance[j]
			}
		}
		if structure == mixture.Spherical {
			return ridge, fmt.Sprintf("%s x mean feature variance = %s", Float(fraction), Float(ridge[0])), nil
		}
		parts := make([]string, len(ridge))
		for j, v := range ridge {
			parts[j] = strconv.FormatFloat(v, 'g', 6, 64)
		}
		return ridge, fmt.Sprintf("%s x feature variance = %s", Float(fraction), strings.Join(parts, ",")), nil
	}
	for j := range ridge {
		ridge[j] = value
	}
	return ridge, Float(value), nil
}

// MinRows is the default smallest effective row count of a component for
// em and tmix: D+1 for full matrices (fewer rows make them singular), 2 for
// diagonal and spherical ones, 1 for a tied one (it pools every component).
func MinRows(structure mixture.Structure, d int) float64 {
	switch structure {
	case mixture.Full:
		return float64(d + 1)
	case mixture.Diagonal, mixture.Spherical:
		return 2
	}
	return 1
}

// OptionNames returns the names of opts in sorted order, so that the first
// bad option reported does not depend on map order.
func OptionNames(opts map[string]string) []string {
	names := make([]string, 0, len(opts))
	for name := range opts {
		names = append(names, name)
	}
	sort.Strings(names)
	return names
}

// Number parses the value raw of option name as a finite number.
func Number(name, raw string) (float64, error) {
	v, err := strconv.ParseFloat(strings.TrimSpace(raw), 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, invalid("option %q: value %q is not a finite number", name, raw)
	}
	return v, nil
}

// Positive parses the value raw of option name as a finite positive number.
func Positive(name, raw string) (float64, error) {
	v, err := Number(name, raw)
	if err != nil {
		return 0, err
	}
	if v <= 0 {
		return 0, invalid("option %q: value %q must be positive", name, raw)
	}
	return v, nil
}

// RowCount parses the value raw of option name as a positive row count
// (fractional values allowed: weighted rows count fractionally).
func RowCount(name, raw string) (float64, error) {
	v, err := strconv.ParseFloat(strings.TrimSpace(raw), 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) || v <= 0 {
		return 0, invalid("option %q: value %q must be a positive number", name, raw)
	}
	return v, nil
}

// Float formats v as the shortest decimal that reads back as v.
func Float(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// Echo returns the settings every fitter reports: family, structure,
// components, seed, the iteration settings, ridge and start. A MaxIter of 0
// is spelled out, since it means "evaluate the start only".
func Echo(family mixture.Family, b Basics, components int, seed uint64, ridge, start string) map[string]string {
	m := map[string]string{
		"family":         family.String(),
		"structure":      b.Structure.String(),
		"components":     strconv.Itoa(components),
		"seed":           strconv.FormatUint(seed, 10),
		"max_iterations": strconv.Itoa(b.MaxIter),
		"tolerance":      Float(b.Tol),
		"restarts":       strconv.Itoa(b.Restarts),
		"ridge":          ridge,
		"start":          start,
	}
	if b.MaxIter == 0 {
		m["max_iterations"] = "0 (evaluate the start only)"
	}
	return m
}

// EchoRange adds to m, when r is a range to choose from, the criterion and
// the range's bounds ("components_min", "components_max").
func EchoRange(m map[string]string, r Range, c fitters.Criterion) {
	if !r.Selecting {
		return
	}
	m["criterion"] = c.String()
	m["components_min"] = strconv.Itoa(r.Min)
	m["components_max"] = strconv.Itoa(r.Max)
}
