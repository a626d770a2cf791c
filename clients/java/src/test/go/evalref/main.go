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
// Usage:
//
//	evalref -model doc.json -rows rows.bin -cols 3 [-outputs score,classify] [-sample-count N -sample-seed S]
package main

import (
	"bufio"
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
	if err := fs.Parse(args); err != nil {
		return err
	}
	if *modelPath == "" {
		return fmt.Errorf("-model is required")
	}
	doc, err := os.ReadFile(*modelPath)
	if err != nil {
		return fmt.Errorf("read model: %w", err)
	}
	pb, err := modeldoc.Decode(doc)
	if err != nil {
		return fmt.Errorf("decode model: %w", err)
	}
	params, err := pbconv.ParamsFromProto(pb.GetParameters())
	if err != nil {
		return fmt.Errorf("model parameters: %w", err)
	}
	m, err := mixture.New(params)
	if err != nil {
		return fmt.Errorf("build model: %w", err)
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
		if err := evaluate(w, m, x, len(x)/(*cols), strings.Split(*outputs, ",")); err != nil {
			return err
		}
	}
	if *sampleCount > 0 {
		sx, sl := m.Sample(*sampleCount, *sampleSeed)
		writeMatrix(w, "sample_rows", *sampleCount, m.Dim(), sx)
		writeInts(w, "sample_components", sl)
	}
	return w.Flush()
}

// evaluate writes the requested outputs for the n rows of x.
func evaluate(w *bufio.Writer, m *mixture.Model, x []float64, n int, outputs []string) error {
	k := m.K()
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
		default:
			return fmt.Errorf("unknown output %q (want score, classify or assign)", o)
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
