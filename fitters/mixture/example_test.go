package mixture_test

import (
	"fmt"
	"log"

	"github.com/mixd-dev/mixd/fitters/mixture"
)

// stationModel is a two-regime pumping-station model over flow (m³/h) and
// motor current (A): full-speed running and reduced-speed running.
func stationModel() *mixture.Model {
	m, err := mixture.New(mixture.Params{
		Dim:       2,
		Features:  []string{"flow", "current"},
		Family:    mixture.Gaussian,
		Structure: mixture.Full,
		Components: []mixture.Component{
			{Weight: 0.8, Mean: []float64{120, 31}, Cov: []float64{25, 6, 6, 4}},
			{Weight: 0.2, Mean: []float64{95, 27}, Cov: []float64{36, 4, 4, 3}},
		},
	})
	if err != nil {
		log.Fatal(err)
	}
	return m
}

// The expected values were checked with scipy.stats.multivariate_normal and
// scipy.special.logsumexp (scipy 1.17.1): log-densities -4.220418, -5.741005;
// posteriors of (105, 28): 0.166414, 0.833586.
func ExampleNew() {
	m := stationModel()
	x := []float64{
		118, 30.5, // a typical full-speed point
		96, 26.8, // a typical reduced-speed point
	}
	ld := make([]float64, 2)
	if err := m.LogDensity(x, ld); err != nil {
		log.Fatal(err)
	}
	fmt.Printf("K=%d D=%d free parameters=%d\n", m.K(), m.Dim(), m.FreeParameters())
	fmt.Printf("log-densities: %.4f %.4f\n", ld[0], ld[1])

	// Invalid parameters are rejected with the component and field named.
	_, err := mixture.New(mixture.Params{Dim: 1, Family: mixture.Gaussian, Structure: mixture.Full,
		Components: []mixture.Component{{Weight: 1, Mean: []float64{0}, Cov: []float64{-1}}}})
	fmt.Println(err)
	// Output:
	// K=2 D=2 free parameters=11
	// log-densities: -4.2204 -5.7410
	// mixture: invalid parameters: component 0: covariance is not positive definite: diagonal cov[0][0] = -1 is not positive
}

func ExampleModel_Posteriors() {
	m := stationModel()
	x := []float64{
		118, 30.5,
		105, 28, // between the two regimes
	}
	post := make([]float64, 2*m.K())
	if err := m.Posteriors(x, nil, post, nil); err != nil {
		log.Fatal(err)
	}
	labels := make([]int, 2)
	if err := m.Assign(x, labels, nil); err != nil {
		log.Fatal(err)
	}
	for i := 0; i < 2; i++ {
		fmt.Printf("row %d: posteriors %.4f %.4f -> component %d\n", i, post[2*i], post[2*i+1], labels[i])
	}
	// Output:
	// row 0: posteriors 0.9999 0.0001 -> component 0
	// row 1: posteriors 0.1664 0.8336 -> component 1
}

func ExampleModel_Sample() {
	m := stationModel()
	x, labels := m.Sample(4, 2)
	for i, l := range labels {
		fmt.Printf("component %d: flow %.2f current %.2f\n", l, x[2*i], x[2*i+1])
	}
	// The same seed always gives the same rows, in one call or several.
	s := m.Sampler(2)
	y, l2 := make([]float64, 2), make([]int, 1)
	s.Next(y, l2)
	fmt.Println(y[0] == x[0] && y[1] == x[1] && l2[0] == labels[0])
	// Output:
	// component 1: flow 93.67 current 28.61
	// component 1: flow 89.79 current 27.52
	// component 0: flow 119.11 current 31.68
	// component 0: flow 119.70 current 32.12
	// true
}
