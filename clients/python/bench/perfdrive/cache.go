package main

import (
	"context"
	"flag"
	"fmt"
	"log/slog"
	"os"
	"runtime"
	"runtime/pprof"

	"github.com/mixd-dev/mixd/daemon"
	"github.com/mixd-dev/mixd/daemon/fitterhost"
	"github.com/mixd-dev/mixd/daemon/store"
	"github.com/mixd-dev/mixd/fitters/pbconv"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// cacheResult is the output of "perfdrive cache".
type cacheResult struct {
	Models int `json:"models"`
	Dim    int `json:"dimension"`
	K      int `json:"components"`
	// HeapBytesPerModel is the growth of the live heap per model cached.
	HeapBytesPerModel float64 `json:"heap_bytes_per_model"`
	// ParameterBytes is 8 × (K weights + K·D means + K·D² covariances), and
	// FactorBytes 8 × K·D(D+1)/2, the lower-triangular Cholesky factors.
	ParameterBytes int `json:"parameter_bytes"`
	FactorBytes    int `json:"factor_bytes"`
}

// runCache measures what one cached model costs in the daemon's own
// serving code: models are imported into a directory store by one server,
// then a second server on the same store loads each into its cache with a
// one-row Score; the live heap (after garbage collection) is compared
// before and after the loads.
func runCache(args []string) (any, error) {
	fs := flag.NewFlagSet("cache", flag.ContinueOnError)
	doc := fs.String("model", "", "model document")
	n := fs.Int("models", 64, "models to cache")
	heap := fs.String("heapprofile", "", "write a heap profile (every allocation sampled) after the loads")
	if err := fs.Parse(args); err != nil {
		return nil, err
	}
	if *heap != "" {
		runtime.MemProfileRate = 1
	}
	b, err := os.ReadFile(*doc)
	if err != nil {
		return nil, fmt.Errorf("read model document: %w", err)
	}
	p, err := readParams(*doc)
	if err != nil {
		return nil, err
	}
	dir, err := os.MkdirTemp("", "mixd-cache-bench-")
	if err != nil {
		return nil, err
	}
	defer os.RemoveAll(dir)
	ctx := context.Background()
	quiet := slog.New(slog.DiscardHandler)
	open := func() (*daemon.Server, func(), error) {
		st, err := store.OpenDir(dir)
		if err != nil {
			return nil, nil, fmt.Errorf("open store: %w", err)
		}
		host, err := fitterhost.New(fitterhost.Config{Logger: quiet})
		if err != nil {
			st.Close()
			return nil, nil, fmt.Errorf("fitter host: %w", err)
		}
		s, err := daemon.NewServer(daemon.Options{Store: st, Host: host, CacheBytes: 4 << 30, Logger: quiet})
		if err != nil {
			st.Close()
			return nil, nil, err
		}
		return s, func() { s.Close(); host.Close(); st.Close() }, nil
	}
	s, closeA, err := open()
	if err != nil {
		return nil, err
	}
	for i := 0; i < *n; i++ {
		if _, err := s.ImportModel(ctx, &mixdv1.ImportModelRequest{Document: b, Name: fmt.Sprintf("cache-%d", i)}); err != nil {
			closeA()
			return nil, fmt.Errorf("import: %w", err)
		}
	}
	closeA()

	s, closeB, err := open()
	if err != nil {
		return nil, err
	}
	defer closeB()
	row := &mixdv1.Matrix{Rows: 1, Cols: int64(p.Dim), LittleEndian: pbconv.EncodeFloat64s(p.Components[0].Mean)}
	score := func(i int) error {
		_, err := s.Score(ctx, &mixdv1.ScoreRequest{Model: fmt.Sprintf("cache-%d", i), Rows: row})
		return err
	}
	// A first model loads the store's and the cache's own structures.
	if err := score(0); err != nil {
		return nil, fmt.Errorf("score: %w", err)
	}
	before := liveHeap()
	for i := 1; i < *n; i++ {
		if err := score(i); err != nil {
			return nil, fmt.Errorf("score: %w", err)
		}
	}
	after := liveHeap()
	if *heap != "" {
		f, err := os.Create(*heap)
		if err != nil {
			return nil, err
		}
		defer f.Close()
		if err := pprof.WriteHeapProfile(f); err != nil {
			return nil, err
		}
	}
	k, d := len(p.Components), p.Dim
	return cacheResult{
		Models: *n - 1, Dim: d, K: k,
		HeapBytesPerModel: float64(after-before) / float64(*n-1),
		ParameterBytes:    8 * (k + k*d + k*d*d),
		FactorBytes:       8 * k * d * (d + 1) / 2,
	}, nil
}

// liveHeap returns the bytes of live heap objects after two collections
// (the second empties sync.Pool victim caches).
func liveHeap() int64 {
	runtime.GC()
	runtime.GC()
	var ms runtime.MemStats
	runtime.ReadMemStats(&ms)
	return int64(ms.HeapAlloc)
}
