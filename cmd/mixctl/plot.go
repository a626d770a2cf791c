package main

import (
	"bytes"
	"flag"
	"fmt"
	"io"
	"os"

	"gonum.org/v1/plot"

	"github.com/mixd-dev/mixd/fitters/mixture"
	"github.com/mixd-dev/mixd/fitters/mixture/picture"
	"github.com/mixd-dev/mixd/fitters/pbconv"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// plotFlags are the flags of `mixctl plot`.
type plotFlags struct {
	model         string
	version       int64
	data          string
	columns       string
	x, y          string
	output        string
	below         float64
	width, height int
	history       bool
	selection     bool
}

func plotCommand(fs *flag.FlagSet) runner {
	f := &plotFlags{}
	fs.StringVar(&f.model, "model", "", "model id (required)")
	fs.Int64Var(&f.version, "version", 0, "model version (default: the newest)")
	fs.StringVar(&f.data, "data", "", "optional CSV `FILE` of rows to draw as points (header names the features)")
	fs.StringVar(&f.columns, "columns", "", "comma-separated CSV column `names` to use, in the model's order (default: the model's feature names)")
	fs.StringVar(&f.x, "x", "", "`FEATURE` on the horizontal axis: a feature name or 1-based number")
	fs.StringVar(&f.y, "y", "", "`FEATURE` on the vertical axis: a feature name or 1-based number")
	fs.StringVar(&f.output, "output", "", "write to `FILE`: .svg or .png (default: SVG on standard output)")
	fs.Float64Var(&f.below, "below", 0, "mark rows whose log-density is below this `percentile` of the training rows' (0: off; Student-t models always mark outliers)")
	fs.IntVar(&f.width, "width", 900, "picture width in `pixels`")
	fs.IntVar(&f.height, "height", 650, "picture height in `pixels`")
	fs.BoolVar(&f.history, "history", false, "draw the fit's objective per iteration instead")
	fs.BoolVar(&f.selection, "selection", false, "draw BIC and AIC against the number of components instead (selection fits)")
	return func(a *app, _ []string) error { return a.plot(f) }
}

func (a *app) plot(f *plotFlags) error {
	if f.model == "" {
		return usagef("plot: --model is required")
	}
	if f.history && f.selection {
		return usagef("plot: --history and --selection draw different pictures: choose one")
	}
	if !(f.below >= 0 && f.below < 100) {
		return usagef("plot: --below %v: want a percentile from 0 (off) to below 100", f.below)
	}
	if f.width < 100 || f.width > 8000 || f.height < 100 || f.height > 8000 {
		return usagef("plot: --width %d --height %d: each must be from 100 to 8000 pixels", f.width, f.height)
	}
	format := picture.SVG
	if f.output != "" {
		var err error
		if format, err = picture.FormatOf(f.output); err != nil {
			return usagef("plot: --output: %v", err)
		}
	}
	twoD := !f.history && !f.selection
	if twoD && (f.x == "" || f.y == "") {
		return usagef("plot: --x and --y are required (or use --history or --selection)")
	}
	if !twoD && (f.data != "" || f.x != "" || f.y != "" || f.below != 0) {
		return usagef("plot: --data, --x, --y and --below apply only to the two-feature picture")
	}
	var t *table
	if f.data != "" {
		var err error
		if t, err = a.readTable(f.data); err != nil {
			return err
		}
	}
	c, err := a.dial()
	if err != nil {
		return err
	}
	m, err := c.GetModel(a.ctx, f.model, f.version)
	if err != nil {
		return err
	}
	var p *plot.Plot
	switch {
	case f.history:
		p, err = historyPlot(m)
	case f.selection:
		p, err = selectionPlot(m)
	default:
		p, err = modelPlot(m, t, f)
	}
	if err != nil {
		return err
	}
	var buf bytes.Buffer
	if err := picture.Render(&buf, p, format, f.width, f.height); err != nil {
		return err
	}
	return writeOutput(a.stdout, f.output, buf.Bytes())
}

// writeOutput writes b to path, or to stdout when path is empty.
func writeOutput(stdout io.Writer, path string, b []byte) error {
	if path == "" {
		if _, err := stdout.Write(b); err != nil {
			return fmt.Errorf("write output: %w", err)
		}
		return nil
	}
	if err := os.WriteFile(path, b, 0o644); err != nil {
		return fmt.Errorf("write output: %w", err)
	}
	return nil
}

// modelLabel is "NAME version N" for titles.
func modelLabel(m *mixdv1.Model) string {
	return fmt.Sprintf("%s version %d", trimModelName(m.GetName()), m.GetVersion())
}

func trimModelName(name string) string {
	const prefix = "models/"
	if len(name) > len(prefix) && name[:len(prefix)] == prefix {
		return name[len(prefix):]
	}
	return name
}

func historyPlot(m *mixdv1.Model) (*plot.Plot, error) {
	r := m.GetReport()
	if len(r.GetHistory()) == 0 {
		return nil, inputf("plot: %s has no per-iteration history in its fit report", modelLabel(m))
	}
	p, err := picture.History("How the fit of "+modelLabel(m)+" climbed", r.GetObjective(), r.GetHistory())
	if err != nil {
		return nil, inputf("plot: %v", err)
	}
	return p, nil
}

func selectionPlot(m *mixdv1.Model) (*plot.Plot, error) {
	rows := m.GetReport().GetSelection()
	if len(rows) == 0 {
		return nil, inputf("plot: %s has no selection table: it was fitted with one component count (fit with `mixctl fit --components-range`)", modelLabel(m))
	}
	pts := make([]picture.SelectionPoint, len(rows))
	for i, r := range rows {
		pts[i] = picture.SelectionPoint{K: int(r.GetComponents()), BIC: r.GetBic(), AIC: r.GetAic()}
	}
	p, err := picture.Selection("Criteria by component count for "+modelLabel(m), pts)
	if err != nil {
		return nil, inputf("plot: %v", err)
	}
	return p, nil
}

// modelPlot draws the two-feature picture of m with the rows of t (nil: no
// rows), computing assignments and marks in-process from the parameters.
func modelPlot(m *mixdv1.Model, t *table, f *plotFlags) (*plot.Plot, error) {
	params, err := pbconv.ParamsFromProto(m.GetParameters())
	if err != nil {
		return nil, fmt.Errorf("plot: model %s: %w", modelLabel(m), err)
	}
	xi, err := picture.FeatureIndex(params, f.x)
	if err != nil {
		return nil, usagef("plot: --x: %v", err)
	}
	yi, err := picture.FeatureIndex(params, f.y)
	if err != nil {
		return nil, usagef("plot: --y: %v", err)
	}
	if xi == yi {
		return nil, usagef("plot: --x and --y are both %q: choose two different features", picture.FeatureName(params, xi))
	}
	v := picture.View{
		Params: params, X: xi, Y: yi,
		Title: fmt.Sprintf("%s: %s against %s", modelLabel(m), picture.FeatureName(params, yi), picture.FeatureName(params, xi)),
	}
	if t != nil {
		if t, err = matchColumns(t, m.GetParameters(), splitList(f.columns)); err != nil {
			return nil, err
		}
		if t.observed != nil {
			for i, ok := range t.observed {
				if !ok {
					return nil, inputf("%s: line %d has an empty cell in column %q: plot needs complete rows",
						t.source, t.lines[i/t.data.Cols], t.header[i%t.data.Cols])
				}
			}
		}
		v.Rows = t.data.Values
		model, err := mixture.New(params)
		if err != nil {
			return nil, fmt.Errorf("plot: model %s: %w", modelLabel(m), err)
		}
		marks, label, err := picture.Marks(model, v.Rows, picture.MarkOptions{
			BelowPercent:  f.below,
			OutlierLevel:  m.GetReport().GetOutlierLevel(),
			QuantileLevel: m.GetReport().GetTrainingQuantiles().GetLevels(),
			QuantileValue: m.GetReport().GetTrainingQuantiles().GetLogDensities(),
		})
		if err != nil {
			return nil, inputf("plot: %v", err)
		}
		v.Marked, v.MarkedLabel = marks, label
	}
	p, err := picture.Scatter(v)
	if err != nil {
		return nil, fmt.Errorf("plot: %w", err)
	}
	return p, nil
}
