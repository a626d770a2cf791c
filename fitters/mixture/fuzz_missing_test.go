package mixture

import (
	"math"
	"testing"
)

// FuzzMarginal evaluates arbitrary rows under arbitrary observation masks:
// no panic, non-finite values rejected, and for accepted input no NaN in any
// output, posteriors that sum to 1, log-density 0 for rows with nothing
// observed, and a conditional whose observed values are copied.
func FuzzMarginal(f *testing.F) {
	f.Add(uint8(0), []byte{0x05}, []byte{1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15, 16, 17, 18, 19, 20, 21, 22, 23, 24})
	f.Add(uint8(5), []byte{0x00, 0xff}, []byte{0, 0, 0, 0, 0, 0, 0xf0, 0x3f, 0, 0, 0, 0, 0, 0, 0xf8, 0x3f, 0, 0, 0, 0, 0, 0, 0, 0x40})
	f.Add(uint8(3), []byte{0x02}, []byte{0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xef, 0x7f, 0, 0, 0, 0, 0, 0, 0, 0x80, 1, 2, 3, 4, 5, 6, 7, 8})
	models := map[uint8]*Model{}
	i := uint8(0)
	for _, fam := range []Family{Gaussian, StudentT} {
		for _, st := range []Structure{Full, Diagonal, Spherical, Tied} {
			models[i] = randomModel(f, fam, st, 3, 3, uint64(i)+1)
			i++
		}
	}
	f.Fuzz(func(t *testing.T, which uint8, mask, b []byte) {
		m := models[which%uint8(len(models))]
		r := &byteReader{b: b}
		n := len(b) / 8 / 3 * 3
		x := make([]float64, n)
		finite := true
		for j := range x {
			x[j] = r.raw()
			finite = finite && !math.IsNaN(x[j]) && !math.IsInf(x[j], 0)
		}
		obs := make([]bool, n)
		for j := range obs {
			if len(mask) > 0 {
				obs[j] = mask[(j/8)%len(mask)]&(1<<(j%8)) != 0
			}
		}
		rows, k := n/3, m.K()
		out := MarginalOutput{LogDensity: make([]float64, rows), Posteriors: make([]float64, rows*k),
			Labels: make([]int, rows), OutlierStatistic: make([]float64, rows), OutlierLevel: 0.99}
		err := m.Marginal(x, obs, &out)
		if !finite {
			if err == nil {
				t.Fatal("non-finite input accepted")
			}
			return
		}
		if err != nil {
			t.Fatalf("finite input rejected: %v", err)
		}
		for i := 0; i < rows; i++ {
			sum, nobs := 0.0, 0
			for _, p := range out.Posteriors[i*k : (i+1)*k] {
				if math.IsNaN(p) || p < 0 || p > 1 {
					t.Fatalf("row %d: posterior %v", i, p)
				}
				sum += p
			}
			for _, o := range obs[i*3 : (i+1)*3] {
				if o {
					nobs++
				}
			}
			if math.Abs(sum-1) > 1e-12 || math.IsNaN(out.LogDensity[i]) || math.IsInf(out.LogDensity[i], 1) || math.IsNaN(out.OutlierStatistic[i]) {
				t.Fatalf("row %d: posteriors sum %v, log-density %v, statistic %v", i, sum, out.LogDensity[i], out.OutlierStatistic[i])
			}
			if nobs == 0 && out.LogDensity[i] != 0 {
				t.Fatalf("row %d: nothing observed, log-density %v", i, out.LogDensity[i])
			}
		}
		res, err := m.Conditional(x, obs, ConditionalOptions{Draws: 2, Seed: 1})
		if err != nil {
			return // moments may not exist (ν ≤ 1) or may overflow: an error, never NaN
		}
		for j, o := range obs {
			if math.IsNaN(res.Mean[j]) || (o && res.Mean[j] != x[j]) {
				t.Fatalf("value %d: conditional mean %v, input %v (observed %v)", j, res.Mean[j], x[j], o)
			}
		}
		for _, v := range res.Draws {
			if math.IsNaN(v) {
				t.Fatal("NaN draw")
			}
		}
	})
}
