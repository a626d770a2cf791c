package picture

import (
	"fmt"
	"sort"

	"github.com/mixd-dev/mixd/fitters/mixture"
)

// MarkOptions chooses which rows Marks flags.
type MarkOptions struct {
	// BelowPercent flags rows whose log-density is below this percentile
	// (0 < p < 100) of the training log-densities; 0 turns it off.
	BelowPercent float64
	// QuantileLevel and QuantileValue are the training log-density quantiles
	// from the fit report (levels in [0, 1], increasing). When empty the
	// percentile is taken over the given rows themselves.
	QuantileLevel, QuantileValue []float64
	// OutlierLevel is the report's outlier level for Student-t models; 0
	// means mixture.DefaultOutlierLevel. Gaussian models are not flagged by
	// the outlier rule.
	OutlierLevel float64
}

// Marks flags rows (row-major, m.Dim() columns) as the outlier rule of a
// Student-t model or a low log-density (opts.BelowPercent) says, and
// returns a legend label saying which rule applied. A flag means statistical
// rarity under the model, not a fault.
func Marks(m *mixture.Model, rows []float64, opts MarkOptions) ([]bool, string, error) {
	d := m.Dim()
	if len(rows)%d != 0 {
		return nil, "", fmt.Errorf("rows: %d values is not a multiple of the dimension %d", len(rows), d)
	}
	n := len(rows) / d
	flags := make([]bool, n)
	var label string
	if m.Family() == mixture.StudentT {
		level := opts.OutlierLevel
		if level == 0 {
			level = mixture.DefaultOutlierLevel
		}
		if err := m.Outliers(rows, level, nil, flags); err != nil {
			return nil, "", fmt.Errorf("outlier flags: %w", err)
		}
		label = fmt.Sprintf("outlier (t rule, level %g)", level)
	}
	if opts.BelowPercent == 0 {
		return flags, label, nil
	}
	if !(opts.BelowPercent > 0 && opts.BelowPercent < 100) {
		return nil, "", fmt.Errorf("below percentile %v: want a value strictly between 0 and 100", opts.BelowPercent)
	}
	logd := make([]float64, n)
	if err := m.LogDensity(rows, logd); err != nil {
		return nil, "", fmt.Errorf("log-density: %w", err)
	}
	q := opts.BelowPercent / 100
	var threshold float64
	source := "training rows"
	if len(opts.QuantileLevel) > 0 && len(opts.QuantileLevel) == len(opts.QuantileValue) {
		threshold = interpolate(opts.QuantileLevel, opts.QuantileValue, q)
	} else {
		if n == 0 {
			return flags, label, nil
		}
		source = "these rows"
		sorted := append([]float64(nil), logd...)
		sort.Float64s(sorted)
		// Linear interpolation between order statistics (type 7; common practice).
		pos := q * float64(n-1)
		lo := int(pos)
		threshold = sorted[lo]
		if lo+1 < n {
			threshold += (pos - float64(lo)) * (sorted[lo+1] - sorted[lo])
		}
	}
	for i, v := range logd {
		if v < threshold {
			flags[i] = true
		}
	}
	below := fmt.Sprintf("below the %g%% log-density point of %s", opts.BelowPercent, source)
	if label != "" {
		label += " or " + below
	} else {
		label = below
	}
	return flags, label, nil
}

// interpolate evaluates the piecewise-linear curve through (xs, ys) at x,
// holding the end values outside [xs[0], xs[len-1]].
func interpolate(xs, ys []float64, x float64) float64 {
	if x <= xs[0] {
		return ys[0]
	}
	for i := 1; i < len(xs); i++ {
		if x <= xs[i] {
			if xs[i] == xs[i-1] {
				return ys[i]
			}
			t := (x - xs[i-1]) / (xs[i] - xs[i-1])
			return ys[i-1] + t*(ys[i]-ys[i-1])
		}
	}
	return ys[len(ys)-1]
}
