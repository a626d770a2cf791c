package picture

import (
	"bytes"
	"encoding/xml"
	"flag"
	"fmt"
	"image/png"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/mixd-dev/mixd/fitters/mixture"
)

var update = flag.Bool("update", false, "rewrite the golden files in testdata/")

// pumpParams is a 3-feature, 2-component model in the demo scenario.
func pumpParams(f mixture.Family) mixture.Params {
	df := 0.0
	if f == mixture.StudentT {
		df = 5
	}
	return mixture.Params{
		Dim: 3, Features: []string{"flow_lps", "motor_current_a", "vibration_mm_s"},
		Family: f, Structure: mixture.Full,
		Components: []mixture.Component{
			{Weight: 0.4, Mean: []float64{18, 22, 1.6}, Cov: []float64{4, 1.5, 0.1, 1.5, 2, 0.05, 0.1, 0.05, 0.04}, DF: df},
			{Weight: 0.6, Mean: []float64{42, 40, 2.3}, Cov: []float64{9, 4, 0.2, 4, 5, 0.1, 0.2, 0.1, 0.09}, DF: df},
		},
	}
}

func TestEllipseAxisAligned(t *testing.T) {
	// One axis-aligned component with variances 4 and 1 (standard deviations
	// 2 and 1): the r-sigma ellipse is x²/(2r)² + y²/r² = 1 around the mean,
	// reaching exactly ±2r horizontally and ±r vertically (checked by hand).
	for r := 1; r <= 3; r++ {
		pts, err := Ellipse([2]float64{10, -5}, [4]float64{4, 0, 0, 1}, float64(r))
		if err != nil {
			t.Fatal(err)
		}
		if len(pts) != EllipseSegments+1 || pts[0] != pts[len(pts)-1] {
			t.Fatalf("r=%d: %d points, closed=%v", r, len(pts), pts[0] == pts[len(pts)-1])
		}
		var maxX, maxY float64
		for _, p := range pts {
			dx, dy := p.X-10, p.Y+5
			maxX, maxY = math.Max(maxX, math.Abs(dx)), math.Max(maxY, math.Abs(dy))
			if q := dx*dx/4 + dy*dy; math.Abs(q-float64(r*r)) > 1e-9 {
				t.Errorf("r=%d: point (%g, %g) has squared distance %g", r, p.X, p.Y, q)
			}
		}
		if math.Abs(maxX-2*float64(r)) > 1e-9 || math.Abs(maxY-float64(r)) > 1e-9 {
			t.Errorf("r=%d: half-widths %g, %g, want %d, %d", r, maxX, maxY, 2*r, r)
		}
	}
}

func TestEllipseCorrelated(t *testing.T) {
	// [[2,1],[1,2]] has inverse [[2,-1],[-1,2]]/3 (worked by hand); every
	// outline point must be at Mahalanobis distance 2.
	pts, err := Ellipse([2]float64{0, 0}, [4]float64{2, 1, 1, 2}, 2)
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range pts {
		if q := (2*p.X*p.X - 2*p.X*p.Y + 2*p.Y*p.Y) / 3; math.Abs(q-4) > 1e-9 {
			t.Fatalf("point (%g, %g): squared distance %g, want 4", p.X, p.Y, q)
		}
	}
	if _, err := Ellipse([2]float64{}, [4]float64{1, 2, 2, 1}, 1); err == nil {
		t.Error("indefinite matrix accepted")
	}
}

func TestMarginal2(t *testing.T) {
	q, err := Marginal2(pumpParams(mixture.StudentT), 2, 0)
	if err != nil {
		t.Fatal(err)
	}
	c := q.Components[1]
	if c.Mean[0] != 2.3 || c.Mean[1] != 42 || c.Cov[0] != 0.09 || c.Cov[1] != 0.2 || c.Cov[3] != 9 || c.DF != 5 {
		t.Errorf("marginal component = %+v", c)
	}
	if q.Features[0] != "vibration_mm_s" {
		t.Errorf("features = %v", q.Features)
	}
	for _, tt := range []struct{ x, y int }{{0, 0}, {-1, 1}, {0, 3}} {
		if _, err := Marginal2(pumpParams(mixture.Gaussian), tt.x, tt.y); err == nil {
			t.Errorf("Marginal2(%d, %d) accepted", tt.x, tt.y)
		}
	}
}

func TestFeatureIndex(t *testing.T) {
	p := pumpParams(mixture.Gaussian)
	tests := []struct {
		in   string
		want int
		ok   bool
	}{{"motor_current_a", 1, true}, {"3", 2, true}, {"4", 0, false}, {"pressure", 0, false}, {"01", 0, false}}
	for _, tt := range tests {
		got, err := FeatureIndex(p, tt.in)
		if (err == nil) != tt.ok || (tt.ok && got != tt.want) {
			t.Errorf("FeatureIndex(%q) = %d, %v", tt.in, got, err)
		}
	}
}

// sampleRows draws n seeded rows from p.
func sampleRows(t *testing.T, p mixture.Params, n int) []float64 {
	t.Helper()
	m, err := mixture.New(p)
	if err != nil {
		t.Fatal(err)
	}
	x, _ := m.Sample(n, 7)
	return x
}

// isEllipse reports whether a path's attributes are those of an ellipse:
// drawn in a component colour with at least EllipseSegments segments
// (density contour lines are grey; point markers are arcs).
func isEllipse(attrs []xml.Attr) bool {
	var d, style string
	for _, a := range attrs {
		switch a.Name.Local {
		case "d":
			d = a.Value
		case "style":
			style = a.Value
		}
	}
	if strings.Count(d, "L") < EllipseSegments {
		return false
	}
	for k := range componentColours {
		r, g, b, _ := ComponentColour(k).RGBA()
		if strings.Contains(style, fmt.Sprintf("stroke:#%02X%02X%02X", r>>8, g>>8, b>>8)) {
			return true
		}
	}
	return false
}

// svgSummary parses an SVG document as XML and returns its texts and the
// number of ellipse paths (see isEllipse).
func svgSummary(t *testing.T, b []byte) (texts []string, ellipses int) {
	t.Helper()
	dec := xml.NewDecoder(bytes.NewReader(b))
	var inText bool
	for {
		tok, err := dec.Token()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatalf("SVG is not well-formed XML: %v", err)
		}
		switch e := tok.(type) {
		case xml.StartElement:
			inText = e.Name.Local == "text"
			if e.Name.Local == "path" && isEllipse(e.Attr) {
				ellipses++
			}
		case xml.CharData:
			if inText {
				texts = append(texts, string(e))
			}
		case xml.EndElement:
			inText = false
		}
	}
	return texts, ellipses
}

func TestScatterSVG(t *testing.T) {
	p := pumpParams(mixture.StudentT)
	rows := sampleRows(t, p, 200)
	rows = append(rows, 80, 10, 9) // far from both components
	m, err := mixture.New(p)
	if err != nil {
		t.Fatal(err)
	}
	marks, label, err := Marks(m, rows, MarkOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if !marks[len(marks)-1] {
		t.Fatal("the far row is not flagged")
	}
	pl, err := Scatter(View{Params: p, X: 0, Y: 1, Rows: rows, Marked: marks, MarkedLabel: label, Title: "Pump stations: current against flow"})
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := Render(&buf, pl, SVG, 800, 600); err != nil {
		t.Fatal(err)
	}
	texts, ellipses := svgSummary(t, buf.Bytes())
	if ellipses != 3*len(p.Components) {
		t.Errorf("%d ellipse paths, want %d", ellipses, 3*len(p.Components))
	}
	joined := strings.Join(texts, "\n")
	for _, want := range []string{"Pump stations: current against flow", "flow_lps", "motor_current_a",
		"component 0 (weight 0.40)", "component 1 (weight 0.60)", "scale matrix (Student-t)", "outlier (t rule"} {
		if !strings.Contains(joined, want) {
			t.Errorf("SVG texts lack %q", want)
		}
	}
	if n := strings.Count(joined, "component "); n != len(p.Components) {
		t.Errorf("%d component legend entries, want %d", n, len(p.Components))
	}
	// Golden summary: the texts in order and the ellipse count (structure,
	// not coordinates, which depend on font metrics).
	got := fmt.Sprintf("ellipses %d\n%s\n", ellipses, joined)
	golden := filepath.Join("testdata", "scatter_t.golden")
	if *update {
		if err := os.MkdirAll("testdata", 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(golden, []byte(got), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile(golden)
	if err != nil {
		t.Fatalf("%v (run with -update to create it)", err)
	}
	if got != string(want) {
		t.Errorf("SVG summary differs from %s:\n got:\n%s\nwant:\n%s", golden, got, want)
	}
}

func TestScatterGaussianLegend(t *testing.T) {
	p := pumpParams(mixture.Gaussian)
	pl, err := Scatter(View{Params: p, X: 1, Y: 2, Title: "no rows"})
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := Render(&buf, pl, SVG, 400, 300); err != nil {
		t.Fatal(err)
	}
	texts, ellipses := svgSummary(t, buf.Bytes())
	joined := strings.Join(texts, "\n")
	if ellipses != 6 || !strings.Contains(joined, "sigma of the covariance") || strings.Contains(joined, "Student-t") {
		t.Errorf("ellipses %d, texts %q", ellipses, joined)
	}
}

func TestScatterPNGSize(t *testing.T) {
	p := pumpParams(mixture.Gaussian)
	rows := sampleRows(t, p, 300)
	m, _ := mixture.New(p)
	marks, label, err := Marks(m, rows, MarkOptions{BelowPercent: 5})
	if err != nil {
		t.Fatal(err)
	}
	pl, err := Scatter(View{Params: p, X: 0, Y: 1, Rows: rows, Marked: marks, MarkedLabel: label, Title: "Pump stations"})
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := Render(&buf, pl, PNG, 640, 480); err != nil {
		t.Fatal(err)
	}
	if dir := os.Getenv("PICTURE_ARTEFACTS"); dir != "" {
		_ = os.WriteFile(filepath.Join(dir, "scatter.png"), buf.Bytes(), 0o644)
	}
	img, err := png.Decode(&buf)
	if err != nil {
		t.Fatalf("PNG does not decode: %v", err)
	}
	if b := img.Bounds(); b.Dx() != 640 || b.Dy() != 480 {
		t.Errorf("PNG is %dx%d, want 640x480", b.Dx(), b.Dy())
	}
}

func TestMarksBelowPercent(t *testing.T) {
	p := pumpParams(mixture.Gaussian)
	m, _ := mixture.New(p)
	rows := sampleRows(t, p, 1000)
	flags, label, err := Marks(m, rows, MarkOptions{BelowPercent: 10})
	if err != nil {
		t.Fatal(err)
	}
	n := 0
	for _, f := range flags {
		if f {
			n++
		}
	}
	// Over the rows themselves, the 10th percentile (type 7) leaves 100 rows
	// strictly below it when values are distinct (definition; common practice).
	if n != 100 || !strings.Contains(label, "these rows") {
		t.Errorf("%d rows flagged (%q), want 100", n, label)
	}
	// With training quantiles the threshold is interpolated from them.
	flags, _, err = Marks(m, []float64{18, 22, 1.6, 80, 10, 9}, MarkOptions{
		BelowPercent: 5, QuantileLevel: []float64{0, 0.1}, QuantileValue: []float64{-20, -10},
	})
	if err != nil {
		t.Fatal(err)
	}
	if flags[0] || !flags[1] {
		t.Errorf("flags = %v, want [false true]", flags)
	}
	if _, _, err := Marks(m, rows, MarkOptions{BelowPercent: 100}); err == nil {
		t.Error("percentile 100 accepted")
	}
	if got := interpolate([]float64{0, 0.1}, []float64{-20, -10}, 0.05); got != -15 {
		t.Errorf("interpolate = %g, want -15", got)
	}
}

func TestHistoryAndSelection(t *testing.T) {
	h, err := History("How the fit climbed", "variational_bound", []float64{-900, -700, -650, -648})
	if err != nil {
		t.Fatal(err)
	}
	s, err := Selection("Criteria by K", []SelectionPoint{{3, 1010, 990}, {1, 1200, 1190}, {2, 1000, 980}})
	if err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		name string
		svg  func() ([]byte, error)
		want []string
	}{
		{"history", func() ([]byte, error) { var b bytes.Buffer; err := Render(&b, h, SVG, 500, 400); return b.Bytes(), err },
			[]string{"How the fit climbed", "iteration", "variational bound"}},
		{"selection", func() ([]byte, error) { var b bytes.Buffer; err := Render(&b, s, SVG, 500, 400); return b.Bytes(), err },
			[]string{"Criteria by K", "components (K)", "BIC", "AIC", "lowest BIC at K = 2"}},
	}
	for _, c := range cases {
		b, err := c.svg()
		if err != nil {
			t.Fatal(err)
		}
		texts, _ := svgSummary(t, b)
		joined := strings.Join(texts, "\n")
		for _, w := range c.want {
			if !strings.Contains(joined, w) {
				t.Errorf("%s: texts lack %q", c.name, w)
			}
		}
	}
	if _, err := History("x", "log_likelihood", nil); err == nil {
		t.Error("empty history accepted")
	}
	if _, err := Selection("x", nil); err == nil {
		t.Error("empty selection accepted")
	}
	if _, err := History("x", "log_likelihood", []float64{1, math.NaN()}); err == nil {
		t.Error("NaN accepted")
	}
}

func TestRenderAndFormatErrors(t *testing.T) {
	for _, name := range []string{"a.pdf", "plot", "x.svg.txt"} {
		if _, err := FormatOf(name); err == nil {
			t.Errorf("FormatOf(%q) accepted", name)
		}
	}
	if f, err := FormatOf("OUT.PNG"); err != nil || f != PNG {
		t.Errorf("FormatOf(OUT.PNG) = %q, %v", f, err)
	}
	h, _ := History("x", "log_likelihood", []float64{1, 2})
	if err := Render(io.Discard, h, SVG, 50, 400); err == nil {
		t.Error("50 px width accepted")
	}
}
