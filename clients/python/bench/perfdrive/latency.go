package main

import (
	"context"
	"flag"
	"fmt"
	"slices"
	"sync"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"

	"github.com/mixd-dev/mixd/fitters/pbconv"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// latencyResult is the output of "perfdrive latency"; times in milliseconds.
type latencyResult struct {
	// Serial phase: one caller alternating Classify and health checks.
	SerialPairs          int     `json:"serial_pairs"`
	ClassifyMedianMS     float64 `json:"classify_median_ms"`
	HealthMedianMS       float64 `json:"health_median_ms"`
	ClassifyP99SerialMS  float64 `json:"classify_p99_serial_ms"`
	HealthP99SerialMS    float64 `json:"health_p99_serial_ms"`
	ConcurrentCallers    int     `json:"concurrent_callers"`
	ConcurrentCalls      int     `json:"concurrent_calls"`
	ConcurrentSeconds    float64 `json:"concurrent_seconds"`
	ConcurrentMedianMS   float64 `json:"concurrent_median_ms"`
	ConcurrentP99MS      float64 `json:"concurrent_p99_ms"`
	ConcurrentMaxMS      float64 `json:"concurrent_max_ms"`
	ConcurrentCallsPerS  float64 `json:"concurrent_calls_per_second"`
	ConcurrentErrorCount int     `json:"concurrent_errors"`
}

// runLatency is the load generator: single-row Classify calls against a
// running daemon over one connection, bounded in time. First one caller
// alternates Classify and a health check (the order swapped every pair);
// then callers goroutines call Classify back to back until the time is up.
func runLatency(args []string) (any, error) {
	fs := flag.NewFlagSet("latency", flag.ContinueOnError)
	addr := fs.String("address", "", "daemon address (127.0.0.1:PORT)")
	model := fs.String("model", "", "model id")
	data := fs.String("data", "", "data file; its first rows are sent one per call")
	cols := fs.Int("cols", 0, "columns")
	serial := fs.Duration("serial", 5*time.Second, "length of the serial phase")
	conc := fs.Duration("concurrent", 5*time.Second, "length of the concurrent phase")
	callers := fs.Int("callers", 32, "concurrent callers")
	maxCalls := fs.Int("max-calls", 2_000_000, "cap on the calls of each phase")
	if err := fs.Parse(args); err != nil {
		return nil, err
	}
	const nrows = 1024
	x, err := readRows(*data, nrows, *cols)
	if err != nil {
		return nil, err
	}
	reqs := make([]*mixdv1.ClassifyRequest, nrows)
	for i := range reqs {
		row := x[i**cols : (i+1)**cols]
		reqs[i] = &mixdv1.ClassifyRequest{Model: *model, Rows: &mixdv1.Matrix{Rows: 1, Cols: int64(*cols), LittleEndian: pbconv.EncodeFloat64s(row)}}
	}
	conn, err := grpc.NewClient(*addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		return nil, fmt.Errorf("connect: %w", err)
	}
	defer conn.Close()
	svc := mixdv1.NewMixtureServiceClient(conn)
	health := healthpb.NewHealthClient(conn)
	ctx := context.Background()
	classify := func(i int) (time.Duration, error) {
		t0 := time.Now()
		_, err := svc.Classify(ctx, reqs[i%nrows])
		return time.Since(t0), err
	}
	check := func() (time.Duration, error) {
		t0 := time.Now()
		_, err := health.Check(ctx, &healthpb.HealthCheckRequest{})
		return time.Since(t0), err
	}
	for i := 0; i < 500; i++ { // warm-up: connection, model cache, allocator
		if _, err := classify(i); err != nil {
			return nil, fmt.Errorf("classify: %w", err)
		}
		if _, err := check(); err != nil {
			return nil, fmt.Errorf("health check: %w", err)
		}
	}
	var out latencyResult
	var tc, th []float64
	// A phase of length 0 is skipped.
	deadline := time.Now().Add(*serial)
	for i := 0; time.Now().Before(deadline) && i < *maxCalls; i++ {
		var dc, dh time.Duration
		var errC, errH error
		if i%2 == 0 {
			dc, errC = classify(i)
			dh, errH = check()
		} else {
			dh, errH = check()
			dc, errC = classify(i)
		}
		if errC != nil || errH != nil {
			return nil, fmt.Errorf("serial phase: classify %v, health %v", errC, errH)
		}
		tc = append(tc, ms(dc))
		th = append(th, ms(dh))
	}
	out.SerialPairs = len(tc)
	slices.Sort(tc)
	slices.Sort(th)
	out.ClassifyMedianMS, out.HealthMedianMS = quantile(tc, 0.5), quantile(th, 0.5)
	out.ClassifyP99SerialMS, out.HealthP99SerialMS = quantile(tc, 0.99), quantile(th, 0.99)

	out.ConcurrentCallers = *callers
	if *conc <= 0 {
		return out, nil
	}
	per := make([][]float64, *callers)
	errs := make([]int, *callers)
	var wg sync.WaitGroup
	t0 := time.Now()
	end := t0.Add(*conc)
	capPer := max(1, *maxCalls / *callers)
	for g := 0; g < *callers; g++ {
		wg.Go(func() {
			for i := 0; i < capPer && time.Now().Before(end); i++ {
				d, err := classify(g*7919 + i)
				if err != nil {
					errs[g]++
					continue
				}
				per[g] = append(per[g], ms(d))
			}
		})
	}
	wg.Wait()
	out.ConcurrentSeconds = time.Since(t0).Seconds()
	var all []float64
	for g := range per {
		all = append(all, per[g]...)
		out.ConcurrentErrorCount += errs[g]
	}
	slices.Sort(all)
	out.ConcurrentCalls = len(all)
	out.ConcurrentMedianMS = quantile(all, 0.5)
	out.ConcurrentP99MS = quantile(all, 0.99)
	if len(all) > 0 {
		out.ConcurrentMaxMS = all[len(all)-1]
	}
	out.ConcurrentCallsPerS = float64(len(all)) / out.ConcurrentSeconds
	return out, nil
}

func ms(d time.Duration) float64 { return float64(d.Nanoseconds()) / 1e6 }
