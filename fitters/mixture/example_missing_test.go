package mixture_test

import (
	"context"
	"fmt"
	"log"

	"github.com/mixd-dev/mixd/fitters/mixture"
)

// A reading whose current sensor failed is scored on flow alone: the
// marginal mixture over the observed feature. The expected values were
// checked with scipy.stats.norm.logpdf on the marginals N(120, 25) and
// N(95, 36) and scipy.special.logsumexp (scipy 1.17.1): log-density
// -2.8314; posteriors 0.999855, 0.000145 (rounded).
func ExampleModel_Marginal() {
	m := stationModel()
	x := []float64{118, 0} // current unobserved: its value is ignored
	observed := []bool{true, false}
	out := mixture.MarginalOutput{
		LogDensity: make([]float64, 1),
		Posteriors: make([]float64, m.K()),
	}
	if err := m.Marginal(x, observed, &out); err != nil {
		log.Fatal(err)
	}
	fmt.Printf("log-density %.4f, posteriors %.6f %.6f\n", out.LogDensity[0], out.Posteriors[0], out.Posteriors[1])
	// Output:
	// log-density -2.8314, posteriors 0.999855 0.000145
}

// Predicting the motor current from the flow: the conditional mixture's
// mean and standard deviation, and three seeded imputations. For the
// dominant component the textbook Gaussian conditional gives
// 31 + (6/25)(118 − 120) = 30.52 with variance 4 − 36/25 = 2.56 (Bishop
// 2006, section 2.3.1).
func ExampleModel_Conditional() {
	m := stationModel()
	res, err := m.Conditional([]float64{118, 0}, []bool{true, false},
		mixture.ConditionalOptions{StdDev: true, Draws: 3, Seed: 1})
	if err != nil {
		log.Fatal(err)
	}
	fmt.Printf("current %.2f ± %.2f\n", res.Mean[1], res.StdDev[1])
	for a := 0; a < 3; a++ {
		fmt.Printf("draw %d: flow %.0f current %.2f\n", a, res.Draws[2*a], res.Draws[2*a+1])
	}
	// Output:
	// current 30.52 ± 1.60
	// draw 0: flow 118 current 31.14
	// draw 1: flow 118 current 30.00
	// draw 2: flow 118 current 30.11
}

// Comparing a newly fitted model with the one in service: the KL
// divergence with its standard error, and which component moved. The
// distance of the moved component is the Bhattacharyya distance of a pure
// mean shift, ⅛ ΔᵀΣ⁻¹Δ = ⅛ · 6² · 3/92 ≈ 0.1467 (checked with numpy).
func ExampleCompare() {
	old := stationModel()
	p := old.Params()
	p.Components[1].Mean = []float64{101, 27} // reduced-speed flow drifted up
	fresh, err := mixture.New(p)
	if err != nil {
		log.Fatal(err)
	}
	res, err := mixture.Compare(context.Background(), old, fresh, mixture.CompareOptions{Samples: 20000, Seed: 1})
	if err != nil {
		log.Fatal(err)
	}
	fmt.Printf("KL(old‖new) %.3f ± %.3f\n", res.Forward, res.ForwardSE)
	for _, mt := range res.Matches {
		fmt.Printf("component %d ↔ %d: distance %.4f\n", mt.P, mt.Q, mt.Distance)
	}
	// Output:
	// KL(old‖new) 0.108 ± 0.004
	// component 0 ↔ 0: distance 0.0000
	// component 1 ↔ 1: distance 0.1467
}
