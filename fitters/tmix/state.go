package tmix

import (
	"fmt"
	"math"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

// state is one set of Student-t mixture parameters in the flat layout used
// by the passes, with its factorisation.
type state struct {
	k, d      int
	structure mixture.Structure
	weight    []float64 // K
	mean      []float64 // K×D
	// cov holds nCov scale matrices of covLen each (nCov is 1 for tied, K
	// otherwise).
	cov []float64
	// chol holds, for full and tied, the packed lower Cholesky factors of
	// cov; invd holds 1/L_jj (full, tied) or 1/sd_j (diagonal, spherical),
	// nCov×D.
	chol   []float64
	invd   []float64
	logDet []float64 // nCov
	df     []float64 // K: degrees of freedom ν_k
	// logConst[k] = log w_k + log Γ((ν+D)/2) − log Γ(ν/2) − (D/2) log(νπ) − ½ log|Σ_k|.
	logConst []float64
}

func newState(k, d int, s mixture.Structure) *state {
	nc := k
	if s == mixture.Tied {
		nc = 1
	}
	cl := covLen(s, d)
	st := &state{
		k: k, d: d, structure: s,
		weight:   make([]float64, k),
		mean:     make([]float64, k*d),
		cov:      make([]float64, nc*cl),
		invd:     make([]float64, nc*d),
		logDet:   make([]float64, nc),
		df:       make([]float64, k),
		logConst: make([]float64, k),
	}
	if s == mixture.Full || s == mixture.Tied {
		st.chol = make([]float64, nc*cl)
	}
	return st
}

func (st *state) nCov() int { return len(st.logDet) }

// covIndex is the stored scale matrix of component k.
func (st *state) covIndex(k int) int {
	if st.structure == mixture.Tied {
		return 0
	}
	return k
}

// covOf returns stored scale matrix c.
func (st *state) covOf(c int) []float64 {
	cl := covLen(st.structure, st.d)
	return st.cov[c*cl : (c+1)*cl]
}

// factorOne factorises one stored scale matrix into chol (full, tied) and
// invd, returning the log-determinant, or a reason why the matrix is not
// acceptable ("" when it is). A matrix is acceptable when every
// (conditional) variance exceeds the variance floor and, for full matrices,
// mixture.CheckCovariance accepts it, so mixture.New will too.
func (p *problem) factorOne(cov, chol, invd []float64) (float64, string) {
	d := p.d
	var logDet float64
	switch p.cfg.structure {
	case mixture.Full, mixture.Tied:
		off := 0
		for j := 0; j < d; j++ {
			lj := chol[off : off+j+1]
			roff := 0
			for l := 0; l <= j; l++ {
				ll := chol[roff : roff+l]
				s := cov[off+l]
				for m := range ll {
					s -= lj[m] * ll[m]
				}
				if l < j {
					lj[l] = s * invd[l]
				} else {
					if math.IsInf(s, 0) || !(s > p.floor[j]) {
						return 0, fmt.Sprintf("conditional variance %.3g of feature %d is not above the floor %.3g", s, j, p.floor[j])
					}
					r := math.Sqrt(s)
					lj[j] = r
					invd[j] = 1 / r
					logDet += 2 * math.Log(r)
				}
				roff += l + 1
			}
			off += j + 1
		}
		if err := mixture.CheckCovariance(unpack(cov, d), d); err != nil {
			return 0, err.Error()
		}
	default:
		for j := 0; j < d; j++ {
			v := cov[j]
			if math.IsInf(v, 0) || !(v > p.floor[j]) {
				return 0, fmt.Sprintf("variance %.3g of feature %d is not above the floor %.3g", v, j, p.floor[j])
			}
			invd[j] = 1 / math.Sqrt(v)
			logDet += math.Log(v)
		}
	}
	if math.IsNaN(logDet) || math.IsInf(logDet, 0) {
		return 0, fmt.Sprintf("log-determinant %v is not finite", logDet)
	}
	return logDet, ""
}

// factorCov factorises stored scale matrix c of st.
func (p *problem) factorCov(st *state, c int) string {
	cl := covLen(st.structure, st.d)
	var chol []float64
	if st.chol != nil {
		chol = st.chol[c*cl : (c+1)*cl]
	}
	ld, why := p.factorOne(st.cov[c*cl:(c+1)*cl], chol, st.invd[c*st.d:(c+1)*st.d])
	if why == "" {
		st.logDet[c] = ld
	}
	return why
}

// logNorm is the log normalising constant of component k without its weight.
func (st *state) logNorm(k int) float64 {
	return mixture.LogNormalizer(mixture.StudentT, st.d, st.df[k], st.logDet[st.covIndex(k)])
}

// setLogConst recomputes the per-component constants from weights, degrees
// of freedom and log-determinants.
func (st *state) setLogConst() {
	for k := 0; k < st.k; k++ {
		st.logConst[k] = math.Log(st.weight[k]) + st.logNorm(k)
	}
}

// unpack expands a packed lower triangle into a full symmetric d×d matrix.
func unpack(packed []float64, d int) []float64 {
	out := make([]float64, d*d)
	off := 0
	for j := 0; j < d; j++ {
		for l := 0; l <= j; l++ {
			out[j*d+l] = packed[off+l]
			out[l*d+j] = packed[off+l]
		}
		off += j + 1
	}
	return out
}

// params converts st into model parameters with full d×d scale matrices.
func (st *state) params() mixture.Params {
	d := st.d
	p := mixture.Params{
		Dim:        d,
		Family:     mixture.StudentT,
		Structure:  st.structure,
		Components: make([]mixture.Component, st.k),
	}
	for k := 0; k < st.k; k++ {
		c := st.covIndex(k)
		var cov []float64
		if st.structure == mixture.Full || st.structure == mixture.Tied {
			cov = unpack(st.covOf(c), d)
		} else {
			cov = make([]float64, d*d)
			for j, v := range st.covOf(c) {
				cov[j*d+j] = v
			}
		}
		p.Components[k] = mixture.Component{
			Weight: st.weight[k],
			Mean:   append([]float64(nil), st.mean[k*d:(k+1)*d]...),
			Cov:    cov,
			DF:     st.df[k],
		}
	}
	return p
}

// fromParams builds a state from validated caller parameters, used as
// given; the degrees of freedom come from the configuration (see
// config.startDF).
func (p *problem) fromParams(mp *mixture.Params) (*state, error) {
	d := p.d
	k := len(mp.Components)
	st := newState(k, d, p.cfg.structure)
	for i, c := range mp.Components {
		st.weight[i] = c.Weight
		copy(st.mean[i*d:], c.Mean)
	}
	copy(st.df, p.cfg.startDF(k, mp))
	for c := 0; c < st.nCov(); c++ {
		src := mp.Components[c].Cov
		dst := st.covOf(c)
		switch st.structure {
		case mixture.Full, mixture.Tied:
			off := 0
			for j := 0; j < d; j++ {
				for l := 0; l <= j; l++ {
					dst[off+l] = 0.5 * (src[j*d+l] + src[l*d+j])
				}
				off += j + 1
			}
		default:
			for j := 0; j < d; j++ {
				dst[j] = src[j*d+j]
			}
		}
		if why := p.factorCov(st, c); why != "" {
			return nil, fitters.Errorf(fitters.FailedPrecondition, "start: component %d scale matrix is not usable: %s", c, why)
		}
	}
	st.setLogConst()
	return st, nil
}

// fromLabels builds a starting state from a hard assignment of rows to
// components: weights are the components' shares of the total weight, means
// and scale matrices their weighted sample moments plus ridge, degrees of
// freedom the starting value. A component with fewer effective rows than the
// collapse threshold, or whose matrix is not acceptable, starts from the
// data covariance (plus ridge) instead. It returns an error naming a
// component that has no rows of positive weight.
func (p *problem) fromLabels(labels []int, k int) (*state, error) {
	d := p.d
	st := newState(k, d, p.cfg.structure)
	copy(st.df, p.cfg.startDF(k, nil))
	nk := make([]float64, k)
	for i := 0; i < p.n; i++ {
		wi := p.rowWeight(i)
		if wi == 0 {
			continue
		}
		l := labels[i]
		nk[l] += wi
		mu := st.mean[l*d : (l+1)*d]
		for j, v := range p.row(i) {
			mu[j] += wi * v
		}
	}
	for l := 0; l < k; l++ {
		if nk[l] == 0 {
			return nil, fitters.Errorf(fitters.InvalidArgument, "labels: component %d has no rows with positive weight", l)
		}
		for j := 0; j < d; j++ {
			st.mean[l*d+j] /= nk[l]
		}
		st.weight[l] = nk[l] / p.iwsum
	}
	// Scatter about the means (two passes for accuracy).
	full := st.structure == mixture.Full || st.structure == mixture.Tied
	cl := covLen(st.structure, d)
	scat := make([]float64, k*cl)
	dev := make([]float64, d)
	for i := 0; i < p.n; i++ {
		wi := p.rowWeight(i)
		if wi == 0 {
			continue
		}
		l := labels[i]
		mu := st.mean[l*d : (l+1)*d]
		for j, v := range p.row(i) {
			dev[j] = v - mu[j]
		}
		s := scat[l*cl : (l+1)*cl]
		if full {
			off := 0
			for j := 0; j < d; j++ {
				wd := wi * dev[j]
				for m := 0; m <= j; m++ {
					s[off+m] += wd * dev[m]
				}
				off += j + 1
			}
		} else {
			for j := 0; j < d; j++ {
				s[j] += wi * dev[j] * dev[j]
			}
		}
	}
	if st.structure == mixture.Tied {
		dst := st.covOf(0)
		for l := 0; l < k; l++ {
			for t := range dst {
				dst[t] += scat[l*cl+t]
			}
		}
		p.finishCov(dst, p.iwsum)
		if why := p.factorCov(st, 0); why != "" {
			copy(dst, p.fallback)
			if why := p.factorCov(st, 0); why != "" {
				return nil, fitters.Errorf(fitters.Internal, "tmix: fallback scale matrix rejected: %s", why)
			}
		}
	} else {
		for l := 0; l < k; l++ {
			dst := st.covOf(l)
			copy(dst, scat[l*cl:(l+1)*cl])
			p.finishCov(dst, nk[l])
			if p.effRows(nk[l]) < p.cfg.minRows || p.factorCov(st, l) != "" {
				copy(dst, p.fallback)
				if why := p.factorCov(st, l); why != "" {
					return nil, fitters.Errorf(fitters.Internal, "tmix: fallback scale matrix rejected: %s", why)
				}
			}
		}
	}
	st.setLogConst()
	return st, nil
}

// finishCov turns a scatter (packed lower for full/tied, squared deviations
// for diagonal/spherical) into a scale matrix: divides by total, averages
// the spherical variances and adds the ridge.
func (p *problem) finishCov(c []float64, total float64) {
	d := p.d
	switch p.cfg.structure {
	case mixture.Full, mixture.Tied:
		for t := range c {
			c[t] /= total
		}
		for j := 0; j < d; j++ {
			c[tri(j)+j] += p.cfg.ridge[j]
		}
	case mixture.Diagonal:
		for j := range c {
			c[j] = c[j]/total + p.cfg.ridge[j]
		}
	case mixture.Spherical:
		var s float64
		for _, v := range c {
			s += v
		}
		v := s/total/float64(d) + p.cfg.ridge[0]
		for j := range c {
			c[j] = v
		}
	}
}

// effRows converts an internal weight total into effective rows: the share
// of the total weight times the number of rows with positive weight.
func (p *problem) effRows(nk float64) float64 {
	return nk / p.iwsum * float64(p.nPos)
}
