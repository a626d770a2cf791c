package mixture

import (
	"fmt"
	"math"
	"runtime"
	"sync"
	"sync/atomic"
)

const (
	// ChunkRows is the fixed number of rows a goroutine takes at a time in a
	// parallel evaluation, and the block size of LogLikelihood's sums.
	ChunkRows = 1024
	// ParallelMinRows is the smallest batch split over several goroutines.
	ParallelMinRows = 4096
	// blockRows is the number of rows whose deviations are whitened together,
	// column by column, inside a chunk.
	blockRows = 128
	// smallRatio is the δ²/ν below which log1p(δ²/ν) is replaced by its
	// three-term series (error below 3e-16 relative).
	smallRatio = 1e-5
	// expUnderflow is below the argument under which math.Exp returns 0
	// (−745.13...).
	expUnderflow = -746
)

// workspace is one goroutine's scratch space.
type workspace struct {
	y    []float64 // dim×blockRows, column-major: y[i*blockRows+r]
	d2   []float64 // blockRows
	comp []float64 // blockRows×k
	t    []float64 // blockRows×k: arguments of exponentials
	ex   []float64 // blockRows×k: their exponentials
	mx   []float64 // blockRows: per-row maximum of comp
	logS []float64 // blockRows: per-row log Σ exp(comp − mx)
}

func (m *Model) newWorkspace() *workspace {
	return &workspace{
		y:    make([]float64, m.dim*blockRows),
		d2:   make([]float64, blockRows),
		comp: make([]float64, blockRows*m.k),
		t:    make([]float64, blockRows*m.k),
		ex:   make([]float64, blockRows*m.k),
		mx:   make([]float64, blockRows),
		logS: make([]float64, blockRows),
	}
}

// opKind selects what a job computes per row.
type opKind int

const (
	opLogDensity opKind = iota
	opComponent
	opMahalanobis
	opPosteriors
	opAssign
	opLogLikelihood
)

// job is one batch evaluation.
type job struct {
	op      opKind
	x       []float64
	rows    int
	out     []float64 // log-density, component log-densities or distances
	post    []float64
	logPost []float64
	maxPost []float64
	labels  []int
	weights []float64
}

// rowsOf checks that x is a whole number of finite rows and returns the count.
func (m *Model) rowsOf(what string, x []float64) (int, error) {
	if len(x)%m.dim != 0 {
		return 0, fmt.Errorf("%s: x has %d values, not a multiple of dim %d", what, len(x), m.dim)
	}
	for i, v := range x {
		if v-v != 0 { // NaN or ±Inf
			return 0, fmt.Errorf("%s: x row %d, column %d: value %v is not finite", what, i/m.dim, i%m.dim, v)
		}
	}
	return len(x) / m.dim, nil
}

func checkLen(what, name string, got, want int, per string) error {
	if got != want {
		return fmt.Errorf("%s: %s has %d values, want %d (%s)", what, name, got, want, per)
	}
	return nil
}

// LogDensity sets out[i] = log Σ_k w_k f_k(x_i) for every row x_i of the
// row-major matrix x (Dim columns). len(out) must equal the number of rows.
// Rows must be finite.
func (m *Model) LogDensity(x, out []float64) error {
	const what = "log-density"
	rows, err := m.rowsOf(what, x)
	if err != nil {
		return err
	}
	if err := checkLen(what, "out", len(out), rows, "one per row"); err != nil {
		return err
	}
	m.run(&job{op: opLogDensity, x: x, rows: rows, out: out})
	return nil
}

// ComponentLogDensity sets out[i*K+k] = log f_k(x_i), the log-density of row i
// under component k alone (weight not included). len(out) must be rows×K.
func (m *Model) ComponentLogDensity(x, out []float64) error {
	const what = "component log-density"
	rows, err := m.rowsOf(what, x)
	if err != nil {
		return err
	}
	if err := checkLen(what, "out", len(out), rows*m.k, "rows × components"); err != nil {
		return err
	}
	m.run(&job{op: opComponent, x: x, rows: rows, out: out})
	return nil
}

// Mahalanobis sets out[i*K+k] to the squared Mahalanobis distance
// (x_i−μ_k)ᵀ Σ_k⁻¹ (x_i−μ_k) of row i from component k. len(out) must be
// rows×K. A distance too large for float64 is +Inf.
func (m *Model) Mahalanobis(x, out []float64) error {
	const what = "mahalanobis"
	rows, err := m.rowsOf(what, x)
	if err != nil {
		return err
	}
	if err := checkLen(what, "out", len(out), rows*m.k, "rows × components"); err != nil {
		return err
	}
	m.run(&job{op: opMahalanobis, x: x, rows: rows, out: out})
	return nil
}

// Posteriors computes, for every row, the log-density (logDens[i]) and the
// posterior probabilities of the components, as logarithms
// (logPost[i*K+k] = log w_k + log f_k(x_i) − logDens[i], by log-sum-exp) and
// as probabilities (post = exp(logPost)). Any output may be nil; a non-nil
// one must have rows (logDens) or rows×K values. A row so far from every
// component that every weighted density underflows (log-density −Inf) gets
// equal posteriors over the components of positive weight.
func (m *Model) Posteriors(x, logDens, post, logPost []float64) error {
	const what = "posteriors"
	rows, err := m.rowsOf(what, x)
	if err != nil {
		return err
	}
	if logDens != nil {
		if err := checkLen(what, "logDens", len(logDens), rows, "one per row"); err != nil {
			return err
		}
	}
	if post != nil {
		if err := checkLen(what, "post", len(post), rows*m.k, "rows × components"); err != nil {
			return err
		}
	}
	if logPost != nil {
		if err := checkLen(what, "logPost", len(logPost), rows*m.k, "rows × components"); err != nil {
			return err
		}
	}
	m.run(&job{op: opPosteriors, x: x, rows: rows, out: logDens, post: post, logPost: logPost})
	return nil
}

// Assign sets labels[i] to the component with the largest posterior
// probability for row i (the largest w_k f_k(x_i); ties go to the lowest
// index) and, when maxPost is non-nil, maxPost[i] to that probability.
func (m *Model) Assign(x []float64, labels []int, maxPost []float64) error {
	const what = "assign"
	rows, err := m.rowsOf(what, x)
	if err != nil {
		return err
	}
	if err := checkLen(what, "labels", len(labels), rows, "one per row"); err != nil {
		return err
	}
	if maxPost != nil {
		if err := checkLen(what, "maxPost", len(maxPost), rows, "one per row"); err != nil {
			return err
		}
	}
	m.run(&job{op: opAssign, x: x, rows: rows, labels: labels, maxPost: maxPost})
	return nil
}

// LogLikelihood returns Σ_i weights[i]·log p(x_i); weights nil means every
// weight is 1, otherwise it needs one finite, non-negative weight per row
// (rows of weight 0 contribute nothing). The sum is taken over fixed blocks of
// ChunkRows rows in row order and then over the block sums in order, so it is
// bit-identical for any GOMAXPROCS. It is −Inf when a row of positive weight
// has density 0 in float64.
func (m *Model) LogLikelihood(x, weights []float64) (float64, error) {
	const what = "log-likelihood"
	rows, err := m.rowsOf(what, x)
	if err != nil {
		return 0, err
	}
	if weights != nil {
		if err := checkLen(what, "weights", len(weights), rows, "one per row"); err != nil {
			return 0, err
		}
		for i, w := range weights {
			if !(w >= 0) || math.IsInf(w, 1) {
				return 0, fmt.Errorf("%s: weights[%d] = %v must be finite and non-negative", what, i, w)
			}
		}
	}
	return m.run(&job{op: opLogLikelihood, x: x, rows: rows, weights: weights}), nil
}

// run evaluates j over all its rows, in parallel for large batches, and
// returns the log-likelihood (opLogLikelihood; 0 otherwise).
func (m *Model) run(j *job) float64 {
	nchunks := (j.rows + ChunkRows - 1) / ChunkRows
	workers := runtime.GOMAXPROCS(0)
	if j.rows < ParallelMinRows || workers < 2 {
		ws := m.pool.Get().(*workspace)
		total := 0.0
		for c := 0; c < nchunks; c++ {
			total += m.chunk(ws, j, c)
		}
		m.pool.Put(ws)
		return total
	}
	workers = min(workers, nchunks)
	jc := *j
	sums := make([]float64, nchunks)
	var next atomic.Int64
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Go(func() {
			ws := m.pool.Get().(*workspace)
			defer m.pool.Put(ws)
			for {
				c := int(next.Add(1) - 1)
				if c >= nchunks {
					return
				}
				sums[c] = m.chunk(ws, &jc, c)
			}
		})
	}
	wg.Wait()
	total := 0.0
	for _, s := range sums {
		total += s
	}
	return total
}

// chunk evaluates rows [c·ChunkRows, (c+1)·ChunkRows) of j and returns their
// (weighted) log-likelihood, summed in row order, for opLogLikelihood.
func (m *Model) chunk(ws *workspace, j *job, c int) float64 {
	lo := c * ChunkRows
	hi := min(lo+ChunkRows, j.rows)
	d, k := m.dim, m.k
	sum := 0.0
	for b := lo; b < hi; b += blockRows {
		n := min(blockRows, hi-b)
		xb := j.x[b*d : (b+n)*d]
		switch j.op {
		case opMahalanobis:
			m.distances(ws, xb, n, j.out[b*k:(b+n)*k])
			continue
		case opComponent:
			m.componentLogs(ws, xb, n, j.out[b*k:(b+n)*k])
			continue
		}
		comp := ws.comp[:n*k]
		m.componentLogs(ws, xb, n, comp)
		m.blockLogSumExp(ws, comp, n)
		if j.op == opPosteriors {
			m.posteriorBlock(ws, j, b, n)
			continue
		}
		for r := 0; r < n; r++ {
			i := b + r
			mx, logS := ws.mx[r], ws.logS[r]
			ld := logS + mx
			switch j.op {
			case opLogDensity:
				j.out[i] = ld
			case opLogLikelihood:
				if j.weights == nil {
					sum += ld
				} else if w := j.weights[i]; w != 0 {
					sum += w * ld
				}
			case opAssign:
				row := comp[r*k : (r+1)*k]
				best := 0
				for a := 1; a < k; a++ {
					if row[a] > row[best] {
						best = a
					}
				}
				lp := (row[best] - mx) - logS
				if math.IsInf(mx, -1) {
					best = m.farLabel
					lp = m.farLogPost[best]
				}
				j.labels[i] = best
				if j.maxPost != nil {
					j.maxPost[i] = math.Exp(lp)
				}
			}
		}
	}
	return sum
}

// blockLogSumExp adds the log weights to the n rows of comp (K values per
// row) and sets ws.mx[r] and ws.logS[r] to what logSumExpParts returns for
// row r, with the same arithmetic (the exponentials of a whole block are
// taken by expInto, which returns math.Exp's values bit for bit).
func (m *Model) blockLogSumExp(ws *workspace, comp []float64, n int) {
	k := m.k
	t := ws.t[:n*k]
	for r := 0; r < n; r++ {
		row := comp[r*k : (r+1)*k]
		for a, lw := range m.logW {
			row[a] += lw
		}
		mx := row[0]
		for _, v := range row[1:] {
			if v > mx {
				mx = v
			}
		}
		ws.mx[r] = mx
		tr := t[r*k : (r+1)*k]
		if math.IsInf(mx, 0) {
			clear(tr)
			continue
		}
		for a, v := range row {
			tr[a] = v - mx
		}
	}
	ex := ws.ex[:n*k]
	expInto(ex, t)
	for r := 0; r < n; r++ {
		if math.IsInf(ws.mx[r], 0) {
			ws.logS[r] = 0
			continue
		}
		sum := 0.0
		er := ex[r*k : (r+1)*k]
		for a, e := range t[r*k : (r+1)*k] {
			// The two shortcuts add exactly what math.Exp would return.
			switch {
			case e == 0:
				sum++
			case e < expUnderflow: // exp(e) is +0
			default:
				sum += er[a]
			}
		}
		ws.logS[r] = math.Log(sum)
	}
}

// posteriorBlock writes the outputs of Posteriors for the n rows from b on,
// after blockLogSumExp: log-posteriors (v − mx) − logS (the uniform
// far-row values when every density underflowed) and their exponentials.
func (m *Model) posteriorBlock(ws *workspace, j *job, b, n int) {
	k := m.k
	comp := ws.comp[:n*k]
	lp := ws.t[:n*k]
	for r := 0; r < n; r++ {
		mx, logS := ws.mx[r], ws.logS[r]
		if j.out != nil {
			j.out[b+r] = logS + mx
		}
		lr := lp[r*k : (r+1)*k]
		if math.IsInf(mx, -1) {
			copy(lr, m.farLogPost)
			continue
		}
		for a, v := range comp[r*k : (r+1)*k] {
			lr[a] = (v - mx) - logS
		}
	}
	if j.logPost != nil {
		copy(j.logPost[b*k:(b+n)*k], lp)
	}
	if j.post != nil {
		expInto(j.post[b*k:(b+n)*k], lp)
	}
}

// logSumExpParts returns the maximum of s and log Σ exp(s_k − max), so that
// log Σ exp(s_k) = logS + max with the arithmetic of gonum's
// floats.LogSumExp (sum of exp(s_k − max) in order, log, add the maximum):
// the results are bit-identical (tested). When the
// maximum is −Inf (every term is zero) it returns (−Inf, 0). Posteriors are
// formed as (s_k − max) − logS, which stays accurate when max is so large
// that adding logS to it would be absorbed by rounding.
func logSumExpParts(s []float64) (mx, logS float64) {
	mx = s[0]
	for _, v := range s[1:] {
		if v > mx {
			mx = v
		}
	}
	if math.IsInf(mx, 0) {
		return mx, 0
	}
	sum := 0.0
	for _, v := range s {
		// The two shortcuts add exactly what math.Exp would return.
		switch e := v - mx; {
		case e == 0:
			sum++
		case e < expUnderflow: // exp(e) is +0
		default:
			sum += math.Exp(e)
		}
	}
	return mx, math.Log(sum)
}

// componentLogs sets out[r*K+k] = log f_k(x_r) for the n rows of xb.
func (m *Model) componentLogs(ws *workspace, xb []float64, n int, out []float64) {
	k := m.k
	d2 := ws.d2[:n]
	for c := 0; c < k; c++ {
		m.whiten(ws, xb, n, c)
		ln := m.logNorm[c]
		if m.family == Gaussian {
			for r, v := range d2 {
				out[r*k+c] = ln - 0.5*v
			}
			continue
		}
		hvp, inv, logv, sc := m.halfVP[c], m.invDF[c], m.logDF[c], m.smallC[c]
		for r, v := range d2 {
			out[r*k+c] = ln - studentKernel(v, hvp, inv, logv, sc)
		}
	}
}

// studentKernel returns ((ν+D)/2)·log(1 + δ²/ν) without underflow or overflow
// for any ν > 0: a three-term series of log1p for tiny δ²/ν, log1p for
// ordinary values, and log δ² − log ν when δ²/ν overflows (including when
// 1/ν itself overflows, for ν below 1/MaxFloat64).
func studentKernel(d2, halfVP, invDF, logDF, smallC float64) float64 {
	u := d2 * invDF
	switch {
	case d2 == 0: // also when 1/ν overflowed (ν below 1/MaxFloat64)
		return 0
	case u < smallRatio:
		// ((ν+D)/2)·(u − u²/2 + u³/3) = ((ν+D)/(2ν))·δ²·(1 − u/2 + u²/3).
		return smallC * d2 * (1 - u*(0.5-u*(1.0/3)))
	case u <= math.MaxFloat64:
		return halfVP * math.Log1p(u)
	default:
		return halfVP * (math.Log(d2) - logDF)
	}
}

// distances sets out[r*K+k] to the squared Mahalanobis distance of row r of
// xb from component k.
func (m *Model) distances(ws *workspace, xb []float64, n int, out []float64) {
	k := m.k
	for c := 0; c < k; c++ {
		m.whiten(ws, xb, n, c)
		for r, v := range ws.d2[:n] {
			out[r*k+c] = v
		}
	}
}

// whiten solves L y = x_r − μ_c by forward substitution for the n rows of xb,
// column by column over the block (whitenColumn: each column is a sequence
// of axpy updates over the n rows, four rows per instruction with AVX2), and
// leaves δ²_r = |y_r|² in ws.d2[:n]. Every row goes through the same
// operations in the same order whatever block it is in and whichever kernel
// runs. A distance that overflows (or whose computation produces NaN
// through overflow) is +Inf.
func (m *Model) whiten(ws *workspace, xb []float64, n, c int) {
	d := m.dim
	mu := m.means[c*d : (c+1)*d]
	l := m.factor(c)
	inv := m.invDiag[c*d : (c+1)*d]
	y := ws.y
	d2 := ws.d2[:n]
	for r := 0; r < n; r++ {
		xr := xb[r*d : (r+1)*d]
		for i, v := range xr {
			y[i*blockRows+r] = v - mu[i]
		}
	}
	dense := m.dense[c]
	for i := 0; i < d; i++ {
		var li []float64
		if dense {
			li = l[packedRow(i) : packedRow(i)+i]
		}
		whitenColumn(y[i*blockRows:i*blockRows+n], y, li, n, inv[i], d2, i == 0)
	}
	for r, v := range d2 {
		if v != v {
			d2[r] = math.Inf(1)
		}
	}
}
