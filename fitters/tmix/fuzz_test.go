package tmix

import (
	"context"
	"math"
	"testing"

	"github.com/mixd-dev/mixd/fitters"
)

// FuzzOptions feeds arbitrary option names and values (outside input: they
// arrive as strings over RPC) to a small fit: it must either fail with
// InvalidArgument or return a result with no NaN or infinity, never panic.
func FuzzOptions(f *testing.F) {
	for _, seed := range [][2]string{
		{optDF, "4"}, {optDF, valEstimate}, {optDF, "-1"}, {optDF, "1e308"}, {optDF, "NaN"},
		{optUpdate, valECM}, {optSharing, valPerComp}, {optDFCap, "1e8"}, {optDFFloor, "1e-300"},
		{optDFStart, "0.5"}, {optOutlier, "0.5"}, {optOutlier, "1e-300"}, {optMinRows, "1e300"}, {"x", ""},
	} {
		f.Add(seed[0], seed[1])
	}
	data := fitters.Data{Rows: 40, Cols: 2, Values: make([]float64, 80)}
	for i := range data.Values {
		data.Values[i] = math.Sin(float64(i)*1.7) * float64(1+i%5)
	}
	f.Fuzz(func(t *testing.T, name, value string) {
		res, err := New().Fit(context.Background(), data, fitters.Settings{
			Components: 2, Seed: 1, Restarts: 1, MaxIterations: 5, Options: map[string]string{name: value},
		}, nil)
		if err != nil {
			if fitters.CodeOf(err) != fitters.InvalidArgument {
				t.Fatalf("option %q=%q: error %v with code %v, want InvalidArgument", name, value, err, fitters.CodeOf(err))
			}
			return
		}
		for k, c := range res.Params.Components {
			vals := append(append([]float64{c.Weight, c.DF}, c.Mean...), c.Cov...)
			for _, v := range vals {
				if math.IsNaN(v) || math.IsInf(v, 0) {
					t.Fatalf("option %q=%q: component %d has %v", name, value, k, v)
				}
			}
		}
		for _, v := range []float64{res.Report.LogLikelihood, res.Report.BIC, res.Report.AIC} {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				t.Fatalf("option %q=%q: report value %v", name, value, v)
			}
		}
	})
}
