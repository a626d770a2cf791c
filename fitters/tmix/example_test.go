package tmix_test

import (
	"context"
	"fmt"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/mixture"
	"github.com/mixd-dev/mixd/fitters/tmix"
)

// ExampleFitter_Fit fits a two-regime model of pumping-station records
// (flow in m³/h, motor current in A) that contain three gross recording
// errors (an extra digit typed in a flow, a current and a flow), and
// shows the rows the outlier rule flags: the three errors and no other row.
func ExampleFitter_Fit() {
	truth, err := mixture.New(mixture.Params{
		Dim: 2, Family: mixture.StudentT, Structure: mixture.Full,
		Components: []mixture.Component{
			{Weight: 0.4, Mean: []float64{120, 14}, Cov: []float64{400, 30, 30, 4}, DF: 6},
			{Weight: 0.6, Mean: []float64{310, 31.5}, Cov: []float64{900, -45, -45, 6.25}, DF: 6},
		},
	})
	if err != nil {
		fmt.Println(err)
		return
	}
	const n = 1000
	x := make([]float64, 2*n, 2*n+6)
	truth.Sampler(1).Next(x, make([]int, n))
	x = append(x, 3100, 31, 120, 140, 1200, 14) // extra digits in flow, current, flow
	data := fitters.Data{Rows: n + 3, Cols: 2, Values: x}

	res, err := tmix.New().Fit(context.Background(), data, fitters.Settings{Components: 2, Seed: 1}, nil)
	if err != nil {
		fmt.Println(err)
		return
	}
	m, err := mixture.New(res.Params)
	if err != nil {
		fmt.Println(err)
		return
	}
	flags := make([]bool, data.Rows)
	if err := m.Outliers(data.Values, res.Report.OutlierLevel, nil, flags); err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println("gross errors flagged:", flags[n], flags[n+1], flags[n+2])
	fmt.Println("all rows flagged:", res.Report.FlaggedRows)
	for _, c := range res.Params.Components {
		fmt.Printf("mean flow %.0f, current %.0f\n", c.Mean[0], c.Mean[1])
	}
	// Output:
	// gross errors flagged: true true true
	// all rows flagged: 3
	// mean flow 121, current 14
	// mean flow 311, current 31
}
