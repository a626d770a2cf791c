// Command perfdrive is the Go half of clients/python/bench/perf_ratios.py:
// it measures mixd in process (EM iterations, log-densities, posteriors,
// the model cache) and over gRPC (single-row Classify latency under load),
// on data and parameters the Python script writes, and prints one JSON
// object on standard output. It is a benchmark driver, not part of mixd:
//
//	go run ./clients/python/bench/perfdrive em|eval|latency|cache [flags]
//
// Data files hold rows of little-endian float64 values, row-major; model
// files are mixd model documents (daemon/modeldoc).
package main

import (
	"encoding/binary"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"slices"

	"github.com/mixd-dev/mixd/daemon/modeldoc"
	"github.com/mixd-dev/mixd/fitters/mixture"
	"github.com/mixd-dev/mixd/fitters/pbconv"
)

func main() {
	if len(os.Args) < 2 {
		fmt.Fprintln(os.Stderr, "usage: perfdrive em|eval|latency|cache [flags]")
		os.Exit(2)
	}
	cmds := map[string]func([]string) (any, error){
		"em":      runEM,
		"eval":    runEval,
		"latency": runLatency,
		"cache":   runCache,
		"serve":   runServe,
	}
	run, ok := cmds[os.Args[1]]
	if !ok {
		fmt.Fprintf(os.Stderr, "perfdrive: unknown command %q\n", os.Args[1])
		os.Exit(2)
	}
	out, err := run(os.Args[2:])
	if err != nil {
		fmt.Fprintf(os.Stderr, "perfdrive %s: %v\n", os.Args[1], err)
		os.Exit(1)
	}
	if err := json.NewEncoder(os.Stdout).Encode(out); err != nil {
		fmt.Fprintf(os.Stderr, "perfdrive: %v\n", err)
		os.Exit(1)
	}
}

// readRows reads the first rows×cols little-endian float64 values of path.
func readRows(path string, rows, cols int) ([]float64, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("read data: %w", err)
	}
	n := rows * cols
	if len(b) < 8*n {
		return nil, fmt.Errorf("read data: %s holds %d values, want at least %d", path, len(b)/8, n)
	}
	x := make([]float64, n)
	for i := range x {
		x[i] = math.Float64frombits(binary.LittleEndian.Uint64(b[8*i:]))
	}
	return x, nil
}

// readParams reads a model document and returns its parameters.
func readParams(path string) (mixture.Params, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return mixture.Params{}, fmt.Errorf("read model document: %w", err)
	}
	pb, err := modeldoc.Decode(b)
	if err != nil {
		return mixture.Params{}, fmt.Errorf("model document %s: %w", path, err)
	}
	p, err := pbconv.ParamsFromProto(pb.GetParameters())
	if err != nil {
		return mixture.Params{}, fmt.Errorf("model document %s: %w", path, err)
	}
	return p, nil
}

// median returns the median of v (v is sorted in place).
func median(v []float64) float64 {
	if len(v) == 0 {
		return math.NaN()
	}
	slices.Sort(v)
	if len(v)%2 == 1 {
		return v[len(v)/2]
	}
	return 0.5 * (v[len(v)/2-1] + v[len(v)/2])
}

// quantile returns the q-quantile of sorted v (nearest rank), 0 for no
// values (JSON has no NaN; the counts beside the quantiles tell).
func quantile(sorted []float64, q float64) float64 {
	if len(sorted) == 0 {
		return 0
	}
	i := int(math.Ceil(q*float64(len(sorted)))) - 1
	return sorted[min(max(i, 0), len(sorted)-1)]
}
