package vb_test

import (
	"context"
	"fmt"
	"math/rand/v2"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/vb"
)

// A pumping station logs flow (m³/h) and motor current (A). It runs in two
// operating modes; fitted with room for six components, the variational
// fitter keeps two. (The low-demand mean is pulled slightly towards the
// prior mean, the overall data mean, by one row's worth: mean_strength 1.)
func Example() {
	rng := rand.New(rand.NewPCG(2024, 1))
	var rows []float64
	for i := 0; i < 400; i++ {
		if i%4 == 0 { // low-demand mode
			rows = append(rows, 120+8*rng.NormFloat64(), 18+1.2*rng.NormFloat64())
		} else { // normal mode
			rows = append(rows, 310+15*rng.NormFloat64(), 41+2*rng.NormFloat64())
		}
	}
	res, err := vb.New().Fit(context.Background(),
		fitters.Data{Rows: 400, Cols: 2, Values: rows},
		fitters.Settings{Components: 6, Seed: 7, Options: map[string]string{vb.OptConcentration: "0.001"}},
		nil)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println("effective components:", res.Report.EffectiveComponents)
	fmt.Println("served family:", res.Params.Family, "/", res.Report.Settings[vb.OptServedModel])
	for _, c := range res.Params.Components {
		if c.Weight > 0.01 {
			fmt.Printf("weight %.2f  flow %.0f  current %.0f\n", c.Weight, c.Mean[0], c.Mean[1])
		}
	}
	// Unordered output:
	// effective components: 2
	// served family: student_t / predictive
	// weight 0.25  flow 122  current 18
	// weight 0.75  flow 310  current 41
}
