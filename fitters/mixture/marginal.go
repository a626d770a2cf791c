package mixture

import (
	"fmt"
	"math"
)

// fullBlockRows is the number of completely observed rows handed at a time
// to the unmasked evaluation inside Marginal (it bounds the scratch memory).
const fullBlockRows = 8192

// MarginalOutput selects and receives the outputs of Model.Marginal. Every
// non-nil slice is filled and must have the stated length; nil slices are
// not computed.
type MarginalOutput struct {
	// LogDensity (one per row) is log Σ_k w_k f_k^o(x_o), the log-density of
	// the row's observed features under the marginal mixture.
	LogDensity []float64
	// ComponentLogDensity (rows × K) is log f_k^o(x_o), without the weight.
	ComponentLogDensity []float64
	// Posteriors and LogPosteriors (rows × K) are the components' posterior
	// probabilities given the observed features, and their logarithms.
	Posteriors, LogPosteriors []float64
	// Labels (one per row) is the most probable component given the
	// observed features (ties to the lowest index), and MaxPosterior its
	// posterior probability.
	Labels       []int
	MaxPosterior []float64
	// Mahalanobis (rows × K) is the squared Mahalanobis distance of the
	// observed features from each component's marginal,
	// (x_o − μ_o)ᵀ Σ_oo⁻¹ (x_o − μ_o).
	Mahalanobis []float64
	// Observed (one per row) is the number of observed features.
	Observed []int
	// OutlierStatistic and Outlier (one per row) apply the outlier rule of
	// Model.Outliers to the marginal: the statistic is δ_o/p_o for the row's
	// most probable component (δ_o its squared distance over the p_o observed
	// features), and the flag compares OutlierProbability(family, p_o, ν_k,
	// statistic) with OutlierLevel. A row with no observed feature has
	// statistic 0 and no flag. OutlierLevel must lie in (0, 1) when either
	// slice is set.
	OutlierStatistic []float64
	Outlier          []bool
	OutlierLevel     float64
}

// Marginal evaluates every row of the row-major matrix x (Dim columns) under
// the marginal mixture of the features the row has observed:
// observed[i*Dim+j] is true when feature j of row i is observed; observed nil
// means every value is observed. Values at unobserved positions are ignored
// but must still be finite (send 0, say): NaN is never a missing-value marker.
//
// Each component's marginal over the observed features o is exact: a
// Gaussian N(μ, Σ) has marginal N(μ_o, Σ_oo); a Student-t with ν degrees of
// freedom, location μ and scale Σ has marginal Student-t with the same ν,
// location μ_o and scale Σ_oo (Kotz & Nadarajah, Multivariate t
// Distributions and Their Applications, 2004, section 1.10; common result).
// The mixture's marginal keeps the weights, so log-densities and posteriors
// are those of Σ_k w_k f_k^o.
//
// A row with every feature observed gives bit-identical results to the
// unmasked methods (LogDensity, Posteriors, Assign, Mahalanobis, Outliers).
// A row with no observed feature has log-density 0 (the density of the empty
// set of features is 1), component log-densities 0 and posteriors equal to
// the weights.
//
// Rows that share an observation pattern share one Cholesky factorisation of
// each Σ_oo per call; the cost is O(K·D³) per distinct pattern plus
// O(K·p_o²) per row.
func (m *Model) Marginal(x []float64, observed []bool, out *MarginalOutput) error {
	const what = "marginal"
	rows, err := m.checkMask(what, x, observed)
	if err != nil {
		return err
	}
	if err := out.check(what, rows, m.k); err != nil {
		return err
	}
	if rows == 0 {
		return nil
	}
	pats := groupPatterns(observed, rows, m.dim)
	var rest []*pattern
	for _, pt := range pats {
		if pt.full(m.dim) {
			if err := m.marginalFull(x, pt, out); err != nil {
				return fmt.Errorf("%s: %w", what, err)
			}
			continue
		}
		rest = append(rest, pt)
	}
	err = m.forPatternGroups(rest, rows, false, false, func(pt *pattern, f []*subFactor, lo, hi int) *rowError {
		m.marginalTask(x, pt, f, lo, hi, out)
		return nil
	})
	if err != nil {
		return fmt.Errorf("%s: %w", what, err)
	}
	return nil
}

// MarginalLogDensity sets out[i] to the log-density of row i's observed
// features under the marginal mixture (see Marginal).
func (m *Model) MarginalLogDensity(x []float64, observed []bool, out []float64) error {
	return m.Marginal(x, observed, &MarginalOutput{LogDensity: out})
}

// check validates the output lengths.
func (o *MarginalOutput) check(what string, rows, k int) error {
	for _, c := range []struct {
		name string
		n    int
		set  bool
		want int
		per  string
	}{
		{"LogDensity", len(o.LogDensity), o.LogDensity != nil, rows, "one per row"},
		{"ComponentLogDensity", len(o.ComponentLogDensity), o.ComponentLogDensity != nil, rows * k, "rows × components"},
		{"Posteriors", len(o.Posteriors), o.Posteriors != nil, rows * k, "rows × components"},
		{"LogPosteriors", len(o.LogPosteriors), o.LogPosteriors != nil, rows * k, "rows × components"},
		{"Labels", len(o.Labels), o.Labels != nil, rows, "one per row"},
		{"MaxPosterior", len(o.MaxPosterior), o.MaxPosterior != nil, rows, "one per row"},
		{"Mahalanobis", len(o.Mahalanobis), o.Mahalanobis != nil, rows * k, "rows × components"},
		{"Observed", len(o.Observed), o.Observed != nil, rows, "one per row"},
		{"OutlierStatistic", len(o.OutlierStatistic), o.OutlierStatistic != nil, rows, "one per row"},
		{"Outlier", len(o.Outlier), o.Outlier != nil, rows, "one per row"},
	} {
		if c.set {
			if err := checkLen(what, c.name, c.n, c.want, c.per); err != nil {
				return err
			}
		}
	}
	if o.wantOutliers() && !(o.OutlierLevel > 0 && o.OutlierLevel < 1) {
		return fmt.Errorf("%s: OutlierLevel %v must lie strictly between 0 and 1", what, o.OutlierLevel)
	}
	return nil
}

func (o *MarginalOutput) wantOutliers() bool { return o.OutlierStatistic != nil || o.Outlier != nil }

// wantDistances reports whether the squared distances are needed.
func (o *MarginalOutput) wantDistances() bool { return o.Mahalanobis != nil || o.wantOutliers() }

// wantMixture reports whether anything beyond component values is needed.
func (o *MarginalOutput) wantMixture() bool {
	return o.LogDensity != nil || o.Posteriors != nil || o.LogPosteriors != nil ||
		o.Labels != nil || o.MaxPosterior != nil || o.wantOutliers()
}

// marginalFull evaluates the completely observed rows of pt with the
// unmasked evaluation, in blocks, so that they match it bit for bit.
func (m *Model) marginalFull(x []float64, pt *pattern, out *MarginalOutput) error {
	d, k := m.dim, m.k
	n := min(len(pt.rows), fullBlockRows)
	xb := x
	var gather []float64
	if len(pt.rows)*d != len(x) {
		gather = make([]float64, n*d)
	}
	comp := make([]float64, n*k)
	var dist []float64
	if out.wantDistances() {
		dist = make([]float64, n*k)
	}
	for lo := 0; lo < len(pt.rows); lo += fullBlockRows {
		hi := min(lo+fullBlockRows, len(pt.rows))
		nb := hi - lo
		if gather != nil {
			for r := 0; r < nb; r++ {
				i := pt.rows[lo+r]
				copy(gather[r*d:(r+1)*d], x[i*d:(i+1)*d])
			}
			xb = gather[:nb*d]
		} else {
			xb = x[lo*d : hi*d]
		}
		if err := m.ComponentLogDensity(xb, comp[:nb*k]); err != nil {
			return err
		}
		if dist != nil {
			if err := m.Mahalanobis(xb, dist[:nb*k]); err != nil {
				return err
			}
		}
		for r := 0; r < nb; r++ {
			var dr []float64
			if dist != nil {
				dr = dist[r*k : (r+1)*k]
			}
			m.marginalRow(out, pt.rows[lo+r], d, comp[r*k:(r+1)*k], dr)
		}
	}
	return nil
}

// marginalTask evaluates rows [lo, hi) of pattern pt (not completely
// observed) with its sub-block factors f.
func (m *Model) marginalTask(x []float64, pt *pattern, f []*subFactor, lo, hi int, out *MarginalOutput) {
	d, k := m.dim, m.k
	p := len(pt.obs)
	comp := make([]float64, k)
	dist := make([]float64, k)
	y := make([]float64, max(p, 1))
	logNorm := make([]float64, k)
	var halfVP, invDF, logDF, smallC []float64
	if m.family == StudentT {
		halfVP, invDF, logDF, smallC = make([]float64, k), make([]float64, k), make([]float64, k), make([]float64, k)
	}
	for c := 0; c < k; c++ {
		nu := m.params.Components[c].DF
		logNorm[c] = LogNormalizer(m.family, p, nu, f[c].logDet)
		if m.family == StudentT {
			halfVP[c] = 0.5 * (nu + float64(p))
			invDF[c] = 1 / nu
			logDF[c] = math.Log(nu)
			smallC[c] = 0.5 * (1 + float64(p)/nu)
		}
	}
	for _, i := range pt.rows[lo:hi] {
		row := x[i*d : (i+1)*d]
		for c := 0; c < k; c++ {
			v := 0.0
			if p > 0 {
				v = f[c].whitenRow(row, m.means[c*d:(c+1)*d], pt.obs, y)
			}
			dist[c] = v
			if m.family == Gaussian {
				comp[c] = logNorm[c] - 0.5*v
			} else {
				comp[c] = logNorm[c] - studentKernel(v, halfVP[c], invDF[c], logDF[c], smallC[c])
			}
		}
		m.marginalRow(out, i, p, comp, dist)
	}
}

// marginalRow writes the outputs of row i from its component log-densities
// comp (overwritten) and squared distances dist (nil when not needed); p is
// the number of observed features. The arithmetic is that of Model.chunk.
func (m *Model) marginalRow(out *MarginalOutput, i, p int, comp, dist []float64) {
	k := m.k
	if out.Observed != nil {
		out.Observed[i] = p
	}
	if out.ComponentLogDensity != nil {
		copy(out.ComponentLogDensity[i*k:(i+1)*k], comp)
	}
	if out.Mahalanobis != nil {
		copy(out.Mahalanobis[i*k:(i+1)*k], dist)
	}
	if !out.wantMixture() {
		return
	}
	for a, lw := range m.logW {
		comp[a] += lw
	}
	mx, logS := logSumExpParts(comp)
	if p == 0 {
		// Nothing observed: density 1, posteriors equal to the weights.
		mx, logS = 0, 0
	}
	if out.LogDensity != nil {
		out.LogDensity[i] = logS + mx
	}
	far := math.IsInf(mx, -1)
	if out.Posteriors != nil || out.LogPosteriors != nil {
		for a, v := range comp {
			lp := (v - mx) - logS
			if far {
				lp = m.farLogPost[a]
			}
			if out.LogPosteriors != nil {
				out.LogPosteriors[i*k+a] = lp
			}
			if out.Posteriors != nil {
				out.Posteriors[i*k+a] = math.Exp(lp)
			}
		}
	}
	if out.Labels == nil && out.MaxPosterior == nil && !out.wantOutliers() {
		return
	}
	best := 0
	for a := 1; a < k; a++ {
		if comp[a] > comp[best] {
			best = a
		}
	}
	lp := (comp[best] - mx) - logS
	if far {
		best = m.farLabel
		lp = m.farLogPost[best]
	}
	if out.Labels != nil {
		out.Labels[i] = best
	}
	if out.MaxPosterior != nil {
		out.MaxPosterior[i] = math.Exp(lp)
	}
	if out.wantOutliers() {
		s, flag := 0.0, false
		if p > 0 {
			s = dist[best] / float64(p)
			df := 0.0
			if m.family == StudentT {
				df = m.df[best]
			}
			flag = OutlierProbability(m.family, p, df, s) > out.OutlierLevel
		}
		if out.OutlierStatistic != nil {
			out.OutlierStatistic[i] = s
		}
		if out.Outlier != nil {
			out.Outlier[i] = flag
		}
	}
}
