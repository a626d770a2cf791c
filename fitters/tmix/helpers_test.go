package tmix

import (
	"encoding/json"
	"math"
	"os"
	"testing"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

// reference is testdata/tmix/reference.json, written by
// testdata/tmix/make_reference.py (the outlier-rule parts are read by the
// mixture package's tests).
type reference struct {
	Versions map[string]string `json:"versions"`
	TFit     struct {
		Data          []float64 `json:"data"`
		DF            float64   `json:"df"`
		Loc           float64   `json:"loc"`
		Scale         float64   `json:"scale"`
		LogLikelihood float64   `json:"log_likelihood"`
	} `json:"t_fit"`
}

func loadReference(t testing.TB) *reference {
	t.Helper()
	b, err := os.ReadFile("../../testdata/tmix/reference.json")
	if err != nil {
		t.Fatal(err)
	}
	var ref reference
	if err := json.Unmarshal(b, &ref); err != nil {
		t.Fatal(err)
	}
	if len(ref.TFit.Data) == 0 {
		t.Fatal("reference file has no t_fit data")
	}
	return &ref
}

// pumpModel is a known Student-t mixture in our pumping-station scenario:
// flow (m³/h), motor current (A) and vibration (mm/s), three operating
// regimes, for d ≤ 3 features (the first d).
func pumpModel(t testing.TB, d int, dfs []float64) *mixture.Model {
	t.Helper()
	means := [][]float64{{120, 14, 2.1}, {310, 31.5, 3.4}, {220, 24, 6.5}}
	covs := [][]float64{
		{400, 30, 2, 30, 4, 0.3, 2, 0.3, 0.25},
		{900, -45, 3, -45, 6.25, 0.2, 3, 0.2, 0.36},
		{625, 20, -1, 20, 9, 0.1, -1, 0.1, 1.0},
	}
	weights := []float64{0.3, 0.45, 0.25}
	p := mixture.Params{Dim: d, Family: mixture.StudentT, Structure: mixture.Full}
	for k := range weights {
		cov := make([]float64, d*d)
		for i := 0; i < d; i++ {
			for j := 0; j < d; j++ {
				cov[i*d+j] = covs[k][i*3+j]
			}
		}
		p.Components = append(p.Components, mixture.Component{
			Weight: weights[k], Mean: append([]float64(nil), means[k][:d]...), Cov: cov, DF: dfs[k],
		})
	}
	m, err := mixture.New(p)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// sample draws n rows from m with a fixed seed.
func sample(m *mixture.Model, n int, seed uint64) (fitters.Data, []int) {
	x := make([]float64, n*m.Dim())
	labels := make([]int, n)
	m.Sampler(seed).Next(x, labels)
	return fitters.Data{Rows: n, Cols: m.Dim(), Values: x}, labels
}

// maxAbsDiff is the largest absolute difference between two slices.
func maxAbsDiff(a, b []float64) float64 {
	var m float64
	for i := range a {
		m = math.Max(m, math.Abs(a[i]-b[i]))
	}
	return m
}
