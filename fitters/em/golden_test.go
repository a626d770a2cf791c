package em

import (
	"context"
	"encoding/json"
	"flag"
	"math"
	"os"
	"testing"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

var update = flag.Bool("update", false, "rewrite testdata/em golden files from the current code")

const pumpsGolden = "../../testdata/em/pumps_golden.json"

// goldenFit is one recorded fit.
type goldenFit struct {
	Structure     string              `json:"structure"`
	LogLikelihood float64             `json:"log_likelihood"`
	BIC           float64             `json:"bic"`
	Components    []mixture.Component `json:"components"`
}

// TestPumpsGolden guards against unintended changes of results: default
// k-means++ fits of simulated pumping-station data (all four structures)
// must reproduce the recorded parameters. Regenerate deliberately with
// go test ./fitters/em -run TestPumpsGolden -update. (The outside checks
// are the Old Faithful tests; this one only pins our own behaviour.)
func TestPumpsGolden(t *testing.T) {
	data, _ := pumpTruth(3).sample(1500, 2024)
	var got []goldenFit
	for _, s := range allStructures {
		res, err := New().Fit(context.Background(), data, fitters.Settings{Components: 3, Structure: s, Seed: 11, Restarts: 2, Ridge: -1}, nil)
		if err != nil {
			t.Fatal(err)
		}
		got = append(got, goldenFit{Structure: s.String(), LogLikelihood: res.Report.LogLikelihood, BIC: res.Report.BIC, Components: res.Params.Components})
	}
	if *update {
		b, err := json.MarshalIndent(got, "", "  ")
		if err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(pumpsGolden, append(b, '\n'), 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	b, err := os.ReadFile(pumpsGolden)
	if err != nil {
		t.Fatal(err)
	}
	var want []goldenFit
	if err := json.Unmarshal(b, &want); err != nil {
		t.Fatal(err)
	}
	if len(want) != len(got) {
		t.Fatalf("golden has %d fits, got %d", len(want), len(got))
	}
	// Relative 1e-8: bit-identical on one platform, but other CPUs may fuse
	// multiply-adds differently.
	near := func(a, b float64) bool { return math.Abs(a-b) <= 1e-8*math.Max(1, math.Abs(b)) }
	for i, w := range want {
		g := got[i]
		if g.Structure != w.Structure || !near(g.LogLikelihood, w.LogLikelihood) || !near(g.BIC, w.BIC) || len(g.Components) != len(w.Components) {
			t.Fatalf("%s: log-likelihood %v BIC %v, golden %v %v", w.Structure, g.LogLikelihood, g.BIC, w.LogLikelihood, w.BIC)
		}
		for k, wc := range w.Components {
			gc := g.Components[k]
			ok := near(gc.Weight, wc.Weight)
			for j := range wc.Mean {
				ok = ok && near(gc.Mean[j], wc.Mean[j])
			}
			for j := range wc.Cov {
				ok = ok && near(gc.Cov[j], wc.Cov[j])
			}
			if !ok {
				t.Fatalf("%s component %d: %+v, golden %+v", w.Structure, k, gc, wc)
			}
		}
	}
}
