package main

import (
	"context"
	"flag"
	"fmt"
	"strconv"
	"strings"
	"time"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/em"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

// emResult is the output of "perfdrive em".
type emResult struct {
	// Seconds[i] is the wall time of a whole fit of Iterations[i] iterations.
	Iterations []int     `json:"iterations"`
	Seconds    []float64 `json:"seconds"`
	// Final parameters of the last fit (for the Python side's sanity check).
	Weights []float64   `json:"weights"`
	Means   [][]float64 `json:"means"`
	Covs    [][]float64 `json:"covariances"`
}

// runEM times EM fits from a fixed start, one per iteration count asked,
// after one untimed warm-up fit.
func runEM(args []string) (any, error) {
	fs := flag.NewFlagSet("em", flag.ContinueOnError)
	data := fs.String("data", "", "data file (little-endian float64, row-major)")
	rows := fs.Int("rows", 0, "rows to use from the data file")
	cols := fs.Int("cols", 0, "columns")
	start := fs.String("start", "", "model document with the starting parameters")
	iters := fs.String("iters", "2,10", "comma-separated iteration counts")
	ridge := fs.Float64("ridge", 1e-6, "ridge added to covariance diagonals")
	if err := fs.Parse(args); err != nil {
		return nil, err
	}
	x, err := readRows(*data, *rows, *cols)
	if err != nil {
		return nil, err
	}
	p, err := readParams(*start)
	if err != nil {
		return nil, err
	}
	var counts []int
	for _, s := range strings.Split(*iters, ",") {
		n, err := strconv.Atoi(strings.TrimSpace(s))
		if err != nil || n < 1 {
			return nil, fmt.Errorf("-iters: %q is not a positive iteration count", s)
		}
		counts = append(counts, n)
	}
	d := fitters.Data{Rows: *rows, Cols: *cols, Values: x}
	fit := func(n int) (*fitters.Result, float64, error) {
		s := fitters.Settings{
			Components: len(p.Components), Family: mixture.Gaussian, Structure: mixture.Full,
			Start: &p, MaxIterations: n, Tolerance: 1e-300, Restarts: 1, Ridge: *ridge, Seed: 1,
		}
		t0 := time.Now()
		res, err := em.New().Fit(context.Background(), d, s, nil)
		sec := time.Since(t0).Seconds()
		if err != nil {
			return nil, 0, fmt.Errorf("fit of %d iterations: %w", n, err)
		}
		if res.Report.Iterations != n {
			return nil, 0, fmt.Errorf("fit stopped after %d iterations, not %d", res.Report.Iterations, n)
		}
		return res, sec, nil
	}
	if _, _, err := fit(1); err != nil { // warm-up
		return nil, err
	}
	out := emResult{Iterations: counts}
	var last *fitters.Result
	for _, n := range counts {
		res, sec, err := fit(n)
		if err != nil {
			return nil, err
		}
		out.Seconds = append(out.Seconds, sec)
		last = res
	}
	for _, c := range last.Params.Components {
		out.Weights = append(out.Weights, c.Weight)
		out.Means = append(out.Means, c.Mean)
		out.Covs = append(out.Covs, c.Cov)
	}
	return out, nil
}

// evalResult is the output of "perfdrive eval": median seconds per call.
type evalResult struct {
	LogDensitySeconds float64 `json:"log_density_seconds"`
	PosteriorSeconds  float64 `json:"posterior_seconds"`
	// Head holds the first log-densities, for the Python side's check.
	Head []float64 `json:"head"`
	// HeadPosteriors holds the posteriors of the first rows, row-major.
	HeadPosteriors []float64 `json:"head_posteriors"`
}

// runEval times Model.LogDensity and Model.Posteriors (probabilities only)
// over all rows, repeats times each, after one untimed call of each.
func runEval(args []string) (any, error) {
	fs := flag.NewFlagSet("eval", flag.ContinueOnError)
	data := fs.String("data", "", "data file")
	rows := fs.Int("rows", 0, "rows")
	cols := fs.Int("cols", 0, "columns")
	model := fs.String("model", "", "model document")
	repeats := fs.Int("repeats", 5, "timed calls of each")
	if err := fs.Parse(args); err != nil {
		return nil, err
	}
	x, err := readRows(*data, *rows, *cols)
	if err != nil {
		return nil, err
	}
	p, err := readParams(*model)
	if err != nil {
		return nil, err
	}
	m, err := mixture.New(p)
	if err != nil {
		return nil, err
	}
	ld := make([]float64, *rows)
	post := make([]float64, *rows*m.K())
	var tl, tp []float64
	for r := 0; r <= *repeats; r++ {
		t0 := time.Now()
		if err := m.LogDensity(x, ld); err != nil {
			return nil, err
		}
		t1 := time.Now()
		if err := m.Posteriors(x, nil, post, nil); err != nil {
			return nil, err
		}
		t2 := time.Now()
		if r > 0 {
			tl = append(tl, t1.Sub(t0).Seconds())
			tp = append(tp, t2.Sub(t1).Seconds())
		}
	}
	h := min(*rows, 1000)
	return evalResult{LogDensitySeconds: median(tl), PosteriorSeconds: median(tp), Head: ld[:h], HeadPosteriors: post[:h*m.K()]}, nil
}
