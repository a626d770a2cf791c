// Command evalref prints the Go in-process evaluation of a mixd model, for
// the Java client's tests to compare the daemon's answers with.
//
// It reads a model document (the bytes ExportModel returns), builds the
// model with fitters/mixture exactly as the daemon does (modeldoc.Decode,
// pbconv.ParamsFromProto, mixture.New), evaluates the rows of a binary file
// of little-endian float64 values (row-major, -cols per row) and prints one
// section per output:
//
//	<name> <rows> <cols>
//	<one line per row: cols values separated by spaces>
//
// Values are printed in the shortest form that reads back as the same
// float64 (strconv 'g', -1), so a reader gets the exact bits.
//
// With -mask (one byte per value of the rows, 1 observed, 0 unobserved) the
// outputs "marginal" (mixture.Model.Marginal) and "predict"
// (mixture.Model.Conditional with every output, -draws draws seeded by
// -draws-seed) use it. With -other, a second model document, it also
// prints mixture.Compare of the two (-compare-samples, -compare-seed).
//
// Usage:
//
//	evalref -model doc.json -rows rows.bin -cols 3 [-outputs score,classify,marginal,predict]
//	        [-mask mask.bin] [-draws N -draws-seed S] [-sample-count N -sample-seed S]
//	        [-other doc2.json -compare-samples N -compare-seed S]
package main

import (
	"bufio"
	"context"
	"flag"
	"fmt"
	"io"
	"os"
	"strconv"
	"strings"

	"github.com/mixd-dev/mixd/daemon/modeldoc"
	"github.com/mixd-dev/mixd/fitters/mixture"
	"github.com/mixd-dev/mixd/fitters/pbconv"
)

func main() {
	if err := run(os.Args[1:], os.Stdout); err != nil {
		fmt.Fprintln(os.Stderr, "evalref:", err)
		os.Exit(1)
	}
}

func run(args []string, stdout io.Writer) error {
	fs := flag.NewFlagSet("evalref", flag.ContinueOnError)
	modelPath := fs.String("model", "", "model document (JSON)")
	rowsPath := fs.String("rows", "", "rows: little-endian float64, row-major")
	cols := fs.Int("cols", 0, "columns per row")
	outputs := fs.String("outputs", "score,classify", "comma-separated: score (log-densities, component log-densities), classify (labels, max posteriors, posteriors)")
	sampleCount := fs.Int("sample-count", 0, "also draw this many rows")
	sampleSeed := fs.Uint64("sample-seed", 0, "seed of the draw")
	maskPath := fs.String("mask", "", "observation mask of the rows: one byte per value, 1 observed, 0 unobserved")
	draws := fs.Int("draws", 0, "predict: draws per row")
	drawsSeed := fs.Uint64("draws-seed", 0, "predict: seed of the draws")
	otherPath := fs.String("other", "", "a second model document to compare with")
	compareSamples := fs.Int("compare-samples", 0, "compare: draws per direction (0: the default)")
	compareSeed := fs.Uint64("compare-seed", 0, "compare: seed of the draws")
	if err := fs.Parse(args); err != nil {
		return err
	}
	if *modelPath == "" {
		return fmt.Errorf("-model is required")
	}
	m, err := load(*modelPath)
	if err != nil {
		return err
	}
	opts := evalOptions{draws: *draws, drawsSeed: *drawsSeed}
	if *maskPath != "" {
		raw, err := os.ReadFile(*maskPath)
		if err != nil {
			return fmt.Errorf("read mask: %w", err)
		}
		opts.mask = make([]bool, len(raw))
		for i, b := range raw {
			if b > 1 {
				return fmt.Errorf("mask byte %d is %d; want 0 or 1", i, b)
			}
			opts.mask[i] = b == 1
		}
	}
	w := bufio.NewWriterSize(stdout, 1<<20)
	if *rowsPath != "" {
		raw, err := os.ReadFile(*rowsPath)
		if err != nil {
			return fmt.Errorf("read rows: %w", err)
		}
		x, err := pbconv.DecodeFloat64s(raw)
		if err != nil {
			return fmt.Errorf("rows: %w", err)
		}
		if *cols != m.Dim() {
			return fmt.Errorf("-cols %d differs from the model's dimension %d", *cols, m.Dim())
		}
		if len(x)%*cols != 0 {
			return fmt.Errorf("rows: %d values are not a whole number of rows of %d", len(x), *cols)
		}
		if opts.mask != nil && len(opts.mask) != len(x) {
			return fmt.Errorf("mask: %d bytes for %d values", len(opts.mask), len(x))
		}
		if err := evaluate(w, m, x, len(x)/(*cols), strings.Split(*outputs, ","), opts); err != nil {
			return err
		}
	}
	if *sampleCount > 0 {
		sx, sl := m.Sample(*sampleCount, *sampleSeed)
		writeMatrix(w, "sample_rows", *sampleCount, m.Dim(), sx)
		writeInts(w, "sample_components", sl)
	}
	if *otherPath != "" {
		q, err := load(*otherPath)
		if err != nil {
			return err
		}
		c, err := mixture.Compare(context.Background(), m, q, mixture.CompareOptions{Samples: *compareSamples, Seed: *compareSeed})
		if err != nil {
			return fmt.Errorf("compare: %w", err)
		}
		writeMatrix(w, "compare_kl", 1, 4, []float64{c.Forward, c.ForwardSE, c.Backward, c.BackwardSE})
		matches := make([]float64, 0, 5*len(c.Matches))
		for _, p := range c.Matches {
			matches = append(matches, float64(p.P), float64(p.Q), p.Distance, p.WeightP, p.WeightQ)
		}
		writeMatrix(w, "compare_matches", len(c.Matches), 5, matches)
		writeInts(w, "compare_unmatched", c.UnmatchedP)
		writeInts(w, "compare_unmatched_other", c.UnmatchedQ)
	}
	return w.Flush()
}

// load builds a model from a model document as the daemon does.
func load(path string) (*mixture.Model, error) {
	doc, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("read model: %w", err)
	}
	pb, err := modeldoc.Decode(doc)
	if err != nil {
		return nil, fmt.Errorf("decode model %s: %w", path, err)
	}
	params, err := pbconv.ParamsFromProto(pb.GetParameters())
	if err != nil {
		return nil, fmt.Errorf("model parameters %s: %w", path, err)
	}
	m, err := mixture.New(params)
	if err != nil {
		return nil, fmt.Errorf("build model %s: %w", path, err)
	}
	return m, nil
}

// evalOptions are the inputs of the masked outputs.
type evalOptions struct {
	mask      []bool
	draws     int
	drawsSeed uint64
}

// evaluate writes the requested outputs for the n rows of x.
func evaluate(w *bufio.Writer, m *mixture.Model, x []float64, n int, outputs []string, opts evalOptions) error {
	k, d := m.K(), m.Dim()
	for _, o := range outputs {
		switch o {
		case "score":
			ld := make([]float64, n)
			if err := m.LogDensity(x, ld); err != nil {
				return fmt.Errorf("log-density: %w", err)
			}
			writeMatrix(w, "log_densities", n, 1, ld)
			comp := make([]float64, n*k)
			if err := m.ComponentLogDensity(x, comp); err != nil {
				return fmt.Errorf("component log-density: %w", err)
			}
			writeMatrix(w, "component_log_densities", n, k, comp)
		case "classify":
			labels := make([]int, n)
			maxPost := make([]float64, n)
			if err := m.Assign(x, labels, maxPost); err != nil {
				return fmt.Errorf("assign: %w", err)
			}
			writeInts(w, "components", labels)
			writeMatrix(w, "max_posteriors", n, 1, maxPost)
			post := make([]float64, n*k)
			if err := m.Posteriors(x, nil, post, nil); err != nil {
				return fmt.Errorf("posteriors: %w", err)
			}
			writeMatrix(w, "posteriors", n, k, post)
		case "assign":
			labels := make([]int, n)
			maxPost := make([]float64, n)
			if err := m.Assign(x, labels, maxPost); err != nil {
				return fmt.Errorf("assign: %w", err)
			}
			writeInts(w, "components", labels)
			writeMatrix(w, "max_posteriors", n, 1, maxPost)
		case "marginal":
			out := mixture.MarginalOutput{
				LogDensity:          make([]float64, n),
				ComponentLogDensity: make([]float64, n*k),
				Posteriors:          make([]float64, n*k),
				Labels:              make([]int, n),
				MaxPosterior:        make([]float64, n),
			}
			if err := m.Marginal(x, opts.mask, &out); err != nil {
				return fmt.Errorf("marginal: %w", err)
			}
			writeMatrix(w, "marginal_log_densities", n, 1, out.LogDensity)
			writeMatrix(w, "marginal_component_log_densities", n, k, out.ComponentLogDensity)
			writeMatrix(w, "marginal_posteriors", n, k, out.Posteriors)
			writeInts(w, "marginal_components", out.Labels)
			writeMatrix(w, "marginal_max_posteriors", n, 1, out.MaxPosterior)
		case "predict":
			c, err := m.Conditional(x, opts.mask, mixture.ConditionalOptions{
				StdDev: true, Covariance: true, Components: true, ComponentScales: true,
				Draws: opts.draws, Seed: opts.drawsSeed,
			})
			if err != nil {
				return fmt.Errorf("conditional: %w", err)
			}
			writeMatrix(w, "predict_means", n, d, c.Mean)
			writeMatrix(w, "predict_log_densities", n, 1, c.LogDensity)
			writeMatrix(w, "predict_standard_deviations", n, d, c.StdDev)
			writeMatrix(w, "predict_covariances", n, d*d, c.Cov)
			writeMatrix(w, "predict_posteriors", n, k, c.Posteriors)
			writeMatrix(w, "predict_component_means", n, k*d, c.ComponentMeans)
			if c.ComponentDF != nil {
				writeMatrix(w, "predict_component_degrees_of_freedom", n, k, c.ComponentDF)
			}
			writeMatrix(w, "predict_component_scales", n, k*d*d, c.ComponentScales)
			if opts.draws > 0 {
				writeMatrix(w, "predict_draws", n*opts.draws, d, c.Draws)
			}
		default:
			return fmt.Errorf("unknown output %q (want score, classify, assign, marginal or predict)", o)
		}
	}
	return nil
}

func writeMatrix(w *bufio.Writer, name string, rows, cols int, v []float64) {
	fmt.Fprintf(w, "%s %d %d\n", name, rows, cols)
	buf := make([]byte, 0, 32)
	for i := range rows {
		for j := range cols {
			if j > 0 {
				w.WriteByte(' ')
			}
			buf = strconv.AppendFloat(buf[:0], v[i*cols+j], 'g', -1, 64)
			w.Write(buf)
		}
		w.WriteByte('\n')
	}
}

func writeInts(w *bufio.Writer, name string, v []int) {
	fmt.Fprintf(w, "%s %d 1\n", name, len(v))
	for _, x := range v {
		w.WriteString(strconv.Itoa(x))
		w.WriteByte('\n')
	}
}
