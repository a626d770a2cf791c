package em

import (
	"math"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

// problem is the validated training data plus what every restart shares.
type problem struct {
	n, d int
	x    []float64 // row-major, the caller's slice (never written)
	// w is the caller's weights (nil for unit weights); iw the internal
	// weights w/max(w), so that no weighted sum can overflow.
	w, iw []float64
	// wscale is max(w): caller log-likelihood = wscale × internal one.
	wscale float64
	wsum   float64 // Σ w (caller scale); n when unweighted
	iwsum  float64 // Σ iw
	nPos   int     // rows with positive internal weight

	dataMean []float64 // weighted mean per feature
	dataVar  []float64 // weighted (maximum-likelihood) variance per feature
	dataCov  []float64 // weighted covariance, packed lower triangle
	scale    []float64 // 1/sd per feature, for seeding distances

	cfg      *config
	fallback []float64 // structure-shaped data covariance + ridge (see covLen)
	floor    []float64 // VarianceFloor × dataVar
}

// tri is the length of a packed lower triangle of a d×d matrix.
func tri(d int) int { return d * (d + 1) / 2 }

// newProblem validates the data matrix and weights and computes the
// per-feature statistics.
func newProblem(data fitters.Data) (*problem, error) {
	switch {
	case data.Rows < 1:
		return nil, fitters.Errorf(fitters.InvalidArgument, "data: no rows (rows is %d)", data.Rows)
	case data.Cols < 1:
		return nil, fitters.Errorf(fitters.InvalidArgument, "data: no columns (cols is %d)", data.Cols)
	case data.Rows > math.MaxInt/data.Cols || len(data.Values) != data.Rows*data.Cols:
		return nil, fitters.Errorf(fitters.InvalidArgument, "data: %d values for %d rows x %d columns", len(data.Values), data.Rows, data.Cols)
	}
	n, d := data.Rows, data.Cols
	for i, v := range data.Values {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fitters.Errorf(fitters.InvalidArgument, "data: row %d column %d is %v (values must be finite)", i/d, i%d, v)
		}
		if math.Abs(v) > MaxAbsValue {
			return nil, fitters.Errorf(fitters.InvalidArgument, "data: row %d column %d is %g, beyond the supported magnitude %g", i/d, i%d, v, MaxAbsValue)
		}
	}
	p := &problem{n: n, d: d, x: data.Values}
	if data.Weights != nil {
		if len(data.Weights) != n {
			return nil, fitters.Errorf(fitters.InvalidArgument, "weights: %d weights for %d rows", len(data.Weights), n)
		}
		var maxw float64
		for i, v := range data.Weights {
			if math.IsNaN(v) || math.IsInf(v, 0) || v < 0 {
				return nil, fitters.Errorf(fitters.InvalidArgument, "weights: row %d has weight %v (weights must be finite and non-negative)", i, v)
			}
			if v > MaxWeight {
				return nil, fitters.Errorf(fitters.InvalidArgument, "weights: row %d has weight %g, beyond the supported maximum %g", i, v, MaxWeight)
			}
			maxw = math.Max(maxw, v)
		}
		if maxw == 0 {
			return nil, fitters.Errorf(fitters.InvalidArgument, "weights: every weight is zero")
		}
		p.w = data.Weights
		p.iw = make([]float64, n)
		p.wscale = maxw
		for i, v := range data.Weights {
			p.iw[i] = v / maxw
			p.iwsum += p.iw[i]
			p.wsum += v
			if p.iw[i] > 0 {
				p.nPos++
			}
		}
		if math.IsInf(p.wsum, 0) {
			return nil, fitters.Errorf(fitters.InvalidArgument, "weights: their sum overflows")
		}
	} else {
		p.wscale = 1
		p.wsum = float64(n)
		p.iwsum = float64(n)
		p.nPos = n
	}

	// Weighted mean, then centred (co)variances: two passes for accuracy.
	p.dataMean = make([]float64, d)
	for i := 0; i < n; i++ {
		wi := p.rowWeight(i)
		if wi == 0 {
			continue
		}
		row := p.x[i*d : (i+1)*d]
		for j, v := range row {
			p.dataMean[j] += wi * v
		}
	}
	for j := range p.dataMean {
		p.dataMean[j] /= p.iwsum
	}
	p.dataCov = make([]float64, tri(d))
	dev := make([]float64, d)
	for i := 0; i < n; i++ {
		wi := p.rowWeight(i)
		if wi == 0 {
			continue
		}
		row := p.x[i*d : (i+1)*d]
		for j, v := range row {
			dev[j] = v - p.dataMean[j]
		}
		off := 0
		for j := 0; j < d; j++ {
			wd := wi * dev[j]
			for l := 0; l <= j; l++ {
				p.dataCov[off+l] += wd * dev[l]
			}
			off += j + 1
		}
	}
	for i := range p.dataCov {
		p.dataCov[i] /= p.iwsum
	}
	p.dataVar = make([]float64, d)
	p.scale = make([]float64, d)
	for j := 0; j < d; j++ {
		v := p.dataCov[tri(j)+j]
		var maxAbs float64
		for i := 0; i < n; i++ {
			if p.rowWeight(i) > 0 {
				maxAbs = math.Max(maxAbs, math.Abs(p.x[i*d+j]))
			}
		}
		sd := math.Sqrt(v)
		if !(v > 1e-280) || sd <= 1e-12*maxAbs {
			return nil, fitters.Errorf(fitters.FailedPrecondition, "data: column %d is constant (standard deviation %g over rows with positive weight); drop it", j, sd)
		}
		p.dataVar[j] = v
		p.scale[j] = 1 / sd
	}
	return p, nil
}

// rowWeight is the internal weight of row i.
func (p *problem) rowWeight(i int) float64 {
	if p.iw == nil {
		return 1
	}
	return p.iw[i]
}

// distinctAtLeast returns min(limit, number of distinct rows with positive
// weight). It stops as soon as limit distinct rows are found.
func (p *problem) distinctAtLeast(limit int) int {
	seen := make(map[string]struct{}, min(limit, p.n))
	key := make([]byte, 8*p.d)
	for i := 0; i < p.n && len(seen) < limit; i++ {
		if p.rowWeight(i) == 0 {
			continue
		}
		for j, v := range p.x[i*p.d : (i+1)*p.d] {
			b := math.Float64bits(v + 0) // +0 folds -0 into 0
			for t := 0; t < 8; t++ {
				key[8*j+t] = byte(b >> (8 * t))
			}
		}
		seen[string(key)] = struct{}{}
	}
	return len(seen)
}

// covLen is the length of one stored covariance for a structure: a packed
// lower triangle for full and tied, D variances for diagonal and spherical.
func covLen(s mixture.Structure, d int) int {
	if s == mixture.Full || s == mixture.Tied {
		return tri(d)
	}
	return d
}

// prepare computes what depends on the settings: the variance floors and
// the fallback covariance used by the collapse policy, which must itself be
// acceptable.
func (p *problem) prepare(cfg *config) error {
	p.cfg = cfg
	p.floor = make([]float64, p.d)
	for j, v := range p.dataVar {
		p.floor[j] = VarianceFloor * v
	}
	p.fallback = make([]float64, covLen(cfg.structure, p.d))
	switch cfg.structure {
	case mixture.Full, mixture.Tied:
		copy(p.fallback, p.dataCov)
		for j := 0; j < p.d; j++ {
			p.fallback[tri(j)+j] += cfg.ridge[j]
		}
	case mixture.Diagonal:
		for j := range p.fallback {
			p.fallback[j] = p.dataVar[j] + cfg.ridge[j]
		}
	case mixture.Spherical:
		mv := meanOf(p.dataVar) + cfg.ridge[0]
		for j := range p.fallback {
			p.fallback[j] = mv
		}
	}
	white := make([]float64, len(p.fallback))
	invd := make([]float64, p.d)
	if _, why := p.factorOne(p.fallback, white, invd); why != "" {
		return fitters.Errorf(fitters.FailedPrecondition,
			"data: the covariance of the data (plus ridge) is unusable: %s; the features are (nearly) linearly dependent: drop a redundant column or use a positive ridge", why)
	}
	return nil
}
