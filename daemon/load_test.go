package daemon

import (
	"context"
	"fmt"
	"log/slog"
	"os"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"go.uber.org/goleak"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/status"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/builtin"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// This test binary doubles as the built-in fitters' plugin process for the
// load test: the fitter host runs it as "<test binary> fitter NAME". (An
// init function rather than TestMain, so no other file's TestMain clashes.)
func init() {
	if len(os.Args) == 3 && os.Args[1] == "fitter" && os.Getenv(fitters.ParentPIDEnv) != "" {
		if f, ok := builtin.New(os.Args[2]); ok {
			fitters.Serve(f)
			os.Exit(0)
		}
		fmt.Fprintf(os.Stderr, "unknown built-in fitter %q\n", os.Args[2])
		os.Exit(2)
	}
}

// loadDuration is how long a load run lasts: MIXD_LOAD_SECONDS when set,
// def otherwise.
func loadDuration(t *testing.T, def time.Duration) time.Duration {
	if s := os.Getenv("MIXD_LOAD_SECONDS"); s != "" {
		n, err := strconv.Atoi(s)
		if err != nil || n <= 0 {
			t.Fatalf("MIXD_LOAD_SECONDS=%q: want a positive whole number of seconds", s)
		}
		return time.Duration(n) * time.Second
	}
	return def
}

// TestLoad runs the load test (see runLoad) for 10 s, under the race
// detector in CI. With MIXD_LARGE=1 it is skipped: TestLargeLoad runs the
// 30-second version instead.
func TestLoad(t *testing.T) {
	if testing.Short() {
		t.Skip("load test")
	}
	if os.Getenv("MIXD_LARGE") == "1" {
		t.Skip("MIXD_LARGE=1: TestLargeLoad runs the load for 30 s")
	}
	runLoad(t, loadDuration(t, 10*time.Second))
}

// TestLargeLoad runs the load test (see runLoad) for 30 s. It needs
// MIXD_LARGE=1 (CI's large-data step, without the race detector).
func TestLargeLoad(t *testing.T) {
	if os.Getenv("MIXD_LARGE") != "1" {
		t.Skip("set MIXD_LARGE=1 to run the 30-second load test")
	}
	if testing.Short() {
		t.Skip("load test")
	}
	runLoad(t, loadDuration(t, 30*time.Second))
}

// runLoad runs the daemon in this process (real directory store, real
// fitter plugin processes, TCP on 127.0.0.1) and has 64 concurrent
// clients score, classify and sample for dur while a few of them also run
// small fits. Only documented refusals may fail (a full fit queue);
// afterwards no goroutine is left behind and the heap is back near where
// it started. It logs the request rate and latency percentiles (go test
// -v).
func runLoad(t *testing.T, dur time.Duration) {
	const clients = 64
	// Cleanups run last-registered first: this one runs after the daemon
	// has stopped (runWith's cleanup).
	ignore := goleak.IgnoreCurrent()
	t.Cleanup(func() { goleak.VerifyNone(t, ignore) })
	exe, err := os.Executable()
	if err != nil {
		t.Fatal(err)
	}
	lines, _ := runWith(t, Config{
		DataDir: t.TempDir(), Executable: exe, BuiltIn: []string{"em"},
		MaxConcurrentFits: 2, Logger: slog.New(slog.DiscardHandler),
	})
	conns := make([]*grpc.ClientConn, 16)
	for i := range conns {
		c, err := grpc.NewClient("passthrough:///"+lines[ListeningPrefix], grpc.WithTransportCredentials(insecure.NewCredentials()))
		if err != nil {
			t.Fatal(err)
		}
		conns[i] = c
	}
	defer func() {
		for _, c := range conns {
			c.Close()
		}
	}()
	ctx := context.Background()
	c0 := mixdv1.NewMixtureServiceClient(conns[0])
	fl, err := c0.ListFitters(ctx, &mixdv1.ListFittersRequest{})
	if err != nil || len(fl.GetFitters()) != 1 || fl.GetFitters()[0].GetSource() != "built-in" {
		t.Fatalf("fitters %v, %v: the load test needs the real built-in em", fl, err)
	}
	train := pumpRows(2000, 3)
	if _, err := fitEvents(ctx, c0, &mixdv1.FitRequest{Spec: spec("pumps", 2), Chunk: chunk(train, true)}); err != nil {
		t.Fatal(err)
	}
	batch := encodeMatrix(100, 2, pumpRows(100, 4), true)
	small := pumpRows(300, 5)

	heap := func() uint64 {
		runtime.GC()
		runtime.GC()
		var ms runtime.MemStats
		runtime.ReadMemStats(&ms)
		return ms.HeapAlloc
	}
	// Warm up every path once, then take the baseline.
	if _, err := c0.Score(ctx, &mixdv1.ScoreRequest{Model: "pumps", Rows: batch}); err != nil {
		t.Fatal(err)
	}
	baseline := heap()

	type sample struct {
		op string
		d  time.Duration
	}
	var (
		mu        sync.Mutex
		latencies = map[string][]time.Duration{}
		refused   atomic.Int64
		failures  []string
	)
	record := func(s []sample) {
		mu.Lock()
		defer mu.Unlock()
		for _, x := range s {
			latencies[x.op] = append(latencies[x.op], x.d)
		}
	}
	fail := func(op string, err error) {
		mu.Lock()
		defer mu.Unlock()
		if len(failures) < 20 {
			failures = append(failures, fmt.Sprintf("%s: %v", op, err))
		}
	}
	stop := time.Now().Add(dur)
	var wg sync.WaitGroup
	for i := range clients {
		wg.Add(1)
		go func() {
			defer wg.Done()
			c := mixdv1.NewMixtureServiceClient(conns[i%len(conns)])
			var mine []sample
			defer func() { record(mine) }()
			for n := 0; time.Now().Before(stop); n++ {
				op := "score"
				switch {
				case i%16 == 0 && n%4 == 3:
					op = "fit"
				case n%4 == 1:
					op = "classify"
				case n%4 == 2:
					op = "sample"
				}
				cctx, cancel := context.WithTimeout(ctx, time.Minute)
				start := time.Now()
				var err error
				switch op {
				case "score":
					_, err = c.Score(cctx, &mixdv1.ScoreRequest{Model: "pumps", Rows: batch})
				case "classify":
					_, err = c.Classify(cctx, &mixdv1.ClassifyRequest{Model: "pumps", Rows: batch, IncludePosteriors: true})
				case "sample":
					_, err = c.Sample(cctx, &mixdv1.SampleRequest{Model: "pumps", Count: 100, Seed: uint64(n)})
				case "fit":
					sp := spec(fmt.Sprintf("load-%d", i), 2)
					sp.MaxIterations = 20
					_, err = fitEvents(cctx, c, &mixdv1.FitRequest{Spec: sp, Chunk: chunk(small, false)})
				}
				d := time.Since(start)
				cancel()
				switch {
				case err == nil:
					mine = append(mine, sample{op, d})
				case op == "fit" && status.Code(err) == codes.ResourceExhausted && strings.Contains(err.Error(), "fit queue is full"):
					refused.Add(1) // a documented limit (--max-active-jobs)
				default:
					fail(op, err)
				}
			}
		}()
	}
	wg.Wait()
	if len(failures) > 0 {
		t.Fatalf("errors beyond the documented limits:\n%s", strings.Join(failures, "\n"))
	}
	total := 0
	for _, op := range []string{"score", "classify", "sample", "fit"} {
		ds := latencies[op]
		total += len(ds)
		if len(ds) == 0 {
			t.Fatalf("no successful %s call in %v", op, dur)
		}
		slices.Sort(ds)
		pct := func(p float64) time.Duration { return ds[min(len(ds)-1, int(p*float64(len(ds))))] }
		t.Logf("%-8s %6d calls  p50 %-10v p90 %-10v p99 %-10v max %v", op, len(ds), pct(0.5), pct(0.9), pct(0.99), ds[len(ds)-1])
	}
	t.Logf("%d clients, %v: %d calls, %.0f calls/s; %d fits refused with a full queue (documented)",
		clients, dur, total, float64(total)/dur.Seconds(), refused.Load())

	// Memory: back near the baseline once the load is over (the cache and
	// job history hold a few small models).
	var after uint64
	for range 20 {
		if after = heap(); after <= baseline+baseline/2+32<<20 {
			break
		}
		time.Sleep(100 * time.Millisecond)
	}
	t.Logf("heap: %.1f MiB before the load, %.1f MiB after", float64(baseline)/(1<<20), float64(after)/(1<<20))
	if after > baseline+baseline/2+32<<20 {
		t.Errorf("heap %d bytes after the load, baseline %d", after, baseline)
	}
}
