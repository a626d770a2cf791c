// Package layout is the parameter layout and collapse policy shared by the
// em (Gaussian) and tmix (Student-t) fitters, which iterate on the same
// kind of state: K weights, K means and the covariance (em) or scale (tmix)
// matrices of a structure, stored flat, with their Cholesky factorisations.
//
// A matrix is stored as a packed lower triangle (Tri(D) values) for the full
// and tied structures and as D variances for the diagonal and spherical
// ones; the tied structure stores one matrix for all components. A Frame
// holds what the state operations need to know about the data and the
// settings: the ridge, the variance floors, the smallest effective row count
// of a component and the fallback matrix (the data covariance plus ridge)
// that replaces a collapsed component's.
//
// What the two fitters do differently stays with them: the degrees of
// freedom and log-normalising constants, the E-step, and the weighted
// scatter of the M-step (tmix weights rows by their latent scale). Frame.Noun
// and Frame.Who keep each fitter's words in its messages.
package layout

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/internal/prep"
	"github.com/mixd-dev/mixd/fitters/internal/seed"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

// Len is the length of one stored matrix for a structure: a packed lower
// triangle for full and tied, D variances for diagonal and spherical.
func Len(s mixture.Structure, d int) int {
	if s == mixture.Full || s == mixture.Tied {
		return prep.Tri(d)
	}
	return d
}

// State is one set of mixture parameters in the flat layout, with the
// factorisation of its matrices.
type State struct {
	K, D      int
	Structure mixture.Structure
	Weight    []float64 // K
	Mean      []float64 // K×D
	// Cov holds NCov() matrices of Len(Structure, D) each (one for tied, K
	// otherwise).
	Cov []float64
	// Chol holds, for full and tied, the packed lower Cholesky factor L of
	// each matrix (Σ = L Lᵀ); White, when asked for, its packed lower
	// inverse U = L⁻¹, so that a squared Mahalanobis distance is |U (x−μ)|².
	// Both are nil for diagonal and spherical.
	Chol, White []float64
	// InvD holds, NCov()×D, 1/L_jj (full, tied) or 1/sd_j (diagonal, spherical).
	InvD   []float64
	LogDet []float64 // NCov()
}

// NewState allocates a zero State of k components for d features; whiten
// asks for White as well as Chol.
func NewState(k, d int, s mixture.Structure, whiten bool) State {
	nc := k
	if s == mixture.Tied {
		nc = 1
	}
	cl := Len(s, d)
	st := State{
		K: k, D: d, Structure: s,
		Weight: make([]float64, k),
		Mean:   make([]float64, k*d),
		Cov:    make([]float64, nc*cl),
		InvD:   make([]float64, nc*d),
		LogDet: make([]float64, nc),
	}
	if s == mixture.Full || s == mixture.Tied {
		st.Chol = make([]float64, nc*cl)
		if whiten {
			st.White = make([]float64, nc*cl)
		}
	}
	return st
}

// NCov is the number of stored matrices.
func (st *State) NCov() int { return len(st.LogDet) }

// CovIndex is the stored matrix of component k.
func (st *State) CovIndex(k int) int {
	if st.Structure == mixture.Tied {
		return 0
	}
	return k
}

// CovOf returns stored matrix c.
func (st *State) CovOf(c int) []float64 {
	cl := Len(st.Structure, st.D)
	return st.Cov[c*cl : (c+1)*cl]
}

// Params converts st into model parameters of the family with full d×d
// matrices; df, when non-nil, gives every component's degrees of freedom.
func (st *State) Params(family mixture.Family, df []float64) mixture.Params {
	d := st.D
	p := mixture.Params{
		Dim:        d,
		Family:     family,
		Structure:  st.Structure,
		Components: make([]mixture.Component, st.K),
	}
	for k := 0; k < st.K; k++ {
		c := st.CovIndex(k)
		var cov []float64
		if st.Structure == mixture.Full || st.Structure == mixture.Tied {
			cov = Unpack(st.CovOf(c), d)
		} else {
			cov = make([]float64, d*d)
			for j, v := range st.CovOf(c) {
				cov[j*d+j] = v
			}
		}
		p.Components[k] = mixture.Component{
			Weight: st.Weight[k],
			Mean:   append([]float64(nil), st.Mean[k*d:(k+1)*d]...),
			Cov:    cov,
		}
		if df != nil {
			p.Components[k].DF = df[k]
		}
	}
	return p
}

// NormaliseWeights rescales the weights to sum to 1.
func (st *State) NormaliseWeights() {
	var s float64
	for _, w := range st.Weight {
		s += w
	}
	for c := range st.Weight {
		st.Weight[c] /= s
	}
}

// Unpack expands a packed lower triangle into a full symmetric d×d matrix.
func Unpack(packed []float64, d int) []float64 {
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

// SubOuter subtracts s sᵀ / n from the packed lower triangle cov.
func SubOuter(cov, s []float64, n float64) {
	off := 0
	for j := range s {
		for l := 0; l <= j; l++ {
			cov[off+l] -= s[j] * s[l] / n
		}
		off += j + 1
	}
}

// invertLower writes U = L⁻¹ for the packed lower triangular L (whose
// reciprocal diagonal is invd) into u, also packed lower triangular:
// U_ii = 1/L_ii and U_ij = −(Σ_{m=j}^{i−1} L_im U_mj) / L_ii for j < i.
func invertLower(l, u, invd []float64, d int) {
	for i := 0; i < d; i++ {
		oi := prep.Tri(i)
		u[oi+i] = invd[i]
		for j := 0; j < i; j++ {
			var s float64
			for m := j; m < i; m++ {
				s += l[oi+m] * u[prep.Tri(m)+j]
			}
			u[oi+j] = -s * invd[i]
		}
	}
}

// Frame is the training data together with the settings that shape every
// State of a fit.
type Frame struct {
	prep.Summary
	// Who is the fitter's name, the prefix of its internal errors; Noun is
	// what its messages call a component's matrix ("covariance" or "scale
	// matrix").
	Who, Noun string

	// Set by Prepare.
	Structure mixture.Structure
	Ridge     []float64 // per feature
	MinRows   float64   // smallest effective row count of a component
	Floor     []float64 // per feature: the variance floor
	Fallback  []float64 // Len(Structure, D): data covariance + ridge
}

// Prepare sets the structure, ridge and smallest effective row count, the
// variance floors (floorRatio × the data's variance of each feature) and the
// fallback matrix used by the collapse policy, which must itself be
// acceptable: otherwise the features are (nearly) linearly dependent.
func (f *Frame) Prepare(s mixture.Structure, ridge []float64, minRows, floorRatio float64) error {
	f.Structure, f.Ridge, f.MinRows = s, ridge, minRows
	d := f.D
	f.Floor = make([]float64, d)
	for j, v := range f.Var {
		f.Floor[j] = floorRatio * v
	}
	f.Fallback = make([]float64, Len(s, d))
	switch s {
	case mixture.Full, mixture.Tied:
		copy(f.Fallback, f.Cov)
		for j := 0; j < d; j++ {
			f.Fallback[prep.Tri(j)+j] += ridge[j]
		}
	case mixture.Diagonal:
		for j := range f.Fallback {
			f.Fallback[j] = f.Var[j] + ridge[j]
		}
	case mixture.Spherical:
		var mv float64
		for _, v := range f.Var {
			mv += v
		}
		mv = mv/float64(len(f.Var)) + ridge[0]
		for j := range f.Fallback {
			f.Fallback[j] = mv
		}
	}
	chol := make([]float64, len(f.Fallback))
	invd := make([]float64, d)
	if _, why := f.Factor(f.Fallback, chol, invd); why != "" {
		return fitters.Errorf(fitters.FailedPrecondition,
			"data: the covariance of the data (plus ridge) is unusable: %s; the features are (nearly) linearly dependent: drop a redundant column or use a positive ridge", why)
	}
	return nil
}

// Factor factorises one stored matrix into chol (full, tied) and invd,
// returning the log-determinant, or a reason why the matrix is not
// acceptable ("" when it is). A matrix is acceptable when every
// (conditional) variance exceeds the variance floor and, for full matrices,
// mixture.CheckCovariance accepts it, so mixture.New will too.
func (f *Frame) Factor(cov, chol, invd []float64) (float64, string) {
	d := f.D
	var logDet float64
	switch f.Structure {
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
					if math.IsInf(s, 0) || !(s > f.Floor[j]) {
						return 0, fmt.Sprintf("conditional variance %.3g of feature %d is not above the floor %.3g", s, j, f.Floor[j])
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
		if err := mixture.CheckCovariance(Unpack(cov, d), d); err != nil {
			return 0, err.Error()
		}
	default:
		for j := 0; j < d; j++ {
			v := cov[j]
			if math.IsInf(v, 0) || !(v > f.Floor[j]) {
				return 0, fmt.Sprintf("variance %.3g of feature %d is not above the floor %.3g", v, j, f.Floor[j])
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

// FactorCov factorises stored matrix c of st (and whitens it when st has
// White), returning "" or the reason the matrix is not acceptable; LogDet[c]
// is set only when it is.
func (f *Frame) FactorCov(st *State, c int) string {
	cl := Len(st.Structure, st.D)
	var chol []float64
	if st.Chol != nil {
		chol = st.Chol[c*cl : (c+1)*cl]
	}
	invd := st.InvD[c*st.D : (c+1)*st.D]
	ld, why := f.Factor(st.Cov[c*cl:(c+1)*cl], chol, invd)
	if why != "" {
		return why
	}
	if st.White != nil {
		invertLower(chol, st.White[c*cl:(c+1)*cl], invd, st.D)
	}
	st.LogDet[c] = ld
	return ""
}

// Finish turns a scatter (packed lower for full and tied, squared
// deviations for diagonal and spherical) into a matrix: divides by total,
// averages the spherical variances and adds the ridge.
func (f *Frame) Finish(c []float64, total float64) {
	d := f.D
	switch f.Structure {
	case mixture.Full, mixture.Tied:
		for t := range c {
			c[t] /= total
		}
		for j := 0; j < d; j++ {
			c[prep.Tri(j)+j] += f.Ridge[j]
		}
	case mixture.Diagonal:
		for j := range c {
			c[j] = c[j]/total + f.Ridge[j]
		}
	case mixture.Spherical:
		var s float64
		for _, v := range c {
			s += v
		}
		v := s/total/float64(d) + f.Ridge[0]
		for j := range c {
			c[j] = v
		}
	}
}

// EffRows converts a relative weight total into effective rows: the share
// of the total weight times the number of rows with positive weight.
func (f *Frame) EffRows(nk float64) float64 {
	return nk / f.RelSum * float64(f.Positive)
}

// FromParams fills st (of len(mp.Components) components) from validated
// caller parameters, used as given. It fails (FailedPrecondition) when a
// matrix is not acceptable.
func (f *Frame) FromParams(st *State, mp *mixture.Params) error {
	d := f.D
	for i, c := range mp.Components {
		st.Weight[i] = c.Weight
		copy(st.Mean[i*d:], c.Mean)
	}
	for c := 0; c < st.NCov(); c++ {
		src := mp.Components[c].Cov
		dst := st.CovOf(c)
		switch st.Structure {
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
		if why := f.FactorCov(st, c); why != "" {
			return fitters.Errorf(fitters.FailedPrecondition, "start: component %d %s is not usable: %s", c, f.Noun, why)
		}
	}
	return nil
}

// FromLabels fills st from a hard assignment of rows to its st.K
// components: weights are the components' shares of the total weight,
// means and matrices their weighted sample moments plus ridge. A component
// with fewer effective rows than MinRows, or whose matrix is not acceptable,
// starts from the fallback matrix instead. It fails (InvalidArgument) naming
// a component that has no rows of positive weight.
func (f *Frame) FromLabels(st *State, labels []int) error {
	d, k := f.D, st.K
	nk := make([]float64, k)
	for i := 0; i < f.N; i++ {
		wi := f.Weight(i)
		if wi == 0 {
			continue
		}
		l := labels[i]
		nk[l] += wi
		mu := st.Mean[l*d : (l+1)*d]
		for j, v := range f.Row(i) {
			mu[j] += wi * v
		}
	}
	for l := 0; l < k; l++ {
		if nk[l] == 0 {
			return fitters.Errorf(fitters.InvalidArgument, "labels: component %d has no rows with positive weight", l)
		}
		for j := 0; j < d; j++ {
			st.Mean[l*d+j] /= nk[l]
		}
		st.Weight[l] = nk[l] / f.RelSum
	}
	// Scatter about the means (two passes for accuracy).
	full := st.Structure == mixture.Full || st.Structure == mixture.Tied
	cl := Len(st.Structure, d)
	scat := make([]float64, k*cl)
	dev := make([]float64, d)
	for i := 0; i < f.N; i++ {
		wi := f.Weight(i)
		if wi == 0 {
			continue
		}
		l := labels[i]
		mu := st.Mean[l*d : (l+1)*d]
		for j, v := range f.Row(i) {
			dev[j] = v - mu[j]
		}
		s := scat[l*cl : (l+1)*cl]
		if full {
			prep.AddOuter(s, dev, wi)
		} else {
			for j := 0; j < d; j++ {
				s[j] += wi * dev[j] * dev[j]
			}
		}
	}
	if st.Structure == mixture.Tied {
		dst := st.CovOf(0)
		for l := 0; l < k; l++ {
			for t := range dst {
				dst[t] += scat[l*cl+t]
			}
		}
		f.Finish(dst, f.RelSum)
		if f.FactorCov(st, 0) != "" {
			return f.useFallback(st, 0)
		}
		return nil
	}
	for l := 0; l < k; l++ {
		dst := st.CovOf(l)
		copy(dst, scat[l*cl:(l+1)*cl])
		f.Finish(dst, nk[l])
		if f.EffRows(nk[l]) < f.MinRows || f.FactorCov(st, l) != "" {
			if err := f.useFallback(st, l); err != nil {
				return err
			}
		}
	}
	return nil
}

// Begin fills st (zero, of st.K components) for one restart: from the
// caller's parameters when start is not nil, else from the caller's labels
// when labels is not nil, else from k-means++ seeds on standardised features
// (see package seed) with every row assigned to its nearest seed. When no
// st.K seeds can be drawn, short(seeded, st.K) is the error returned, in the
// fitter's own words.
func (f *Frame) Begin(st *State, start *mixture.Params, labels []int, rng *rand.Rand, short func(seeded, k int) error) error {
	switch {
	case start != nil:
		return f.FromParams(st, start)
	case labels != nil:
		return f.FromLabels(st, labels)
	}
	seeds, ok := seed.KMeansPP(&f.Rows, f.Scale, st.K, rng)
	if !ok {
		return short(len(seeds), st.K)
	}
	return f.FromLabels(st, seed.Nearest(&f.Rows, f.Scale, seeds))
}

// Stats are the reduced statistics of an E-step, taken about the current
// means. For component c, N[c] = Σ w r is its share of the relative row
// weight and U[c] = Σ w r u its share weighted by each row's scale weight u
// (1 in em, so U is N there; the latent weight in tmix); X holds
// Σ w r u (x−μ) (K×D) and, except for the tied structure, XX holds
// Σ w r u (x−μ)(x−μ)ᵀ per component (a packed lower triangle for full,
// squared deviations for diagonal and spherical).
type Stats struct {
	N, U, X, XX []float64
}

// Step is the M-step for the weights, the means and, unless the structure
// is tied, the matrices:
//
//	w_c = N_c / Σ w,   μ_c += X_c / U_c,   Σ_c = (XX_c − X_c X_cᵀ / U_c) / N_c + ridge
//
// (diagonal: the diagonal; spherical: the mean diagonal). It returns, per
// component, why it collapsed ("" when it did not): too few effective rows,
// a U that underflowed, or a matrix that is not acceptable. A collapsed
// component keeps its old weight and mean for Collapse to replace. With the
// tied structure the caller builds the shared scatter and calls FinishTied.
func (f *Frame) Step(st *State, s Stats) []string {
	d, k := f.D, st.K
	why := make([]string, k)
	for c := 0; c < k; c++ {
		nk, su := s.N[c], s.U[c]
		if eff := f.EffRows(nk); !(eff >= f.MinRows) {
			why[c] = fmt.Sprintf("%.3g effective rows, below the minimum %g", eff, f.MinRows)
			continue
		}
		if !(su > 0) {
			why[c] = "every latent row weight underflowed"
			continue
		}
		st.Weight[c] = nk / f.RelSum
		mu := st.Mean[c*d : (c+1)*d]
		sx := s.X[c*d : (c+1)*d]
		for j := range mu {
			mu[j] += sx[j] / su
		}
	}
	cl := Len(st.Structure, d)
	switch st.Structure {
	case mixture.Full:
		for c := 0; c < k; c++ {
			if why[c] != "" {
				continue
			}
			cov := st.CovOf(c)
			copy(cov, s.XX[c*cl:(c+1)*cl])
			SubOuter(cov, s.X[c*d:(c+1)*d], s.U[c])
			f.Finish(cov, s.N[c])
			why[c] = f.FactorCov(st, c)
		}
	case mixture.Diagonal, mixture.Spherical:
		for c := 0; c < k; c++ {
			if why[c] != "" {
				continue
			}
			su := s.U[c]
			sx := s.X[c*d : (c+1)*d]
			cov := st.CovOf(c)
			for j := 0; j < d; j++ {
				cov[j] = s.XX[c*d+j] - sx[j]*sx[j]/su
			}
			f.Finish(cov, s.N[c])
			why[c] = f.FactorCov(st, c)
		}
	}
	return why
}

// FinishTied turns the pooled scatter of every component, already in the
// tied state's matrix, into the shared matrix (see Finish). When that is not
// acceptable it is replaced by the fallback and the reason is returned, for
// Collapse to note.
func (f *Frame) FinishTied(st *State) string {
	cov := st.CovOf(0)
	f.Finish(cov, f.RelSum)
	bad := f.FactorCov(st, 0)
	if bad != "" {
		copy(cov, f.Fallback)
		_ = f.FactorCov(st, 0) // checked by Prepare
	}
	return bad
}

// useFallback replaces stored matrix c of st by the fallback matrix.
func (f *Frame) useFallback(st *State, c int) error {
	copy(st.CovOf(c), f.Fallback)
	if why := f.FactorCov(st, c); why != "" {
		return fitters.Errorf(fitters.Internal, "%s: fallback %s rejected: %s", f.Who, f.Noun, why)
	}
	return nil
}

// WorstRow returns the row of positive weight with the lowest mixture
// log-density rowLD that is not in used; ties go to the lower row index.
func (f *Frame) WorstRow(rowLD []float64, used map[int]bool) int {
	best, bv := -1, math.Inf(1)
	for i, v := range rowLD {
		if f.Weight(i) == 0 || used[i] {
			continue
		}
		if best < 0 || v < bv {
			best, bv = i, v
		}
	}
	if best < 0 { // more collapsed components than rows: reuse the worst row
		return f.WorstRow(rowLD, nil)
	}
	return best
}

// Collapse applies the collapse policy after an M-step of iteration it.
// sharedBad, when not "", says why the tied matrix was not acceptable: it
// has then already been replaced by the fallback, and a note says so. Every
// component c with why[c] != "" is re-seeded: its mean moves to the
// worst-fitting row of positive weight not used yet (by rowLD), its weight
// to 1/K and, unless tied, its matrix to the fallback (acceptable by
// Prepare); each gets a note. When anything was replaced the weights are
// renormalised. It returns which components were re-seeded and whether
// anything was replaced.
func (f *Frame) Collapse(st *State, why []string, sharedBad string, rowLD []float64, it int, notes *Notes) (reseeded []bool, replaced bool) {
	d, k := f.D, st.K
	if sharedBad != "" {
		notes.Add(fmt.Sprintf("the shared %s was not usable at iteration %d (%s) and was replaced by the data covariance", f.Noun, it, sharedBad))
	}
	replaced = sharedBad != ""
	reseeded = make([]bool, k)
	used := map[int]bool{}
	for c := 0; c < k; c++ {
		if why[c] == "" {
			continue
		}
		replaced = true
		reseeded[c] = true
		row := f.WorstRow(rowLD, used)
		used[row] = true
		copy(st.Mean[c*d:(c+1)*d], f.Row(row))
		st.Weight[c] = 1 / float64(k)
		if st.Structure != mixture.Tied {
			copy(st.CovOf(c), f.Fallback)
			_ = f.FactorCov(st, c) // checked by Prepare
		}
		notes.Add(fmt.Sprintf("component %d collapsed at iteration %d (%s) and was re-seeded at row %d", c, it, why[c], row))
	}
	if replaced {
		st.NormaliseWeights()
	}
	return reseeded, replaced
}

// Notes keeps the notes of the collapses handled in one restart: the first
// Max of them, and how many there were.
type Notes struct {
	Max   int
	List  []string
	Count int
}

// Add records one collapse note.
func (n *Notes) Add(s string) {
	n.Count++
	if len(n.List) < n.Max {
		n.List = append(n.List, s)
	}
}

// Lines returns the kept notes, then, when some were left out, a line
// counting them.
func (n *Notes) Lines() []string {
	out := append([]string(nil), n.List...)
	if n.Count > len(n.List) {
		out = append(out, fmt.Sprintf("%d further collapses were handled the same way", n.Count-len(n.List)))
	}
	return out
}
