package mixture

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mathext"
	"gonum.org/v1/gonum/stat/distuv"
)

// DefaultOutlierLevel is the distribution-function level of the outlier rule
// used when a caller does not choose one: a row is flagged when its statistic
// lies beyond the 99.9% point of its reference distribution, so about one row
// in a thousand drawn from the fitted model itself is flagged by chance. A
// tenth of a percent is a conventional "rare" threshold (common practice); it
// keeps false flags on clean data of a few thousand rows to a handful while
// rows far beyond the bulk of their component are still flagged.
const DefaultOutlierLevel = 0.999

// LargeDFOutlier is the smallest degrees of freedom from which
// OutlierProbability evaluates the F(p, ν) distribution function by its
// large-ν expansion instead of the regularised incomplete beta function (the
// threshold used is max(LargeDFOutlier, 1000·p)); see OutlierProbability.
const LargeDFOutlier = 1e5

// outlierBlock is the number of rows Outliers evaluates at a time; it bounds
// the scratch memory to outlierBlock×(K+1) values.
const outlierBlock = 8192

// Outliers applies the outlier rule to every row of the row-major matrix x
// (Dim columns, finite values). For row i let k be its most probable
// component (as Assign chooses it: the largest w_k f_k(x_i), ties to the
// lowest index) and δ its squared Mahalanobis distance (x_i−μ_k)ᵀ Σ_k⁻¹
// (x_i−μ_k). Then
//
//	stat[i]  = δ / p                      (p = Dim)
//	flags[i] = OutlierProbability(family, p, ν_k, stat[i]) > level
//
// For a Student-t component, δ/p follows the F(p, ν_k) distribution when the
// row is drawn from that component (a standard property of the multivariate
// t: δ/p is the ratio of a χ²_p/p and an independent χ²_ν/ν variable), so
// the flag says the row lies beyond the level-quantile of F(p, ν_k). For a
// Gaussian component δ follows χ²_p, and the rule uses the chi-square
// distribution function of δ = p·stat instead; stat keeps the same δ/p form
// for both families so that one number means the same thing across models.
//
// level must lie strictly between 0 and 1 (DefaultOutlierLevel is the usual
// choice). stat and flags may each be nil; a non-nil one needs one value per
// row. A distance too large for float64 gives stat +Inf and a flag.
//
// A flag is a statement about statistical rarity under the fitted model: the
// row is further from its most probable component than all but a
// (1 − level) share of the rows that component itself would generate. It is not a diagnosis of a fault, and
// decisions about equipment or safety remain with the operator's own
// procedures.
func (m *Model) Outliers(x []float64, level float64, stat []float64, flags []bool) error {
	const what = "outliers"
	if !(level > 0 && level < 1) {
		return fmt.Errorf("%s: level %v must lie strictly between 0 and 1", what, level)
	}
	rows, err := m.rowsOf(what, x)
	if err != nil {
		return err
	}
	if stat != nil {
		if err := checkLen(what, "stat", len(stat), rows, "one per row"); err != nil {
			return err
		}
	}
	if flags != nil {
		if err := checkLen(what, "flags", len(flags), rows, "one per row"); err != nil {
			return err
		}
	}
	if rows == 0 || (stat == nil && flags == nil) {
		return nil
	}
	d, k := m.dim, m.k
	nb := min(rows, outlierBlock)
	dist := make([]float64, nb*k)
	labels := make([]int, nb)
	df := 0.0
	for lo := 0; lo < rows; lo += outlierBlock {
		n := min(outlierBlock, rows-lo)
		xb := x[lo*d : (lo+n)*d]
		if err := m.Mahalanobis(xb, dist[:n*k]); err != nil {
			return fmt.Errorf("%s: %w", what, err)
		}
		if err := m.Assign(xb, labels[:n], nil); err != nil {
			return fmt.Errorf("%s: %w", what, err)
		}
		for r := 0; r < n; r++ {
			c := labels[r]
			s := dist[r*k+c] / float64(d)
			if stat != nil {
				stat[lo+r] = s
			}
			if flags != nil {
				if m.family == StudentT {
					df = m.df[c]
				}
				flags[lo+r] = OutlierProbability(m.family, d, df, s) > level
			}
		}
	}
	return nil
}

// OutlierProbability returns the distribution-function value used by the
// outlier rule at statistic s = δ/p (see Model.Outliers): for StudentT the
// F(p, df) distribution function at s, for Gaussian the χ²_p distribution
// function at p·s (df is then ignored). It is 0 for s ≤ 0, 1 for s = +Inf
// and NaN when s is NaN, dim < 1, or (StudentT) df is not positive.
//
// The F distribution function is gonum's distuv.F (the regularised
// incomplete beta function I_x(p/2, ν/2), x = ps/(ps + ν)) for
// df < max(LargeDFOutlier, 1000·p); when ps > ν it is evaluated as
// 1 − I_{1−x}(ν/2, p/2) with 1 − x = ν/(ps + ν) formed directly, because x
// then rounds towards 1 and loses the digits that decide the tail. Beyond that
// threshold that evaluation loses accuracy (errors near 1e-9 at df = 3e6,
// growing with df), so the value is taken from the expansion of
// P(χ²_p ≤ p·s·W), W = χ²_ν/ν, about W = 1 to second order in 1/ν:
//
//	G(y) + y²g′(y)/ν + (4/3)·y³g″(y)/ν² + (1/2)·y⁴g‴(y)/ν²,   y = p·s,
//
// with G and g the χ²_p distribution and density functions. Both branches
// agree with 40-digit values to about 1e-9 or better for p up to 200 (see the
// package tests).
func OutlierProbability(f Family, dim int, df, s float64) float64 {
	if dim < 1 || math.IsNaN(s) || (f == StudentT && !(df > 0)) {
		return math.NaN()
	}
	switch {
	case s <= 0:
		return 0
	case math.IsInf(s, 1):
		return 1
	}
	p := float64(dim)
	if math.IsInf(p*s, 1) {
		return 1
	}
	if f != StudentT {
		return distuv.ChiSquared{K: p}.CDF(p * s)
	}
	if df < max(LargeDFOutlier, 1000*p) {
		if p*s <= df {
			return distuv.F{D1: p, D2: df}.CDF(s)
		}
		// Upper half: 1 − I_{1−x}(ν/2, p/2) with 1 − x = ν/(ps + ν) formed
		// directly, since x = ps/(ps + ν) rounds towards 1 and loses the
		// digits of 1 − x that decide the tail.
		return 1 - mathext.RegIncBeta(0.5*df, 0.5*p, df/(p*s+df))
	}
	// With t = y·g′(y)/g(y) = (p/2 − 1) − y/2 and a = p/2 − 1:
	// y²g′ = yg·t, y³g″ = yg·(t² − a), y⁴g‴ = yg·(t³ − 3at + 2a).
	y := p * s
	chi := distuv.ChiSquared{K: p}
	yg := y * chi.Prob(y)
	cdf := chi.CDF(y)
	if !(yg > 0) || math.IsInf(yg, 0) {
		return cdf
	}
	a := 0.5*p - 1
	t := a - 0.5*y
	v := cdf + yg*(t/df+((4.0/3)*(t*t-a)+0.5*(t*t*t-3*a*t+2*a))/(df*df))
	switch {
	case v < 0:
		return 0
	case v > 1:
		return 1
	}
	return v
}
