package mixdclient_test

import (
	"context"
	"fmt"
	"log"
	"os"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	mixdclient "github.com/mixd-dev/mixd/clients/go"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// Readings from water pumping stations: flow (L/s), motor current (A) and
// vibration (mm/s RMS).
func ExampleFromRows() {
	m, err := mixdclient.FromRows([][]float64{
		{18.2, 21.9, 1.61},
		{42.5, 38.0, 2.30},
	})
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println(m.Rows, m.Cols, m.Row(1))
	// Output: 2 3 [42.5 38 2.3]
}

func ExampleEncodeFloat64s() {
	b := mixdclient.EncodeFloat64s([]float64{1, 0.5})
	fmt.Printf("% x\n", b)
	v, err := mixdclient.DecodeFloat64s(b)
	fmt.Println(v, err)
	// Output:
	// 00 00 00 00 00 00 f0 3f 00 00 00 00 00 00 e0 3f
	// [1 0.5] <nil>
}

// Fitting needs a running daemon, so this example is compiled but not run.
func ExampleClient_Fit() {
	c, err := mixdclient.Dial("127.0.0.1:7313")
	if err != nil {
		log.Fatal(err)
	}
	defer c.Close()
	data, err := mixdclient.FromRows([][]float64{
		{18.2, 21.9, 1.61}, {17.9, 22.4, 1.58}, {42.5, 38.0, 2.30},
		{41.0, 37.2, 2.41}, {65.3, 52.8, 3.05}, {66.1, 51.9, 3.12},
	})
	if err != nil {
		log.Fatal(err)
	}
	model, err := c.Fit(context.Background(), "pumps", data, mixdclient.FitOptions{
		Components:   2,
		Structure:    mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_DIAGONAL,
		Seed:         7,
		FeatureNames: []string{"flow_lps", "motor_current_a", "vibration_mm_s"},
	}, func(p *mixdv1.FitProgress) {
		fmt.Fprintf(os.Stderr, "iteration %d  log-likelihood %.4f\n", p.GetIteration(), p.GetObjective())
	})
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println(model.GetName(), model.GetVersion())
}

// Scoring needs a running daemon, so this example is compiled but not run.
func ExampleClient_Score() {
	c, err := mixdclient.Dial("unix:/run/mixd/mixd.sock")
	if err != nil {
		log.Fatal(err)
	}
	defer c.Close()
	rows, _ := mixdclient.FromRows([][]float64{{12.0, 31.0, 7.9}})
	res, err := c.Score(context.Background(), "pumps", rows, mixdclient.ScoreOptions{})
	switch status.Code(err) {
	case codes.OK:
	case codes.NotFound:
		log.Fatalf("no such model: %s", mixdclient.StatusOf(err).Message())
	default:
		log.Fatal(err)
	}
	// A low percentile says the reading is rare compared with the training
	// data; it is not a diagnosis.
	fmt.Printf("log-density %.3f, percentile %.2f\n", res.LogDensities[0], res.Percentiles[0])
}

// Starting a fit as a job lets the caller disconnect and come back later.
func ExampleClient_StartFit() {
	c, err := mixdclient.Dial("127.0.0.1:7313")
	if err != nil {
		log.Fatal(err)
	}
	defer c.Close()
	data, _ := mixdclient.FromRows([][]float64{{1}, {2}, {3}, {10}, {11}, {12}})
	job, err := c.StartFit(context.Background(), "example", data, mixdclient.FitOptions{MinComponents: 1, MaxComponents: 3})
	if err != nil {
		log.Fatal(err)
	}
	model, err := c.WatchJob(context.Background(), job.GetName(), nil, nil)
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println(len(model.GetParameters().GetComponents()), "components")
}

// Classify and Sample split large batches into chunks by themselves.
func ExampleClient_Classify() {
	c, err := mixdclient.Dial("127.0.0.1:7313")
	if err != nil {
		log.Fatal(err)
	}
	defer c.Close()
	drawn, err := c.Sample(context.Background(), "pumps", 100000, mixdclient.SampleOptions{Seed: 1})
	if err != nil {
		log.Fatal(err)
	}
	res, err := c.Classify(context.Background(), "pumps", drawn.Rows, mixdclient.ClassifyOptions{MinPosterior: 0.9})
	if err != nil {
		log.Fatal(err)
	}
	agree := 0
	for i, k := range res.Components {
		if k == drawn.Components[i] {
			agree++
		}
	}
	fmt.Printf("%d of %d rows classified to the component they were drawn from\n", agree, len(res.Components))
}
