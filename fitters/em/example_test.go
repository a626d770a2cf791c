package em_test

import (
	"context"
	"fmt"
	"math/rand/v2"
	"sort"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/em"
)

// Readings from one water pumping station, flow (m³/h) and motor current
// (A), simulated with a seeded generator: most of the time the pump runs at
// normal duty, sometimes at light load at night, and now and then against a
// partly closed valve (low flow, high current). EM chooses the number of
// operating regimes by BIC and estimates each one; the estimates land close
// to the simulated shares 0.6/0.3/0.1 and centres (120, 31), (45, 14), (60, 38).
func ExampleFitter_Fit() {
	rng := rand.New(rand.NewPCG(2024, 7))
	regimes := []struct {
		share, flow, current, sdFlow, sdCurrent float64
	}{
		{0.60, 120, 31, 8, 1.5}, // normal duty
		{0.30, 45, 14, 5, 1.0},  // light load
		{0.10, 60, 38, 6, 1.5},  // throttled: low flow, high current
	}
	const rows = 3000
	values := make([]float64, 0, 2*rows)
	for i := 0; i < rows; i++ {
		u, r := rng.Float64(), 0
		for u > regimes[r].share {
			u -= regimes[r].share
			r++
		}
		g := regimes[r]
		values = append(values,
			g.flow+g.sdFlow*rng.NormFloat64(),
			g.current+g.sdCurrent*rng.NormFloat64())
	}

	res, err := em.New().Fit(context.Background(),
		fitters.Data{Rows: rows, Cols: 2, Values: values},
		fitters.Settings{MinComponents: 1, MaxComponents: 4, Seed: 1, Ridge: -1, Restarts: 2},
		nil)
	if err != nil {
		fmt.Println(err)
		return
	}
	comps := res.Params.Components
	sort.Slice(comps, func(a, b int) bool { return comps[a].Weight > comps[b].Weight })
	fmt.Println("regimes:", len(comps))
	for _, c := range comps {
		fmt.Printf("weight %.2f  flow %5.1f m³/h  current %4.1f A\n", c.Weight, c.Mean[0], c.Mean[1])
	}
	// Output:
	// regimes: 3
	// weight 0.59  flow 120.0 m³/h  current 30.9 A
	// weight 0.31  flow  45.3 m³/h  current 14.0 A
	// weight 0.10  flow  60.4 m³/h  current 38.0 A
}
