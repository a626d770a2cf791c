package picture

import (
	"errors"
	"fmt"
	"image/color"
	"io"
	"math"
	"sort"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"github.com/mixd-dev/mixd/fitters/mixture"
)

// Okabe–Ito colours (Okabe & Ito, "Color Universal Design", 2008; common
// practice). Components use them in this order; black marks flagged rows.
var (
	componentColours = []color.NRGBA{
		{0xE6, 0x9F, 0x00, 0xFF}, // orange
		{0x56, 0xB4, 0xE9, 0xFF}, // sky blue
		{0x00, 0x9E, 0x73, 0xFF}, // bluish green
		{0x00, 0x72, 0xB2, 0xFF}, // blue
		{0xD5, 0x5E, 0x00, 0xFF}, // vermillion
		{0xCC, 0x79, 0xA7, 0xFF}, // reddish purple
		{0xF0, 0xE4, 0x42, 0xFF}, // yellow
	}
	markColour = color.NRGBA{0, 0, 0, 0xFF}
)

// ComponentColour is the colour of component k (0-based) in every picture.
func ComponentColour(k int) color.Color {
	return componentColours[k%len(componentColours)]
}

// ellipsePoints is the number of vertices of each drawn ellipse; tests count
// paths with at least this many segments to find the ellipses.
const ellipsePoints = 96

// EllipseSegments is the number of straight segments of each drawn ellipse.
const EllipseSegments = ellipsePoints

// View describes a two-feature picture of a model.
type View struct {
	// Params are the model's parameters (any dimension of at least 2).
	Params mixture.Params
	// X and Y are the 0-based indices of the features on the axes.
	X, Y int
	// Rows are optional data rows, row-major, Params.Dim columns.
	Rows []float64
	// Marked flags rows to draw distinctly (nil: none); one per row.
	Marked []bool
	// MarkedLabel is the legend text for marked rows, e.g. "outlier (t rule)".
	MarkedLabel string
	// Title is the picture's title.
	Title string
	// GridSize is the number of cells per axis of the log-density shading
	// (default 96).
	GridSize int
}

// FeatureName is the name of feature j of p, or "feature j+1" when the model
// has no names.
func FeatureName(p mixture.Params, j int) string {
	if j >= 0 && j < len(p.Features) && p.Features[j] != "" {
		return p.Features[j]
	}
	return fmt.Sprintf("feature %d", j+1)
}

// FeatureIndex finds a feature by name, or by 1-based number ("2").
func FeatureIndex(p mixture.Params, name string) (int, error) {
	for j, f := range p.Features {
		if f == name {
			return j, nil
		}
	}
	var n int
	if _, err := fmt.Sscanf(name, "%d", &n); err == nil && fmt.Sprint(n) == name && n >= 1 && n <= p.Dim {
		return n - 1, nil
	}
	if len(p.Features) > 0 {
		return 0, fmt.Errorf("feature %q: not one of the model's features (%s)", name, strings.Join(p.Features, ", "))
	}
	return 0, fmt.Errorf("feature %q: the model has no feature names; give a number from 1 to %d", name, p.Dim)
}

// Marginal2 returns the mixture's exact marginal over features x and y: the
// same weights, the means' (x, y) entries and the 2×2 sub-blocks of the
// covariance (Gaussian) or scale (Student-t, same degrees of freedom)
// matrices (marginals of Gaussian and multivariate t distributions; common
// result).
func Marginal2(p mixture.Params, x, y int) (mixture.Params, error) {
	if p.Dim < 2 {
		return mixture.Params{}, fmt.Errorf("a two-feature picture needs a model with at least 2 features, this one has %d", p.Dim)
	}
	for _, j := range []int{x, y} {
		if j < 0 || j >= p.Dim {
			return mixture.Params{}, fmt.Errorf("feature index %d: out of range [0, %d)", j, p.Dim)
		}
	}
	if x == y {
		return mixture.Params{}, fmt.Errorf("x and y are both feature %q: choose two different features", FeatureName(p, x))
	}
	q := mixture.Params{
		Dim:       2,
		Features:  []string{FeatureName(p, x), FeatureName(p, y)},
		Family:    p.Family,
		Structure: mixture.Full,
	}
	d := p.Dim
	for k, c := range p.Components {
		if len(c.Mean) != d || len(c.Cov) != d*d {
			return mixture.Params{}, fmt.Errorf("component %d: mean or covariance does not match dimension %d", k, d)
		}
		q.Components = append(q.Components, mixture.Component{
			Weight: c.Weight,
			Mean:   []float64{c.Mean[x], c.Mean[y]},
			Cov:    []float64{c.Cov[x*d+x], c.Cov[x*d+y], c.Cov[y*d+x], c.Cov[y*d+y]},
			DF:     c.DF,
		})
	}
	return q, nil
}

// Ellipse returns the closed outline {m + r·L·u : |u| = 1} of a 2×2
// symmetric positive definite matrix cov (row-major) around mean m: the
// points at Mahalanobis distance r. Its semi-axes are r·sqrt of the
// eigenvalues, along the eigenvectors. The last point repeats the first.
func Ellipse(mean [2]float64, cov [4]float64, r float64) (plotter.XYs, error) {
	a, b, c := cov[0], 0.5*(cov[1]+cov[2]), cov[3]
	if !(a > 0 && c > 0 && a*c-b*b > 0) {
		return nil, fmt.Errorf("covariance [%g %g; %g %g] is not positive definite", cov[0], cov[1], cov[2], cov[3])
	}
	mid, half := 0.5*(a+c), math.Hypot(0.5*(a-c), b)
	l1, l2 := mid+half, math.Max(mid-half, 0)
	theta := 0.5 * math.Atan2(2*b, a-c)
	ct, st := math.Cos(theta), math.Sin(theta)
	s1, s2 := r*math.Sqrt(l1), r*math.Sqrt(l2)
	pts := make(plotter.XYs, ellipsePoints+1)
	for i := range ellipsePoints {
		t := 2 * math.Pi * float64(i) / ellipsePoints
		u, v := s1*math.Cos(t), s2*math.Sin(t)
		pts[i] = plotter.XY{X: mean[0] + u*ct - v*st, Y: mean[1] + u*st + v*ct}
	}
	pts[ellipsePoints] = pts[0]
	return pts, nil
}

// grid is the log-density over a regular grid; it implements plotter.GridXYZ.
type grid struct {
	xs, ys []float64
	z      []float64 // z[r*len(xs)+c]
}

func (g *grid) Dims() (int, int)   { return len(g.xs), len(g.ys) }
func (g *grid) Z(c, r int) float64 { return g.z[r*len(g.xs)+c] }
func (g *grid) X(c int) float64    { return g.xs[c] }
func (g *grid) Y(r int) float64    { return g.ys[r] }
func linspace(lo, hi float64, n int) []float64 {
	out := make([]float64, n)
	for i := range out {
		out[i] = lo + (hi-lo)*(float64(i)+0.5)/float64(n)
	}
	return out
}

// shades is a light grey ramp for the log-density bands, so that the
// component colours stay readable on top of it.
type shades []color.Color

func (s shades) Colors() []color.Color { return s }

func densityShades(n int) shades {
	s := make(shades, n)
	for i := range s {
		v := uint8(250 - 110*float64(i)/float64(n-1))
		s[i] = color.NRGBA{v, v, v, 0xFF}
	}
	return s
}

// densityBands is the number of shaded log-density bands.
const densityBands = 8

// densitySpan is how far below its maximum (in nats) the shading reaches;
// lower log-densities are left white.
const densitySpan = 12.0

// Scatter draws the two-feature picture described by v.
func Scatter(v View) (*plot.Plot, error) {
	full, err := mixture.New(v.Params)
	if err != nil {
		return nil, fmt.Errorf("picture: model: %w", err)
	}
	mp, err := Marginal2(v.Params, v.X, v.Y)
	if err != nil {
		return nil, fmt.Errorf("picture: %w", err)
	}
	marg, err := mixture.New(mp)
	if err != nil {
		return nil, fmt.Errorf("picture: marginal model: %w", err)
	}
	d := v.Params.Dim
	if len(v.Rows)%d != 0 {
		return nil, fmt.Errorf("picture: rows: %d values is not a multiple of the dimension %d", len(v.Rows), d)
	}
	n := len(v.Rows) / d
	if v.Marked != nil && len(v.Marked) != n {
		return nil, fmt.Errorf("picture: marked: %d flags for %d rows", len(v.Marked), n)
	}
	var labels []int
	if n > 0 {
		labels = make([]int, n)
		if err := full.Assign(v.Rows, labels, nil); err != nil {
			return nil, fmt.Errorf("picture: assign rows: %w", err)
		}
	}

	// Extent: the data and every component's 3-sigma ellipse, padded.
	xlo, xhi, ylo, yhi := math.Inf(1), math.Inf(-1), math.Inf(1), math.Inf(-1)
	grow := func(x, y float64) {
		xlo, xhi = math.Min(xlo, x), math.Max(xhi, x)
		ylo, yhi = math.Min(ylo, y), math.Max(yhi, y)
	}
	ellipses := make([][]plotter.XYs, len(mp.Components))
	for k, c := range mp.Components {
		for r := 1; r <= 3; r++ {
			e, err := Ellipse([2]float64{c.Mean[0], c.Mean[1]}, [4]float64(c.Cov), float64(r))
			if err != nil {
				return nil, fmt.Errorf("picture: component %d: %w", k, err)
			}
			ellipses[k] = append(ellipses[k], e)
			for _, p := range e {
				grow(p.X, p.Y)
			}
		}
	}
	for i := range n {
		grow(v.Rows[i*d+v.X], v.Rows[i*d+v.Y])
	}
	padX, padY := 0.05*(xhi-xlo), 0.05*(yhi-ylo)
	xlo, xhi, ylo, yhi = xlo-padX, xhi+padX, ylo-padY, yhi+padY
	// Headroom above the data for the legend (one line per component plus
	// up to three notes), so that it does not cover points.
	yhi += (yhi - ylo) * 0.075 * float64(len(mp.Components)+3)

	gs := v.GridSize
	if gs <= 0 {
		gs = 96
	}
	g := &grid{xs: linspace(xlo, xhi, gs), ys: linspace(ylo, yhi, gs)}
	pts := make([]float64, 0, 2*gs*gs)
	for _, y := range g.ys {
		for _, x := range g.xs {
			pts = append(pts, x, y)
		}
	}
	g.z = make([]float64, gs*gs)
	if err := marg.LogDensity(pts, g.z); err != nil {
		return nil, fmt.Errorf("picture: log-density grid: %w", err)
	}
	zmax := math.Inf(-1)
	for _, z := range g.z {
		zmax = math.Max(zmax, z)
	}

	p := plot.New()
	p.Title.Text = v.Title
	p.Title.TextStyle.Font.Size = vg.Points(13)
	p.X.Label.Text = FeatureName(v.Params, v.X)
	p.Y.Label.Text = FeatureName(v.Params, v.Y)
	p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = xlo, xhi, ylo, yhi
	p.Legend.Top = true
	p.Legend.ThumbnailWidth = vg.Points(18)

	heat := plotter.NewHeatMap(g, densityShades(densityBands))
	heat.Min, heat.Max = zmax-densitySpan, zmax
	heat.Underflow = color.White
	heat.Rasterized = true // one embedded image instead of gs² rectangles
	levels := make([]float64, densityBands-1)
	for i := range levels {
		levels[i] = zmax - densitySpan*float64(i+1)/densityBands
	}
	contour := plotter.NewContour(g, levels, shades{color.NRGBA{0x90, 0x90, 0x90, 0xFF}})
	contour.LineStyles = []draw.LineStyle{{Color: color.NRGBA{0x90, 0x90, 0x90, 0xFF}, Width: vg.Points(0.35)}}
	p.Add(heat, contour)

	dashes := [][]vg.Length{nil, {vg.Points(5), vg.Points(3)}, {vg.Points(1.5), vg.Points(2.5)}}
	for k := range mp.Components {
		col := ComponentColour(k)
		var sample *plotter.Line
		for r, e := range ellipses[k] {
			l, err := plotter.NewLine(e)
			if err != nil {
				return nil, fmt.Errorf("picture: ellipse: %w", err)
			}
			l.Color = col
			l.Width = vg.Points(1.6)
			l.Dashes = dashes[r]
			p.Add(l)
			if r == 0 {
				sample = l
			}
		}
		var xy plotter.XYs
		for i := range n {
			if labels[i] == k && (v.Marked == nil || !v.Marked[i]) {
				xy = append(xy, plotter.XY{X: v.Rows[i*d+v.X], Y: v.Rows[i*d+v.Y]})
			}
		}
		thumbs := []plot.Thumbnailer{sample}
		if len(xy) > 0 {
			s, err := plotter.NewScatter(xy)
			if err != nil {
				return nil, fmt.Errorf("picture: points: %w", err)
			}
			s.GlyphStyle = draw.GlyphStyle{Color: col, Radius: vg.Points(2), Shape: draw.CircleGlyph{}}
			p.Add(s)
			thumbs = append(thumbs, s)
		}
		p.Legend.Add(fmt.Sprintf("component %d (weight %.2f)", k, mp.Components[k].Weight), thumbs...) // numbered from 0, as classify and show do
	}
	var marked plotter.XYs
	for i := range n {
		if v.Marked != nil && v.Marked[i] {
			marked = append(marked, plotter.XY{X: v.Rows[i*d+v.X], Y: v.Rows[i*d+v.Y]})
		}
	}
	if len(marked) > 0 {
		s, err := plotter.NewScatter(marked)
		if err != nil {
			return nil, fmt.Errorf("picture: marked points: %w", err)
		}
		s.GlyphStyle = draw.GlyphStyle{Color: markColour, Radius: vg.Points(3.5), Shape: draw.CrossGlyph{}}
		p.Add(s)
		label := v.MarkedLabel
		if label == "" {
			label = "marked rows"
		}
		p.Legend.Add(fmt.Sprintf("%s: %d", label, len(marked)), s)
	}
	ringWhat := "covariance"
	if v.Params.Family == mixture.StudentT {
		ringWhat = "scale matrix (Student-t)"
	}
	p.Legend.Add("rings: 1, 2, 3 sigma of the " + ringWhat)
	p.Legend.Add(fmt.Sprintf("shading: log-density, top %.0f nats", densitySpan))
	return p, nil
}

// Series is one curve of a line chart.
type Series struct {
	// Name is the legend text.
	Name string
	// X and Y are the points; equal lengths.
	X, Y []float64
}

// Lines draws one or more curves against a shared x axis, each with its own
// colour and marker.
func Lines(title, xlabel, ylabel string, series []Series) (*plot.Plot, error) {
	if len(series) == 0 {
		return nil, errors.New("picture: no curve to draw")
	}
	p := plot.New()
	p.Title.Text = title
	p.X.Label.Text = xlabel
	p.Y.Label.Text = ylabel
	p.Legend.Top = true
	shapes := []draw.GlyphDrawer{draw.CircleGlyph{}, draw.SquareGlyph{}, draw.TriangleGlyph{}}
	for i, s := range series {
		if len(s.X) != len(s.Y) {
			return nil, fmt.Errorf("picture: curve %q: %d x values and %d y values", s.Name, len(s.X), len(s.Y))
		}
		if len(s.X) == 0 {
			return nil, fmt.Errorf("picture: curve %q has no points", s.Name)
		}
		xy := make(plotter.XYs, len(s.X))
		for j := range s.X {
			if math.IsNaN(s.Y[j]) || math.IsInf(s.Y[j], 0) || math.IsNaN(s.X[j]) || math.IsInf(s.X[j], 0) {
				return nil, fmt.Errorf("picture: curve %q: point %d is not finite", s.Name, j+1)
			}
			xy[j] = plotter.XY{X: s.X[j], Y: s.Y[j]}
		}
		l, pts, err := plotter.NewLinePoints(xy)
		if err != nil {
			return nil, fmt.Errorf("picture: curve %q: %w", s.Name, err)
		}
		col := ComponentColour([]int{3, 4, 2}[i%3])
		l.Color, l.Width = col, vg.Points(1.5)
		pts.GlyphStyle = draw.GlyphStyle{Color: col, Radius: vg.Points(2.5), Shape: shapes[i%len(shapes)]}
		if len(xy) > 60 {
			pts.GlyphStyle.Radius = vg.Points(1)
		}
		p.Add(l, pts)
		p.Legend.Add(s.Name, l, pts)
	}
	return p, nil
}

// History draws a fit's objective after each iteration. objective is the
// report's name for it ("log_likelihood" or "variational_bound").
func History(title, objective string, values []float64) (*plot.Plot, error) {
	if len(values) == 0 {
		return nil, errors.New("picture: the fit report has no per-iteration history")
	}
	name := "log-likelihood"
	if objective == "variational_bound" {
		name = "variational bound"
	}
	xs := make([]float64, len(values))
	for i := range xs {
		xs[i] = float64(i + 1)
	}
	p, err := Lines(title, "iteration", name, []Series{{Name: name, X: xs, Y: values}})
	if err != nil {
		return nil, err
	}
	p.Legend.Top = false // the curve climbs towards the top right
	return p, nil
}

// SelectionPoint is one row of a model-selection table.
type SelectionPoint struct {
	// K is the number of components.
	K int
	// BIC and AIC are the criteria (lower is better).
	BIC, AIC float64
}

// Selection draws BIC and AIC against the number of components.
func Selection(title string, rows []SelectionPoint) (*plot.Plot, error) {
	if len(rows) == 0 {
		return nil, errors.New("picture: the fit report has no selection table (fit with a range of component counts)")
	}
	rows = append([]SelectionPoint(nil), rows...)
	sort.Slice(rows, func(i, j int) bool { return rows[i].K < rows[j].K })
	ks := make([]float64, len(rows))
	bic := make([]float64, len(rows))
	aic := make([]float64, len(rows))
	best := 0
	for i, r := range rows {
		ks[i], bic[i], aic[i] = float64(r.K), r.BIC, r.AIC
		if r.BIC < rows[best].BIC {
			best = i
		}
	}
	p, err := Lines(title, "components (K)", "criterion (lower is better)", []Series{
		{Name: "BIC", X: ks, Y: bic}, {Name: "AIC", X: ks, Y: aic},
	})
	if err != nil {
		return nil, err
	}
	p.X.Tick.Marker = intTicks{}
	p.Legend.Add(fmt.Sprintf("lowest BIC at K = %d", rows[best].K))
	return p, nil
}

// intTicks labels whole numbers only.
type intTicks struct{}

func (intTicks) Ticks(lo, hi float64) []plot.Tick {
	var t []plot.Tick
	step := math.Max(1, math.Ceil((hi-lo)/10))
	for v := math.Ceil(lo); v <= hi; v += step {
		t = append(t, plot.Tick{Value: v, Label: fmt.Sprintf("%.0f", v)})
	}
	return t
}

// Format is an output format of Render.
type Format string

// The formats Render writes.
const (
	SVG Format = "svg"
	PNG Format = "png"
)

// FormatOf picks the format from a file name's extension.
func FormatOf(path string) (Format, error) {
	lower := strings.ToLower(path)
	switch {
	case strings.HasSuffix(lower, ".svg"):
		return SVG, nil
	case strings.HasSuffix(lower, ".png"):
		return PNG, nil
	}
	return "", fmt.Errorf("output %q: want a name ending in .svg or .png", path)
}

// Render writes p in format f at width×height (PNG: pixels at 96 per inch;
// SVG: the same size in points×0.75).
func Render(w io.Writer, p *plot.Plot, f Format, widthPx, heightPx int) error {
	if widthPx < 100 || heightPx < 100 || widthPx > 8000 || heightPx > 8000 {
		return fmt.Errorf("picture: size %dx%d: each side must be from 100 to 8000 pixels", widthPx, heightPx)
	}
	if f != SVG && f != PNG {
		return fmt.Errorf("picture: format %q: want svg or png", f)
	}
	// vg renders PNG at 96 dpi by default: one pixel is 0.75 points.
	wt, err := p.WriterTo(vg.Length(widthPx)*0.75, vg.Length(heightPx)*0.75, string(f))
	if err != nil {
		return fmt.Errorf("picture: render %s: %w", f, err)
	}
	if _, err := wt.WriteTo(w); err != nil {
		return fmt.Errorf("picture: write %s: %w", f, err)
	}
	return nil
}
