package mixture

import (
	"context"
	"fmt"
	"math"
	"slices"

	"gonum.org/v1/gonum/mat"
)

const (
	// DefaultCompareSamples is the number of draws per direction used by
	// Compare when CompareOptions.Samples is 0.
	DefaultCompareSamples = 20000
	// compareBlock is the number of draws evaluated at a time.
	compareBlock = 4096
	// backwardSeedMix is XORed into the seed for the draws from q, so the
	// two directions use different streams.
	backwardSeedMix = 0x6261636b77617264 // "backward"
)

// CompareOptions tune Compare.
type CompareOptions struct {
	// Samples is the number of draws per direction (at least 2); 0 means
	// DefaultCompareSamples.
	Samples int
	// Seed fixes the draws: the same models, Samples and Seed give the same
	// result.
	Seed uint64
}

// Comparison is the result of Compare.
type Comparison struct {
	// Samples is the number of draws per direction.
	Samples int
	// Forward is the Monte Carlo estimate of KL(p‖q) = E_p[log p(X) − log q(X)]
	// in nats, and ForwardSE its standard error (the sample standard deviation
	// of log p − log q over the draws, divided by √Samples). Backward and
	// BackwardSE are the same for KL(q‖p). An estimate may be slightly
	// negative when the models are close: read it together with its error.
	// +Inf (with +Inf error) means some draw has density 0 in float64 under
	// the other model.
	Forward, ForwardSE   float64
	Backward, BackwardSE float64
	// Matches pairs components of p with components of q so that the sum of
	// their distances is smallest (min(Kp, Kq) pairs), ordered by p's
	// component.
	Matches []ComponentMatch
	// UnmatchedP and UnmatchedQ list the components left without a partner
	// when the models have different numbers of components.
	UnmatchedP, UnmatchedQ []int
}

// ComponentMatch is one pair of matched components.
type ComponentMatch struct {
	// P and Q are the component indices in p and q.
	P, Q int
	// Distance is the Bhattacharyya distance between the two components
	// (see ComponentDistances).
	Distance float64
	// WeightP and WeightQ are the components' weights.
	WeightP, WeightQ float64
}

// Compare compares two mixtures over the same features: a Monte Carlo
// estimate of the Kullback–Leibler divergence in both directions with its
// standard error, and a matching of their components.
//
// KL(p‖q) is estimated as the mean of log p(x_i) − log q(x_i) over Samples
// draws x_i from p (p.Sampler(Seed)); KL(q‖p) over draws from q
// (q.Sampler(Seed XOR a fixed constant)). The estimate is unbiased and its
// standard error shrinks as 1/√Samples (common practice for Monte Carlo
// estimates; there is no closed form for mixtures).
//
// The components are matched by minimising the total Bhattacharyya distance
// (MinCostAssignment over ComponentDistances). The models must have the same
// dimension, and the same feature names when both have names. ctx is checked
// between blocks of draws and between component pairs.
func Compare(ctx context.Context, p, q *Model, opts CompareOptions) (*Comparison, error) {
	const what = "compare"
	if p.dim != q.dim {
		return nil, fmt.Errorf("%s: the models have dimensions %d and %d; they must describe the same features", what, p.dim, q.dim)
	}
	if fp, fq := p.params.Features, q.params.Features; len(fp) > 0 && len(fq) > 0 && !slices.Equal(fp, fq) {
		return nil, fmt.Errorf("%s: the models name different features (%v and %v)", what, fp, fq)
	}
	n := opts.Samples
	if n == 0 {
		n = DefaultCompareSamples
	}
	if n < 2 {
		return nil, fmt.Errorf("%s: samples %d must be at least 2 (a standard error needs two draws)", what, n)
	}
	res := &Comparison{Samples: n}
	var err error
	if res.Forward, res.ForwardSE, err = klEstimate(ctx, p, q, n, opts.Seed); err != nil {
		return nil, fmt.Errorf("%s: KL(p‖q): %w", what, err)
	}
	if res.Backward, res.BackwardSE, err = klEstimate(ctx, q, p, n, opts.Seed^backwardSeedMix); err != nil {
		return nil, fmt.Errorf("%s: KL(q‖p): %w", what, err)
	}
	dist, err := componentDistances(ctx, p, q)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", what, err)
	}
	pairs, err := MinCostAssignment(p.k, q.k, dist)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", what, err)
	}
	usedQ := make([]bool, q.k)
	for a, b := range pairs {
		if b < 0 {
			res.UnmatchedP = append(res.UnmatchedP, a)
			continue
		}
		usedQ[b] = true
		res.Matches = append(res.Matches, ComponentMatch{
			P: a, Q: b, Distance: dist[a*q.k+b],
			WeightP: p.params.Components[a].Weight, WeightQ: q.params.Components[b].Weight,
		})
	}
	for b, u := range usedQ {
		if !u {
			res.UnmatchedQ = append(res.UnmatchedQ, b)
		}
	}
	return res, nil
}

// klEstimate draws n rows from p and returns the mean and standard error of
// log p − log q over them, accumulated in draw order (Welford's update), so
// the result is the same for any GOMAXPROCS.
func klEstimate(ctx context.Context, p, q *Model, n int, seed uint64) (mean, se float64, err error) {
	d := p.dim
	s := p.Sampler(seed)
	bs := min(n, compareBlock)
	x := make([]float64, bs*d)
	labels := make([]int, bs)
	lp := make([]float64, bs)
	lq := make([]float64, bs)
	var m2 float64
	count := 0
	infinite := false
	for done := 0; done < n; {
		if err := ctx.Err(); err != nil {
			return 0, 0, err
		}
		b := min(bs, n-done)
		s.Next(x[:b*d], labels[:b])
		if err := p.LogDensity(x[:b*d], lp[:b]); err != nil {
			return 0, 0, err
		}
		if err := q.LogDensity(x[:b*d], lq[:b]); err != nil {
			return 0, 0, err
		}
		for i := 0; i < b; i++ {
			v := lp[i] - lq[i]
			if v-v != 0 { // a draw with density 0 in float64 under q (or p)
				infinite = true
				continue
			}
			count++
			delta := v - mean
			mean += delta / float64(count)
			m2 += delta * (v - mean)
		}
		done += b
	}
	if infinite {
		return math.Inf(1), math.Inf(1), nil
	}
	return mean, math.Sqrt(m2 / float64(count-1) / float64(count)), nil
}

// ComponentDistances returns the Kp × Kq matrix (row-major) of Bhattacharyya
// distances between the components of p and of q:
//
//	D_B = ⅛ (μ₁ − μ₂)ᵀ Σ̄⁻¹ (μ₁ − μ₂) + ½ log(|Σ̄| / √(|Σ₁| |Σ₂|)),  Σ̄ = (Σ₁ + Σ₂)/2
//
// (Bhattacharyya 1943; the Gaussian closed form as in Fukunaga, Introduction
// to Statistical Pattern Recognition, 1990). It is 0 for identical
// components, symmetric, and grows with both the separation of the means and
// the mismatch of the covariances.
//
// Student-t components are replaced by their moment-matched Gaussian
// approximation N(μ, ν/(ν−2)·Σ) when ν > 2, and by N(μ, Σ) (the scale matrix
// as covariance) when ν ≤ 2 and the covariance does not exist: the distance
// is then a distance between those Gaussians, not between the t
// distributions themselves.
func ComponentDistances(p, q *Model) ([]float64, error) {
	return componentDistances(context.Background(), p, q)
}

func componentDistances(ctx context.Context, p, q *Model) ([]float64, error) {
	if p.dim != q.dim {
		return nil, fmt.Errorf("component distances: dimensions %d and %d differ", p.dim, q.dim)
	}
	d := p.dim
	covP, ldP := gaussianApprox(p)
	covQ, ldQ := gaussianApprox(q)
	out := make([]float64, p.k*q.k)
	avg := mat.NewSymDense(d, nil)
	diff := mat.NewVecDense(d, nil)
	var sol mat.VecDense
	var ch mat.Cholesky
	for a := 0; a < p.k; a++ {
		for b := 0; b < q.k; b++ {
			if err := ctx.Err(); err != nil {
				return nil, err
			}
			ca, cb := covP[a], covQ[b]
			for i := 0; i < d; i++ {
				for j := i; j < d; j++ {
					avg.SetSym(i, j, 0.5*(ca[i*d+j]+cb[i*d+j]))
				}
				diff.SetVec(i, p.means[a*d+i]-q.means[b*d+i])
			}
			if !ch.Factorize(avg) {
				return nil, fmt.Errorf("component distances: the average covariance of components %d and %d is not positive definite", a, b)
			}
			if err := ch.SolveVecTo(&sol, diff); err != nil {
				return nil, fmt.Errorf("component distances: components %d and %d: %w", a, b, err)
			}
			maha := mat.Dot(diff, &sol)
			v := 0.125*maha + 0.5*ch.LogDet() - 0.25*ldP[a] - 0.25*ldQ[b]
			if v < 0 { // rounding for (nearly) identical components
				v = 0
			}
			out[a*q.k+b] = v
		}
	}
	return out, nil
}

// gaussianApprox returns each component's covariance (Gaussian), or the
// covariance of its moment-matched Gaussian (Student-t), and its
// log-determinant.
func gaussianApprox(m *Model) ([][]float64, []float64) {
	d := m.dim
	covs := make([][]float64, m.k)
	lds := make([]float64, m.k)
	for c, comp := range m.params.Components {
		l := m.factor(c)
		ld := 0.0
		for i := 0; i < d; i++ {
			ld += 2 * math.Log(l[packedRow(i)+i])
		}
		f := 1.0
		if m.family == StudentT && comp.DF > 2 {
			f = comp.DF / (comp.DF - 2)
		}
		cov := make([]float64, d*d)
		for i, v := range comp.Cov {
			cov[i] = f * v
		}
		covs[c] = cov
		lds[c] = ld + float64(d)*math.Log(f)
	}
	return covs, lds
}
