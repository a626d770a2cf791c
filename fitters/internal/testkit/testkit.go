// Package testkit holds helpers shared by the tests of the em, tmix and vb
// fitters. Only _test.go files import it.
package testkit

import (
	"bufio"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"testing"

	"github.com/mixd-dev/mixd/fitters"
)

// FaithfulRows is the number of rows of testdata/faithful.csv.
const FaithfulRows = 272

// Faithful reads testdata/faithful.csv (provenance: testdata/faithful.md):
// the Old Faithful eruption durations and waiting times, 272 rows of two
// columns. It fails the test on a missing file or a malformed line.
func Faithful(t testing.TB) fitters.Data {
	t.Helper()
	_, here, _, ok := runtime.Caller(0)
	if !ok {
		t.Fatal("testkit: cannot locate the repository")
	}
	path := filepath.Join(filepath.Dir(here), "..", "..", "..", "testdata", "faithful.csv")
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	var vals []float64
	rows := 0
	for line := 0; sc.Scan(); line++ {
		if line == 0 {
			continue // header
		}
		parts := strings.Split(strings.TrimSpace(sc.Text()), ",")
		if len(parts) != 2 {
			t.Fatalf("faithful.csv line %d: %q", line+1, sc.Text())
		}
		for _, s := range parts {
			v, err := strconv.ParseFloat(s, 64)
			if err != nil {
				t.Fatalf("faithful.csv line %d: %v", line+1, err)
			}
			vals = append(vals, v)
		}
		rows++
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	if rows != FaithfulRows {
		t.Fatalf("faithful.csv has %d rows, want %d", rows, FaithfulRows)
	}
	return fitters.Data{Rows: rows, Cols: 2, Values: vals}
}
