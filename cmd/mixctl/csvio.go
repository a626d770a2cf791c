package main

import (
	"bufio"
	"encoding/csv"
	"errors"
	"io"
	"math"
	"os"
	"strconv"
	"strings"

	mixdclient "github.com/mixd-dev/mixd/clients/go"
)

// table is a numeric CSV file: a header of column names and the values.
type table struct {
	source string // file name, for messages
	header []string
	data   mixdclient.Matrix
	// observed marks the cells that held a number (rows×cols, row-major);
	// nil when every cell did. An empty cell is unobserved and reads as 0.
	observed []bool
	// lines holds the file line of every data row, for messages.
	lines []int
}

// openInput opens path, or returns standard input for "-".
func (a *app) openInput(path string) (io.ReadCloser, string, error) {
	if path == "-" {
		return io.NopCloser(a.stdin), "standard input", nil
	}
	f, err := os.Open(path)
	if err != nil {
		return nil, "", &inputError{err: err}
	}
	return f, path, nil
}

// readTable reads a CSV file with a header row; every other field must be
// a finite number or empty (an unobserved value, see table.observed).
// Errors name the file, line and column.
func (a *app) readTable(path string) (*table, error) {
	rc, name, err := a.openInput(path)
	if err != nil {
		return nil, err
	}
	defer rc.Close()
	return readCSV(rc, name)
}

// readCSV parses r (see readTable); name is used in messages.
func readCSV(r io.Reader, name string) (*table, error) {
	cr := csv.NewReader(bufio.NewReaderSize(r, 1<<16))
	cr.ReuseRecord = true
	cr.TrimLeadingSpace = true
	cr.Comment = '#'
	rec, err := cr.Read()
	if errors.Is(err, io.EOF) {
		return nil, inputf("%s: empty file (want a header row naming the columns)", name)
	}
	if err != nil {
		return nil, csvError(name, err)
	}
	t := &table{source: name, header: make([]string, len(rec))}
	seen := make(map[string]int, len(rec))
	for i, h := range rec {
		h = strings.TrimSpace(h)
		if h == "" {
			return nil, inputf("%s: header column %d is empty", name, i+1)
		}
		if j, dup := seen[h]; dup {
			return nil, inputf("%s: header names column %q twice (columns %d and %d)", name, h, j+1, i+1)
		}
		if _, err := strconv.ParseFloat(h, 64); err == nil {
			return nil, inputf("%s: the first line %q looks like data; the file needs a header row naming the columns", name, strings.Join(rec, ","))
		}
		seen[h] = i
		t.header[i] = h
	}
	cols := len(t.header)
	for {
		rec, err := cr.Read()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return nil, csvError(name, err)
		}
		line, _ := cr.FieldPos(0)
		t.lines = append(t.lines, line)
		for j, f := range rec {
			if strings.TrimSpace(f) == "" {
				t.markMissing(len(t.data.Values))
				t.data.Values = append(t.data.Values, 0)
				continue
			}
			v, err := strconv.ParseFloat(strings.TrimSpace(f), 64)
			if err != nil {
				return nil, inputf("%s: line %d, column %s: %q is not a number", name, line, t.header[j], f)
			}
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, inputf("%s: line %d, column %s: %q is not a finite number", name, line, t.header[j], f)
			}
			t.data.Values = append(t.data.Values, v)
		}
		t.data.Rows++
	}
	t.data.Cols = cols
	if t.observed != nil {
		for len(t.observed) < len(t.data.Values) {
			t.observed = append(t.observed, true)
		}
	}
	return t, nil
}

// markMissing records value i (row-major) as unobserved.
func (t *table) markMissing(i int) {
	for len(t.observed) < i {
		t.observed = append(t.observed, true)
	}
	t.observed = append(t.observed, false)
}

// requireComplete rejects a table with an empty cell, naming the first.
func (t *table) requireComplete(cmd string) error {
	for i, o := range t.observed {
		if !o {
			return inputf("%s: line %d, column %s is empty; %s needs every value (score, classify and predict treat empty cells as unobserved)",
				t.source, t.lines[i/len(t.header)], t.header[i%len(t.header)], cmd)
		}
	}
	return nil
}

// csvError turns an encoding/csv error into an inputError naming the line.
func csvError(name string, err error) error {
	var pe *csv.ParseError
	if errors.As(err, &pe) {
		if errors.Is(pe.Err, csv.ErrFieldCount) {
			return inputf("%s: line %d has a different number of fields from the header", name, pe.Line)
		}
		return inputf("%s: line %d: %v", name, pe.Line, pe.Err)
	}
	return inputf("%s: %v", name, err)
}

// selectColumns returns the table restricted to names, in that order.
func (t *table) selectColumns(names []string) (*table, error) {
	idx := make([]int, len(names))
	for i, n := range names {
		idx[i] = -1
		for j, h := range t.header {
			if h == n {
				idx[i] = j
				break
			}
		}
		if idx[i] < 0 {
			return nil, inputf("%s: no column named %q (the header has %s)", t.source, n, strings.Join(t.header, ", "))
		}
	}
	out := &table{source: t.source, header: append([]string(nil), names...), lines: t.lines}
	out.data = mixdclient.Matrix{Rows: t.data.Rows, Cols: len(names), Values: make([]float64, 0, t.data.Rows*len(names))}
	var observed []bool
	missing := false
	if t.observed != nil {
		observed = make([]bool, 0, t.data.Rows*len(names))
	}
	for r := range t.data.Rows {
		row := t.data.Row(r)
		for _, j := range idx {
			out.data.Values = append(out.data.Values, row[j])
			if observed != nil {
				o := t.observed[r*len(t.header)+j]
				observed = append(observed, o)
				missing = missing || !o
			}
		}
	}
	if missing {
		out.observed = observed
	}
	return out, nil
}

// splitList splits a comma-separated flag value, dropping empty items.
func splitList(s string) []string {
	var out []string
	for _, p := range strings.Split(s, ",") {
		if p = strings.TrimSpace(p); p != "" {
			out = append(out, p)
		}
	}
	return out
}

// formatFloat writes v in the shortest form that reads back to the same
// float64, so values survive a CSV round trip exactly.
func formatFloat(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// appendJSONFloat appends v as a JSON number, or null when it is not finite.
func appendJSONFloat(b []byte, v float64) []byte {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return append(b, "null"...)
	}
	return strconv.AppendFloat(b, v, 'g', -1, 64)
}
