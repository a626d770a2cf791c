package reclaim

import (
	"runtime"
	"testing"
)

func TestBudgetCollectsAfterLimit(t *testing.T) {
	tests := []struct {
		name   string
		limit  int64
		chunks []int
		want   int
	}{
		{"below the budget", 100, []int{30, 30, 30}, 0},
		{"exactly the budget", 100, []int{50, 50}, 1},
		{"every budget's worth", 100, []int{60, 60, 60, 60, 60}, 2},
		{"one chunk over several budgets", 100, []int{350}, 1},
		{"disabled", 0, []int{1 << 30}, 0},
		{"negative sizes ignored", 10, []int{-50, 5, 4}, 0},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			b := New(tc.limit)
			got := 0
			b.collect = func() { got++ }
			for _, n := range tc.chunks {
				b.Done(n)
			}
			if got != tc.want {
				t.Fatalf("collections = %d, want %d", got, tc.want)
			}
		})
	}
}

func TestNilBudget(t *testing.T) {
	var b *Budget
	b.Done(1 << 40) // must not panic
}

// TestBudgetBoundsPeak streams 256 MiB through 2 MiB chunks into one array,
// as a fit upload does, and checks that the heap never holds much more
// than the array plus the budget. Without the budget the collector would
// let about the array's size of garbage accumulate.
func TestBudgetBoundsPeak(t *testing.T) {
	if testing.Short() {
		t.Skip("allocates 256 MiB")
	}
	const total, chunk = 256 << 20, 2 << 20
	b := New(32 << 20)
	dst := make([]byte, 0, total)
	var peak uint64
	var ms runtime.MemStats
	for len(dst) < total {
		c := make([]byte, chunk)
		c[0], c[chunk-1] = 1, 1
		dst = append(dst, c...)
		b.Done(len(c))
		if len(dst)%(16<<20) == 0 {
			runtime.ReadMemStats(&ms)
			peak = max(peak, ms.HeapAlloc)
		}
	}
	runtime.KeepAlive(dst)
	if lim := uint64(total + 32<<20 + 32<<20); peak > lim {
		t.Fatalf("heap peaked at %d MiB, above the array plus budget plus slack (%d MiB)", peak>>20, lim>>20)
	}
}
