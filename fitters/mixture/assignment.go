package mixture

import (
	"fmt"
	"math"
)

// MinCostAssignment solves the linear assignment problem for the rows × cols
// cost matrix cost (row-major, finite values): it pairs each row with a
// distinct column, or each column with a distinct row when there are fewer
// columns, so that the total cost of the min(rows, cols) pairs is smallest.
// It returns, for every row, its column or −1 when the row is left unpaired.
//
// The method is the shortest augmenting path form of the Hungarian algorithm
// with row and column potentials (Kuhn 1955, Munkres 1957; in the
// O(n³) arrangement of Jonker & Volgenant 1987), on the square matrix padded
// with zero-cost dummy rows or columns. Ties are broken towards lower
// indices, so the result is deterministic.
func MinCostAssignment(rows, cols int, cost []float64) ([]int, error) {
	if rows < 0 || cols < 0 {
		return nil, fmt.Errorf("assignment: negative shape %d×%d", rows, cols)
	}
	if len(cost) != rows*cols {
		return nil, fmt.Errorf("assignment: cost has %d values, want %d×%d = %d", len(cost), rows, cols, rows*cols)
	}
	for i, v := range cost {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("assignment: cost[%d][%d] = %v is not finite", i/max(cols, 1), i%max(cols, 1), v)
		}
	}
	n := max(rows, cols)
	out := make([]int, rows)
	for i := range out {
		out[i] = -1
	}
	if n == 0 || rows == 0 || cols == 0 {
		return out, nil
	}
	at := func(i, j int) float64 { // 1-based, padded
		if i > rows || j > cols {
			return 0
		}
		return cost[(i-1)*cols+(j-1)]
	}
	inf := math.Inf(1)
	u := make([]float64, n+1)
	v := make([]float64, n+1)
	match := make([]int, n+1) // match[j] = row matched to column j (1-based), 0 = free
	way := make([]int, n+1)
	minv := make([]float64, n+1)
	used := make([]bool, n+1)
	for i := 1; i <= n; i++ {
		match[0] = i
		j0 := 0
		for j := range minv {
			minv[j] = inf
			used[j] = false
		}
		for {
			used[j0] = true
			i0 := match[j0]
			delta := inf
			j1 := 0
			for j := 1; j <= n; j++ {
				if used[j] {
					continue
				}
				cur := at(i0, j) - u[i0] - v[j]
				if cur < minv[j] {
					minv[j] = cur
					way[j] = j0
				}
				if minv[j] < delta {
					delta = minv[j]
					j1 = j
				}
			}
			for j := 0; j <= n; j++ {
				if used[j] {
					u[match[j]] += delta
					v[j] -= delta
				} else {
					minv[j] -= delta
				}
			}
			j0 = j1
			if match[j0] == 0 {
				break
			}
		}
		for j0 != 0 {
			j1 := way[j0]
			match[j0] = match[j1]
			j0 = j1
		}
	}
	for j := 1; j <= n; j++ {
		if i := match[j]; i >= 1 && i <= rows && j <= cols {
			out[i-1] = j - 1
		}
	}
	return out, nil
}
