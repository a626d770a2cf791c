package main

import (
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// TestReadCSVEmptyCells checks that empty cells become unobserved values
// (0 with a false flag), that column selection carries the flags (and drops
// them when the selected columns are complete), and that fit rejects them
// naming the line and column.
func TestReadCSVEmptyCells(t *testing.T) {
	tb, err := readCSV(strings.NewReader("flow,current,vib\n1,,3\n# note\n4,5, \n7,8,9\n"), "in.csv")
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(tb.data.Values, []float64{1, 0, 3, 4, 5, 0, 7, 8, 9}) ||
		!slices.Equal(tb.observed, []bool{true, false, true, true, true, false, true, true, true}) ||
		!slices.Equal(tb.lines, []int{2, 4, 5}) {
		t.Fatalf("values %v observed %v lines %v", tb.data.Values, tb.observed, tb.lines)
	}
	sel, err := tb.selectColumns([]string{"vib", "flow"})
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(sel.observed, []bool{true, true, false, true, true, true}) {
		t.Errorf("selected flags %v", sel.observed)
	}
	if sel, _ := tb.selectColumns([]string{"flow"}); sel.observed != nil {
		t.Errorf("a complete selection kept flags %v", sel.observed)
	}
	if err := tb.requireComplete("fit"); err == nil || !strings.Contains(err.Error(), "in.csv: line 2, column current is empty; fit needs every value") {
		t.Errorf("requireComplete: %v", err)
	}
	full, err := readCSV(strings.NewReader("a,b\n1,2\n"), "x")
	if err != nil || full.observed != nil || full.requireComplete("fit") != nil {
		t.Errorf("complete file: %v %v", full.observed, err)
	}

	dir := t.TempDir()
	p := filepath.Join(dir, "gaps.csv")
	if err := os.WriteFile(p, []byte("flow,current\n1,2\n3,\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	code, _, errOut := runCLI(t, "", "--addr", "127.0.0.1:1", "fit", "--model", "m", p)
	if code != exitInvalid || !strings.Contains(errOut, "line 3, column current is empty") {
		t.Errorf("fit with an empty cell: exit %d, %s", code, errOut)
	}
	// Only the fitted columns need to be complete.
	code, _, errOut = runCLI(t, "", "--addr", "127.0.0.1:1", "--timeout", "1s", "fit", "--model", "m", "--columns", "flow", p)
	if code == exitInvalid {
		t.Errorf("fit of complete columns rejected: %s", errOut)
	}
}

// TestMaskedCells checks how unobserved input values are written: empty in
// CSV, null in JSON.
func TestMaskedCells(t *testing.T) {
	c := lcell([]float64{1.5, 0, 3})
	c.obs = []bool{true, false, true}
	if got := string(c.csv(nil)); got != "1.5,,3" {
		t.Errorf("csv %q", got)
	}
	if got := string(c.json(nil)); got != "[1.5,null,3]" {
		t.Errorf("json %q", got)
	}
	if got := string(fcell(math.NaN()).json(nil)); got != "null" {
		t.Errorf("NaN percentile in JSON: %q", got)
	}
}

func TestParseModelRef(t *testing.T) {
	for _, tc := range []struct {
		in      string
		name    string
		version int64
		bad     bool
	}{
		{"pumps", "pumps", 0, false},
		{"pumps@3", "pumps", 3, false},
		{"models/pumps@12", "models/pumps", 12, false},
		{"pumps@0", "", 0, true},
		{"pumps@", "", 0, true},
		{"pumps@x", "", 0, true},
		{"@2", "", 0, true},
	} {
		name, v, err := parseModelRef(tc.in)
		if (err != nil) != tc.bad || name != tc.name || v != tc.version {
			t.Errorf("%q: %q %d %v", tc.in, name, v, err)
		}
	}
	code, _, errOut := runCLI(t, "", "compare", "pumps@0", "pumps")
	if code != exitUsage || !strings.Contains(errOut, "positive whole number") {
		t.Errorf("compare pumps@0: exit %d %s", code, errOut)
	}
	code, _, errOut = runCLI(t, "", "predict", "--model", "m", "--std", "--draws", "2", "x.csv")
	if code != exitUsage || !strings.Contains(errOut, "do not combine") {
		t.Errorf("predict --std --draws: exit %d %s", code, errOut)
	}
}

// FuzzReadCSV parses arbitrary bytes as a CSV file: no panic; an accepted
// table has a consistent shape, finite values, flags for exactly its empty
// cells, and one line number per row.
func FuzzReadCSV(f *testing.F) {
	f.Add("flow,current\n1,2\n3,\n")
	f.Add("a\n\n,\n")
	f.Add("x,y\n1,NaN\n")
	f.Add("# c\nx,y\n\"1\",\" \"\n")
	f.Fuzz(func(t *testing.T, in string) {
		tb, err := readCSV(strings.NewReader(in), "fuzz")
		if err != nil {
			return
		}
		n := tb.data.Rows * tb.data.Cols
		if len(tb.data.Values) != n || tb.data.Cols != len(tb.header) || len(tb.lines) != tb.data.Rows {
			t.Fatalf("shape %d×%d with %d values, %d header names, %d lines", tb.data.Rows, tb.data.Cols, len(tb.data.Values), len(tb.header), len(tb.lines))
		}
		if tb.observed != nil && len(tb.observed) != n {
			t.Fatalf("%d flags for %d values", len(tb.observed), n)
		}
		for i, v := range tb.data.Values {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				t.Fatalf("value %d is %v", i, v)
			}
			if tb.observed != nil && !tb.observed[i] && v != 0 {
				t.Fatalf("unobserved value %d reads %v, want 0", i, v)
			}
		}
	})
}
