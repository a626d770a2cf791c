package main_test

import (
	"context"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	mixdclient "github.com/mixd-dev/mixd/clients/go"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

// blankCells returns the mask of the first n pump rows with cells blanked:
// every fourth row stays complete, row 1 loses every value, the others lose
// one feature in turn.
func blankCells(n, d int) []bool {
	obs := make([]bool, n*d)
	for i := 0; i < n; i++ {
		for j := 0; j < d; j++ {
			obs[i*d+j] = i%4 == 0 || (i != 1 && j != i%d)
		}
	}
	return obs
}

// writeBlankedCSV writes the rows with unobserved cells left empty.
func writeBlankedCSV(t *testing.T, header []string, x mixdclient.Matrix, obs []bool) string {
	t.Helper()
	var b strings.Builder
	b.WriteString(strings.Join(header, ",") + "\n")
	for i := 0; i < x.Rows; i++ {
		for j, v := range x.Row(i) {
			if j > 0 {
				b.WriteByte(',')
			}
			if obs[i*x.Cols+j] {
				b.WriteString(strconv.FormatFloat(v, 'g', -1, 64))
			}
		}
		b.WriteByte('\n')
	}
	p := filepath.Join(t.TempDir(), "blanked.csv")
	if err := os.WriteFile(p, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

// csvColumn returns the named column of mixctl's CSV output as numbers.
func csvColumn(t *testing.T, out, name string) []float64 {
	t.Helper()
	lines := strings.Split(strings.TrimSpace(out), "\n")
	idx := slices.Index(strings.Split(lines[0], ","), name)
	if idx < 0 {
		t.Fatalf("no column %q in header %q", name, lines[0])
	}
	var col []float64
	for _, l := range lines[1:] {
		f := strings.Split(l, ",")
		v, err := strconv.ParseFloat(f[idx], 64)
		if err != nil {
			t.Fatalf("column %s: %v", name, err)
		}
		col = append(col, v)
	}
	return col
}

// TestMissingValuesPredictCompare fits the pump data, blanks some cells,
// and checks end to end, through the Go client and through mixctl, that
// masked Score and Classify equal the in-process marginal evaluation, that
// Predict equals the in-process conditional (means, standard deviations and
// seeded draws, also when the client splits the batch), and that comparing
// two fitted versions gives a finite KL with a standard error that equals
// the in-process comparison.
func TestMissingValuesPredictCompare(t *testing.T) {
	d := startDaemon(t, t.TempDir(), false)
	c := d.client()
	ctx := context.Background()
	data, header := pumps(t)
	v1, err := c.Fit(ctx, "pumps", data, mixdclient.FitOptions{Components: 3, Seed: 7, FeatureNames: header}, nil)
	if err != nil {
		t.Fatal(err)
	}
	early := mixdclient.Matrix{Rows: 1500, Cols: data.Cols, Values: data.Values[:1500*data.Cols]}
	v2, err := c.Fit(ctx, "pumps", early, mixdclient.FitOptions{Components: 3, Seed: 7, FeatureNames: header}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if v1.GetVersion() != 1 || v2.GetVersion() != 2 {
		t.Fatalf("versions %d and %d", v1.GetVersion(), v2.GetVersion())
	}
	m1, m2 := inProcess(t, v1), inProcess(t, v2)
	dim, k := m1.Dim(), m1.K()

	n := 200
	x := mixdclient.Matrix{Rows: n, Cols: dim, Values: append([]float64(nil), data.Values[:n*dim]...)}
	obs := blankCells(n, dim)
	for i, o := range obs {
		if !o {
			x.Values[i] = 0 // what mixctl sends for an empty cell
		}
	}
	want := mixture.MarginalOutput{LogDensity: make([]float64, n), Posteriors: make([]float64, n*k),
		Labels: make([]int, n), MaxPosterior: make([]float64, n), Observed: make([]int, n)}
	if err := m2.Marginal(x.Values, obs, &want); err != nil {
		t.Fatal(err)
	}
	cond, err := m2.Conditional(x.Values, obs, mixture.ConditionalOptions{StdDev: true, Draws: 2, Seed: 5})
	if err != nil {
		t.Fatal(err)
	}

	// Go client.
	sr, err := c.Score(ctx, "pumps", x, mixdclient.ScoreOptions{Observed: obs})
	if err != nil {
		t.Fatal(err)
	}
	checkClose(t, "masked log_densities", sr.LogDensities, want.LogDensity)
	for i, p := range sr.Percentiles {
		if math.IsNaN(p) != (want.Observed[i] < dim) {
			t.Fatalf("row %d (%d observed): percentile %v", i, want.Observed[i], p)
		}
	}
	cr, err := c.Classify(ctx, "pumps", x, mixdclient.ClassifyOptions{Observed: obs, Posteriors: true})
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(cr.Components, want.Labels) {
		t.Fatal("masked components differ from the in-process marginal assignment")
	}
	checkClose(t, "masked posteriors", cr.Posteriors.Values, want.Posteriors)
	small := d.client(mixdclient.WithChunkBytes(40 * dim * 8)) // forces several Predict calls
	for _, pc := range []*mixdclient.Client{c, small} {
		pr, err := pc.Predict(ctx, "pumps", x, obs, mixdclient.PredictOptions{StdDevs: true, Draws: 2, Seed: 5})
		if err != nil {
			t.Fatal(err)
		}
		if pr.Version != 2 {
			t.Errorf("predicted with version %d", pr.Version)
		}
		checkClose(t, "predicted means", pr.Means.Values, cond.Mean)
		checkClose(t, "predicted standard deviations", pr.StdDevs.Values, cond.StdDev)
		checkClose(t, "imputation draws", pr.Draws.Values, cond.Draws)
	}
	cmp, err := c.CompareModels(ctx, "pumps", 1, "", 2, mixdclient.CompareOptions{Samples: 4000, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	wantCmp, err := mixture.Compare(ctx, m1, m2, mixture.CompareOptions{Samples: 4000, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	if cmp.GetKlForward() != wantCmp.Forward || cmp.GetKlBackwardStandardError() != wantCmp.BackwardSE ||
		math.IsInf(cmp.GetKlForward(), 0) || !(cmp.GetKlForwardStandardError() > 0) || len(cmp.GetMatches()) != k {
		t.Errorf("compare: %v ± %v, in-process %+v", cmp.GetKlForward(), cmp.GetKlForwardStandardError(), wantCmp)
	}
	self, err := c.CompareModels(ctx, "pumps", 2, "pumps", 2, mixdclient.CompareOptions{Samples: 500})
	if err != nil || self.GetKlForward() != 0 || self.GetKlBackward() != 0 {
		t.Errorf("a version against itself: %v %v", self, err)
	}

	// mixctl, on a CSV file with empty cells.
	file := writeBlankedCSV(t, header, x, obs)
	out := d.mustMixctl("score", "--model", "pumps", file)
	got := csvColumn(t, out, "log_density")
	checkClose(t, "mixctl score log_density", got, want.LogDensity)
	out = d.mustMixctl("classify", "--model", "pumps", "--with-input", file)
	lines := strings.Split(strings.TrimSpace(out), "\n")
	if !strings.HasPrefix(lines[2], "2,,,,") { // row 2 (index 1) has nothing observed
		t.Errorf("classify --with-input row with nothing observed: %q", lines[2])
	}
	for i, comp := range csvColumn(t, out, "component") {
		if int(comp) != want.Labels[i] {
			t.Fatalf("mixctl classify row %d: component %v, in-process %d", i+1, comp, want.Labels[i])
		}
	}
	out = d.mustMixctl("predict", "--model", "pumps", "--std", file)
	for j, h := range header {
		col := csvColumn(t, out, h)
		sd := csvColumn(t, out, h+"_sd")
		for i := 0; i < n; i++ {
			if !closeTo(col[i], cond.Mean[i*dim+j]) || !closeTo(sd[i], cond.StdDev[i*dim+j]) {
				t.Fatalf("mixctl predict row %d %s: %v ± %v, in-process %v ± %v", i+1, h, col[i], sd[i], cond.Mean[i*dim+j], cond.StdDev[i*dim+j])
			}
		}
	}
	out = d.mustMixctl("predict", "--model", "pumps", "--draws", "2", "--seed", "5", file)
	for j, h := range header {
		col := csvColumn(t, out, h)
		for a, v := range col {
			if !closeTo(v, cond.Draws[a*dim+j]) {
				t.Fatalf("mixctl predict --draws line %d %s: %v, in-process %v", a+2, h, v, cond.Draws[a*dim+j])
			}
		}
	}
	out = d.mustMixctl("compare", "pumps@1", "pumps@2", "--samples", "4000", "--seed", "3", "--format", "json")
	var js struct {
		KLForward float64 `json:"kl_forward"`
		SE        float64 `json:"kl_forward_standard_error"`
	}
	if err := json.Unmarshal([]byte(out), &js); err != nil || js.KLForward != wantCmp.Forward || js.SE != wantCmp.ForwardSE {
		t.Errorf("mixctl compare --format json: %v\n%s", err, out)
	}
	out = d.mustMixctl("compare", "pumps@1", "pumps@2", "--samples", "4000", "--seed", "3")
	for _, s := range []string{"KL(p||q)", "KL(q||p)", "bhattacharyya", "models/pumps version 2"} {
		if !strings.Contains(out, s) {
			t.Errorf("mixctl compare output lacks %q:\n%s", s, out)
		}
	}
	if code, _, errOut := d.mixctl("", "fit", "--model", "x", file); code != 4 || !strings.Contains(errOut, "is empty") {
		t.Errorf("fit of a file with empty cells: exit %d, %s", code, errOut)
	}
}
