// Package mixture holds the finite mixture model served by mixd and its
// mathematics: validation, per-component Cholesky factorisations, log-densities,
// posterior probabilities, Mahalanobis distances, information criteria and
// seeded sampling. It is shared by the daemon (which evaluates models) and by
// every fitter (which estimates them); it imports nothing from the daemon.
//
// # Model
//
// Params are plain data; New validates them (see Params.Validate for every
// rule) and returns an immutable *Model holding, per component, the lower
// Cholesky factor L of the covariance (Σ = L Lᵀ) as a flat row-major slice and
// the log-normalising constant. A Model is safe for concurrent use. Component
// indices in error messages are 0-based, like the Params.Components slice.
//
// The density of a row x is
//
//	p(x) = Σ_k w_k f_k(x)
//
// with f_k the multivariate normal N(μ_k, Σ_k) or the multivariate Student-t
// with ν_k degrees of freedom, location μ_k and scale matrix Σ_k:
//
//	log f_k(x) = log Γ((ν+D)/2) − log Γ(ν/2) − (D/2) log(νπ) − ½ log|Σ| − ((ν+D)/2) log(1 + δ²/ν)
//
// where δ² = (x−μ)ᵀ Σ⁻¹ (x−μ) is the squared Mahalanobis distance, computed by
// forward substitution L y = x − μ, δ² = |y|².
//
// # Large degrees of freedom
//
// The difference log Γ((ν+D)/2) − log Γ(ν/2) cancels catastrophically when ν is
// large (at ν = 1e12 both terms are about 1.3e13, so a direct evaluation
// keeps only three correct digits). For ν ≥ LargeDFThreshold (32) the
// normaliser is evaluated from Stirling's asymptotic series of log Γ, arranged
// so that the large terms cancel analytically:
//
//	log Γ(a+b) − log Γ(a) − b log a = (a+b−½) log1p(b/a) − b + S(a+b) − S(a)
//
// with a = ν/2, b = D/2 and S(z) = Σ B₂ₙ / (2n(2n−1) z²ⁿ⁻¹) (five terms,
// truncation error below 2e-16 for a ≥ 16). The kernel term uses log1p, and a
// three-term series when δ²/ν < 1e-5, so nothing underflows. There is no switch
// to the Gaussian: the Student-t value is accurate for every finite ν and
// tends to the Gaussian density as ν grows (the difference is O(1/ν)).
// Tests compare against 50-digit reference values for ν from 0.5 to 1e15.
//
// # Information criteria
//
// BIC = −2 log L + p ln n and AIC = −2 log L + 2p, so LOWER IS BETTER for both.
// The parameter count p (FreeParameters) is (K−1) weights + K·D means + the
// covariance parameters of the structure (full K·D(D+1)/2, diagonal K·D,
// spherical K, tied D(D+1)/2), plus K degrees of freedom for Student-t
// components: the degrees of freedom are counted as estimated even when a
// fitter holds them fixed.
//
// # Ridge
//
// No ridge (diagonal regularisation) is applied here. The covariances are used
// exactly as given; the fitters add their documented ridge before building a
// model. New rejects covariance matrices that are not positive definite or
// whose correlation matrix has a condition number above MaxCondition.
//
// # Parallelism and determinism
//
// Batch evaluations of at least ParallelMinRows rows are split into fixed
// blocks of ChunkRows rows that are handed to up to GOMAXPROCS goroutines.
// Every row is computed by the same sequence of floating-point operations
// whichever goroutine takes it, and LogLikelihood sums each fixed block in row
// order and then the block sums in block order, so every result is
// bit-identical for any GOMAXPROCS. Scratch space is per goroutine and reused
// through a per-model pool, so evaluation allocates nothing per row.
//
// Within a chunk, blocks of 128 rows are whitened column by column (each
// step an axpy over the block's rows) and their exponentials taken
// together. On amd64 processors with AVX2 these loops run in assembly, four
// rows per instruction, doing for every row exactly the floating-point
// operations of the portable Go code, in the same order, so results do not
// depend on which code ran; the vector exponential reproduces math.Exp bit
// for bit and is used only where it is checked to (see kernels.go). The
// build tag purego selects the portable code.
//
// Sampling uses math/rand/v2's PCG seeded with (seed, a fixed constant); the
// same seed gives the same rows on every platform and for any chunking of
// Sampler.Next calls. A Sampler is not safe for concurrent use; make one per
// goroutine.
//
// # Incomplete rows, conditionals and comparison
//
// Marginal evaluates rows with some features unobserved, given by an
// explicit mask (NaN is never a missing-value marker): each component's
// marginal over the observed features is exact (Gaussian: N(μ_o, Σ_oo);
// Student-t: same ν, location μ_o, scale Σ_oo). Conditional returns the
// distribution of the unobserved features given the observed ones: a
// mixture weighted by the marginal posteriors, of Gaussian conditionals
// (Schur complement) or Student-t conditionals with ν + p_o degrees of
// freedom, summarised by its mean and covariance (law of total covariance)
// and optionally drawn from (multiple imputation, seeded per row). Both
// factorise Σ once per distinct observation pattern of a batch, with the
// observed features ordered first, so that one Cholesky factor yields the
// marginal factor, the regression coefficients and the conditional factor.
//
// Compare estimates the Kullback–Leibler divergence between two models in
// both directions by Monte Carlo (seeded, with standard errors) and matches
// their components by minimum total Bhattacharyya distance
// (MinCostAssignment, the Hungarian method).
//
// # What a score means
//
// A log-density or posterior says how well a row fits the fitted model, not
// whether equipment is healthy or safe. A low score is a statistical
// observation about the data the model was fitted on; decisions about
// equipment remain with the operator's own procedures.
package mixture
