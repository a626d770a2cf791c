package mixture

import (
	"fmt"
	"math"
	"runtime"
	"sync"
	"sync/atomic"
)

// patternFactorBudget bounds the bytes of sub-block factorisations held at
// once by one marginal or conditional evaluation: distinct observation
// patterns are processed in groups whose factors fit in it (a single pattern
// may exceed it on its own).
const patternFactorBudget = 32 << 20

// parallelMinPatterns is the smallest number of patterns in a group whose
// factorisations are spread over several goroutines.
const parallelMinPatterns = 16

// checkMask checks that x is a whole number of finite rows and that observed
// (when non-nil) has one flag per value; it returns the row count. Values at
// unobserved positions must be finite too: they are ignored, but a NaN or an
// infinity is treated as a mistake rather than as a missing-value marker.
func (m *Model) checkMask(what string, x []float64, observed []bool) (int, error) {
	rows, err := m.rowsOf(what, x)
	if err != nil {
		return 0, err
	}
	if observed != nil && len(observed) != len(x) {
		return 0, fmt.Errorf("%s: observed has %d flags, want %d (one per value of x, rows × dim)", what, len(observed), len(x))
	}
	return rows, nil
}

// pattern is one set of observed features shared by some rows of a batch.
type pattern struct {
	obs   []int // observed feature indices, ascending
	unobs []int // unobserved feature indices, ascending
	rows  []int // the batch rows with this pattern, ascending
}

func (p *pattern) full(dim int) bool { return len(p.obs) == dim }

// groupPatterns returns the distinct observation patterns of the rows in
// order of first appearance. observed nil means every value is observed.
func groupPatterns(observed []bool, rows, dim int) []*pattern {
	if observed == nil {
		p := &pattern{obs: make([]int, dim), rows: make([]int, rows)}
		for i := range p.obs {
			p.obs[i] = i
		}
		for i := range p.rows {
			p.rows[i] = i
		}
		if rows == 0 {
			return nil
		}
		return []*pattern{p}
	}
	var out []*pattern
	index := map[string]int{}
	key := make([]byte, (dim+7)/8)
	for r := 0; r < rows; r++ {
		flags := observed[r*dim : (r+1)*dim]
		clear(key)
		for j, o := range flags {
			if o {
				key[j>>3] |= 1 << (j & 7)
			}
		}
		if i, ok := index[string(key)]; ok {
			out[i].rows = append(out[i].rows, r)
			continue
		}
		p := &pattern{rows: []int{r}}
		for j, o := range flags {
			if o {
				p.obs = append(p.obs, j)
			} else {
				p.unobs = append(p.unobs, j)
			}
		}
		index[string(key)] = len(out)
		out = append(out, p)
	}
	return out
}

// subFactor is the Cholesky factorisation of one covariance (or scale)
// matrix with its features permuted so that the observed ones of a pattern
// come first:
//
//	P Σ Pᵀ = [Σ_oo Σ_ou; Σ_uo Σ_uu] = L Lᵀ,  L = [L_oo 0; L_uo L_uu]
//
// so that L_oo is the factor of the marginal's Σ_oo, L_uo L_oo⁻¹ (x_o − μ_o)
// = Σ_uo Σ_oo⁻¹ (x_o − μ_o) is the regression term of the conditional mean,
// and L_uu L_uuᵀ = Σ_uu − Σ_uo Σ_oo⁻¹ Σ_ou is the Schur complement, the
// conditional covariance. Only the first `rows` rows of L are computed (p for
// a marginal, all of them for a conditional).
type subFactor struct {
	n       int       // p + q
	l       []float64 // n×n row-major lower factor (first `rows` rows set)
	invDiag []float64 // 1/L_ii for the computed rows
	logDet  float64   // log |Σ_oo| = 2 Σ_{i<p} log L_ii
	// cond holds L_uu L_uuᵀ (q×q row-major) when asked for.
	cond []float64
}

// factorPattern factorises every distinct covariance of the model for
// pattern pt: the first p rows (marginal) or all rows (withCond), and the
// Schur complements when withSchur is set. A tied model factorises once.
// An error names the component and the observed features.
func (m *Model) factorPattern(pt *pattern, withCond, withSchur bool) ([]*subFactor, error) {
	d := m.dim
	order := make([]int, 0, d)
	order = append(order, pt.obs...)
	if withCond {
		order = append(order, pt.unobs...)
	}
	n := len(order)
	p := len(pt.obs)
	out := make([]*subFactor, m.k)
	for c := 0; c < m.k; c++ {
		if c > 0 && m.lowerOff[c] == m.lowerOff[c-1] {
			out[c] = out[c-1] // tied: one matrix
			continue
		}
		cov := m.params.Components[c].Cov
		f := &subFactor{n: n, l: make([]float64, n*n), invDiag: make([]float64, n)}
		for i := 0; i < n; i++ {
			ri := order[i] * d
			for j := 0; j <= i; j++ {
				// Cholesky–Banachiewicz, row i: the entries use only rows ≤ i.
				s := cov[ri+order[j]]
				li, lj := f.l[i*n:i*n+j], f.l[j*n:j*n+j]
				for t, v := range li {
					s -= v * lj[t]
				}
				if j < i {
					f.l[i*n+j] = s * f.invDiag[j]
					continue
				}
				if !(s > 0) || math.IsInf(s, 0) {
					return nil, fmt.Errorf("component %d: covariance restricted to %s is not positive definite in floating point (pivot %v)",
						c, describeOrder(pt, i), s)
				}
				r := math.Sqrt(s)
				f.l[i*n+i] = r
				f.invDiag[i] = 1 / r
				if i < p {
					f.logDet += 2 * math.Log(r)
				}
			}
		}
		if withCond && withSchur {
			q := n - p
			f.cond = make([]float64, q*q)
			for a := 0; a < q; a++ {
				la := f.l[(p+a)*n+p : (p+a)*n+p+a+1]
				for b := 0; b <= a; b++ {
					lb := f.l[(p+b)*n+p : (p+b)*n+p+b+1]
					s := 0.0
					for t, v := range lb {
						s += la[t] * v
					}
					f.cond[a*q+b], f.cond[b*q+a] = s, s
				}
			}
		}
		out[c] = f
	}
	return out, nil
}

// describeOrder names the features of the first i+1 entries of a pattern's
// permuted order, for error messages.
func describeOrder(pt *pattern, i int) string {
	if i < len(pt.obs) {
		return fmt.Sprintf("observed features %v", pt.obs)
	}
	return fmt.Sprintf("observed features %v (conditioning unobserved features %v)", pt.obs, pt.unobs)
}

// factorBytes is the memory of one pattern's factors.
func (m *Model) factorBytes(pt *pattern, withCond bool) int {
	n := len(pt.obs)
	if withCond {
		n = m.dim
	}
	distinct := m.k
	if m.structure == Tied {
		distinct = 1
	}
	return distinct * (2*n*n + n) * 8
}

// whitenRow solves L_oo y = x_o − μ_o for one row (x the full row, mu the
// full mean) into y[:p] and returns δ = |y|². The operations are those of
// Model.whiten (axpy updates in column order, multiplication by 1/L_ii), and
// a distance that overflows is +Inf.
func (f *subFactor) whitenRow(x, mu []float64, obs []int, y []float64) float64 {
	n := f.n
	d2 := 0.0
	for i, fi := range obs {
		v := x[fi] - mu[fi]
		li := f.l[i*n : i*n+i]
		for j, l := range li {
			v -= l * y[j]
		}
		v *= f.invDiag[i]
		y[i] = v
		if i == 0 {
			d2 = v * v
		} else {
			d2 += v * v
		}
	}
	if d2 != d2 {
		return math.Inf(1)
	}
	return d2
}

// parallelFor calls fn(i) for every i in [0, n), on up to GOMAXPROCS
// goroutines when parallel is set. fn must write only to locations owned by
// i, so the results do not depend on the scheduling.
func parallelFor(n int, parallel bool, fn func(i int)) {
	workers := min(runtime.GOMAXPROCS(0), n)
	if !parallel || workers < 2 {
		for i := 0; i < n; i++ {
			fn(i)
		}
		return
	}
	var next atomic.Int64
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Go(func() {
			for {
				i := int(next.Add(1) - 1)
				if i >= n {
					return
				}
				fn(i)
			}
		})
	}
	wg.Wait()
}

// patternTask is a range of one pattern's rows evaluated together.
type patternTask struct {
	pat    int // index in the group
	lo, hi int // range of the pattern's rows
}

// rowError is an evaluation error found at a batch row.
type rowError struct {
	row int
	err error
}

// forPatternGroups processes the patterns in groups whose factors fit in
// patternFactorBudget: it factorises a group's patterns (in parallel when the
// batch is large), then calls eval for every task of at most ChunkRows rows of
// the group (in parallel when the batch is large). It returns the first
// factorisation error in pattern order, else the evaluation error of the
// lowest row, so the error does not depend on the scheduling.
func (m *Model) forPatternGroups(pats []*pattern, totalRows int, withCond, withSchur bool,
	eval func(pt *pattern, f []*subFactor, lo, hi int) *rowError) error {
	parallel := totalRows >= ParallelMinRows
	for g := 0; g < len(pats); {
		end, bytes := g, 0
		for end < len(pats) {
			b := m.factorBytes(pats[end], withCond)
			if end > g && bytes+b > patternFactorBudget {
				break
			}
			bytes += b
			end++
		}
		group := pats[g:end]
		factors := make([][]*subFactor, len(group))
		errs := make([]error, len(group))
		parallelFor(len(group), parallel || len(group) >= parallelMinPatterns, func(i int) {
			factors[i], errs[i] = m.factorPattern(group[i], withCond, withSchur)
		})
		for _, err := range errs {
			if err != nil {
				return err
			}
		}
		var tasks []patternTask
		for i, pt := range group {
			for lo := 0; lo < len(pt.rows); lo += ChunkRows {
				tasks = append(tasks, patternTask{pat: i, lo: lo, hi: min(lo+ChunkRows, len(pt.rows))})
			}
		}
		taskErrs := make([]*rowError, len(tasks))
		parallelFor(len(tasks), parallel, func(t int) {
			tk := tasks[t]
			taskErrs[t] = eval(group[tk.pat], factors[tk.pat], tk.lo, tk.hi)
		})
		var first *rowError
		for _, e := range taskErrs {
			if e != nil && (first == nil || e.row < first.row) {
				first = e
			}
		}
		if first != nil {
			return first.err
		}
		g = end
	}
	return nil
}
