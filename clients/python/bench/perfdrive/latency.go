package main

import (
	"context"
	"flag"
	"fmt"
	"slices"
	"strconv"
	"strings"
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
	// The same closed loop with health checks instead of Classify: the
	// transport's own floor on this machine (when -health-concurrent > 0).
	HealthConcurrent *phaseResult `json:"health_concurrent,omitempty"`
	// Paced phases (-rates): the callers together offer a fixed rate of
	// Classify calls, then of health checks.
	Paced []pacedResult `json:"paced,omitempty"`
}

// pacedResult is one offered rate: Classify calls and health checks at
// that rate, one after the other.
type pacedResult struct {
	OfferedPerSecond float64     `json:"offered_per_second"`
	Classify         phaseResult `json:"classify"`
	Health           phaseResult `json:"health"`
}

// phaseResult summarises one concurrent phase; times in milliseconds.
type phaseResult struct {
	Calls          int     `json:"calls"`
	Seconds        float64 `json:"seconds"`
	CallsPerSecond float64 `json:"calls_per_second"`
	MedianMS       float64 `json:"median_ms"`
	P99MS          float64 `json:"p99_ms"`
	MaxMS          float64 `json:"max_ms"`
	Errors         int     `json:"errors"`
	// Paced phases only: the 99th percentile of how late the generator
	// sent a call after it was due (its own timers and scheduling, which
	// the latencies above include).
	SendLateP99MS float64 `json:"send_late_p99_ms,omitempty"`
}

// runLatency is the load generator: single-row Classify calls against a
// running daemon over one connection, bounded in time. First one caller
// alternates Classify and a health check (the order swapped every pair);
// then callers goroutines call Classify back to back until the time is up
// (a closed loop: the machine's throughput sets the latency, by Little's
// law); then, when asked, the same closed loop with health checks; then,
// for each rate of -rates, the callers send Classify calls on a fixed
// schedule that together offers that many calls per second (an open
// loop). A paced call's latency runs from the moment it was due, not from
// when it was sent, so a caller that falls behind counts its whole wait
// (no coordinated omission).
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
	healthConc := fs.Duration("health-concurrent", 0, "length of the closed-loop phase with health checks (0: none)")
	rates := fs.String("rates", "", "comma-separated total calls per second for paced phases, e.g. 2000,4000")
	paced := fs.Duration("paced", 5*time.Second, "length of each paced phase")
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
	capPer := max(1, *maxCalls / *callers)
	if *conc > 0 {
		r := closedLoop(*callers, capPer, *conc, func(g, i int) error {
			_, err := classify(g*7919 + i)
			return err
		})
		out.ConcurrentCalls, out.ConcurrentSeconds, out.ConcurrentCallsPerS = r.Calls, r.Seconds, r.CallsPerSecond
		out.ConcurrentMedianMS, out.ConcurrentP99MS, out.ConcurrentMaxMS = r.MedianMS, r.P99MS, r.MaxMS
		out.ConcurrentErrorCount = r.Errors
	}
	if *healthConc > 0 {
		r := closedLoop(*callers, capPer, *healthConc, func(int, int) error {
			_, err := check()
			return err
		})
		out.HealthConcurrent = &r
	}
	for _, f := range strings.Split(*rates, ",") {
		if f = strings.TrimSpace(f); f == "" {
			continue
		}
		rate, err := strconv.ParseFloat(f, 64)
		if err != nil || !(rate > 0) {
			return nil, fmt.Errorf("-rates: %q is not a positive number of calls per second", f)
		}
		out.Paced = append(out.Paced, pacedResult{
			OfferedPerSecond: rate,
			Classify: pacedLoop(*callers, rate, *paced, func(g, i int) error {
				_, err := svc.Classify(ctx, reqs[(g*7919+i)%nrows])
				return err
			}),
			Health: pacedLoop(*callers, rate, *paced, func(int, int) error {
				_, err := health.Check(ctx, &healthpb.HealthCheckRequest{})
				return err
			}),
		})
	}
	return out, nil
}

// closedLoop runs call from callers goroutines back to back for d (at most
// capPer calls each) and summarises the latencies.
func closedLoop(callers, capPer int, d time.Duration, call func(g, i int) error) phaseResult {
	per := make([][]float64, callers)
	errs := make([]int, callers)
	var wg sync.WaitGroup
	t0 := time.Now()
	end := t0.Add(d)
	for g := 0; g < callers; g++ {
		wg.Go(func() {
			for i := 0; i < capPer && time.Now().Before(end); i++ {
				s := time.Now()
				if err := call(g, i); err != nil {
					errs[g]++
					continue
				}
				per[g] = append(per[g], ms(time.Since(s)))
			}
		})
	}
	wg.Wait()
	return summarise(per, errs, time.Since(t0))
}

// pacedLoop runs call from callers goroutines for d, caller g's i-th call
// due at start + phase_g + i·callers/rate, so that together they offer rate
// calls per second; phases are spread evenly over one interval. A call's
// latency is measured from its due time: when a caller is late, the wait
// counts.
func pacedLoop(callers int, rate float64, d time.Duration, call func(g, i int) error) phaseResult {
	per := make([][]float64, callers)
	late := make([][]float64, callers)
	errs := make([]int, callers)
	interval := time.Duration(float64(time.Second) * float64(callers) / rate)
	var wg sync.WaitGroup
	t0 := time.Now().Add(10 * time.Millisecond)
	for g := 0; g < callers; g++ {
		wg.Go(func() {
			first := t0.Add(time.Duration(g) * interval / time.Duration(callers))
			for i := 0; ; i++ {
				due := first.Add(time.Duration(i) * interval)
				if due.Sub(t0) >= d {
					return
				}
				if w := time.Until(due); w > 0 {
					time.Sleep(w)
				}
				late[g] = append(late[g], ms(time.Since(due)))
				if err := call(g, i); err != nil {
					errs[g]++
					continue
				}
				per[g] = append(per[g], ms(time.Since(due)))
			}
		})
	}
	wg.Wait()
	r := summarise(per, errs, time.Since(t0))
	var all []float64
	for _, l := range late {
		all = append(all, l...)
	}
	slices.Sort(all)
	r.SendLateP99MS = quantile(all, 0.99)
	return r
}

func summarise(per [][]float64, errs []int, took time.Duration) phaseResult {
	var all []float64
	r := phaseResult{Seconds: took.Seconds()}
	for g := range per {
		all = append(all, per[g]...)
		r.Errors += errs[g]
	}
	slices.Sort(all)
	r.Calls = len(all)
	r.MedianMS, r.P99MS = quantile(all, 0.5), quantile(all, 0.99)
	if len(all) > 0 {
		r.MaxMS = all[len(all)-1]
	}
	r.CallsPerSecond = float64(len(all)) / r.Seconds
	return r
}

func ms(d time.Duration) float64 { return float64(d.Nanoseconds()) / 1e6 }
