package em

import (
	"context"
	"encoding/binary"
	"math"
	"testing"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

// FuzzFit decodes random shapes, values, weights and settings and checks
// that Fit never panics, never reports an internal error, and never returns
// a non-finite number or parameters the model rejects.
func FuzzFit(f *testing.F) {
	f.Add(uint8(20), uint8(2), uint8(2), uint8(1), uint8(0), uint64(1), []byte("pump station flow current vibration readings"))
	f.Add(uint8(5), uint8(1), uint8(3), uint8(3), uint8(1), uint64(2), []byte{1, 1, 1, 2, 2, 2, 3, 3})
	f.Add(uint8(9), uint8(3), uint8(2), uint8(4), uint8(2), uint64(3), []byte{0, 255, 128, 7, 7, 7, 7, 200, 13, 99})
	f.Add(uint8(12), uint8(2), uint8(4), uint8(2), uint8(7), uint64(4), []byte{0xff, 0xf0, 0, 0, 0, 0, 0, 0, 1, 2, 3})
	f.Fuzz(func(t *testing.T, rows, cols, k, structure, mode uint8, seed uint64, raw []byte) {
		n := int(rows % 48)
		d := 1 + int(cols%4)
		data := fitters.Data{Rows: n, Cols: d, Values: make([]float64, n*d)}
		for i := range data.Values {
			if len(raw) == 0 {
				break
			}
			if mode&1 == 1 && len(raw) >= 8 {
				// Raw bit patterns: NaN, Inf, huge and tiny values.
				data.Values[i] = math.Float64frombits(binary.LittleEndian.Uint64(raw[(i*8)%(len(raw)-7):]))
			} else {
				// Small integers with repeats: duplicates and constant columns.
				data.Values[i] = float64(int8(raw[i%len(raw)])) / 4
			}
		}
		if mode&2 == 2 {
			data.Weights = make([]float64, n)
			for i := range data.Weights {
				if len(raw) > 0 {
					data.Weights[i] = float64(raw[(i*3)%len(raw)]%5) / 2
				}
			}
		}
		s := fitters.Settings{
			Components:    int(k % 5),
			Structure:     mixture.Structure(structure % 5),
			Seed:          seed,
			MaxIterations: 1 + int(seed%30),
			Restarts:      1 + int(mode>>6),
		}
		switch (mode >> 2) & 3 {
		case 0:
			s.Ridge = -1
		case 1:
			s.Ridge = 0
		case 2:
			s.Ridge = 1e-3
		case 3:
			s.MaxComponents = 1 + int(k%4)
		}
		if mode&16 == 16 {
			s.MaxIterations = NoIterations
		}
		res, err := New().Fit(context.Background(), data, s, nil)
		if err != nil {
			if fitters.CodeOf(err) == fitters.Internal {
				t.Fatalf("internal error: %v", err)
			}
			return
		}
		r := res.Report
		for _, v := range append([]float64{r.LogLikelihood, r.BIC, r.AIC}, r.History...) {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				t.Fatalf("non-finite report value: %+v", r)
			}
		}
		m := checkParams(t, res.Params)
		ll, err := m.LogLikelihood(data.Values, data.Weights)
		if err != nil || ll != r.LogLikelihood {
			t.Fatalf("model log-likelihood %v (%v), report %v", ll, err, r.LogLikelihood)
		}
	})
}
