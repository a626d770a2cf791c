// Package em is mixd's expectation-maximisation estimator for Gaussian
// mixtures (Dempster, Laird and Rubin, 1977). It implements fitters.Fitter
// under the name "em" for all four covariance structures (full, diagonal,
// spherical, tied), with optional per-row weights.
//
// # Algorithm
//
// Each iteration is one pass over the rows that does the E-step of the
// current parameters and gathers the statistics of the next M-step: for
// every row and component the whitened deviation z = L⁻¹(x − μ) (L the
// Cholesky factor of the covariance), the log of weight × density, a
// log-sum-exp over components giving the row's log-density and its
// responsibilities, and the responsibility-weighted sums Σ r w, Σ r w (x−μ)
// and Σ r w (x−μ)(x−μ)ᵀ taken about the current means (the new covariance is
// then the scatter minus the mean-shift correction, which keeps precision on
// data far from the origin). Row weights w multiply every sum; the reported
// log-likelihood is Σ w log p(x).
//
// Responsibilities under e⁻³⁷ (about 1e-16) of a row's largest term are
// treated as exactly zero: they cannot change the row's log-density in
// double precision, and skipping them saves most of the work when components
// are far apart.
//
// On amd64 processors with AVX2 (build tag purego excepted) the pass for
// full and tied covariances takes rows in blocks of 64: the distances of
// all the block's rows to every component first, eight rows per
// instruction in assembly, then the rest row by row. Every row goes
// through the same floating-point operations as in the portable row-by-row
// pass, so the results are bit-identical either way (tested).
//
// The log-likelihood computed by a pass is that of the parameters the pass
// used, so the parameters returned are always those of the last E-step. The
// final model is built with mixture.New and its log-likelihood, BIC and AIC
// are recomputed by the model's own code (mixture.Model.LogLikelihood, BIC,
// AIC) for the report.
//
// # Starts and restarts
//
// Without Settings.Start or Settings.Labels each restart seeds with
// k-means++ (Arthur and Vassilvitskii, 2007): the first seed row is drawn
// with probability proportional to its weight, each further one proportional
// to weight × squared distance to the nearest seed already chosen, distances
// being measured on features divided by their standard deviation so that no
// feature dominates by its unit. Every row then goes to its nearest seed and
// the groups give the starting weights, means and covariances (plus ridge); a
// group with fewer effective rows than the collapse threshold, or whose
// covariance is not usable, starts from the covariance of the whole data.
//
// Settings.Labels starts from the given per-row components the same way (K
// is Settings.Components, or one more than the largest label when that is
// zero);
// Settings.Start starts from the given parameters exactly. With either the
// start is fixed, so only one restart is run.
//
// Restarts draw from one math/rand/v2 PCG generator seeded with
// Settings.Seed: each restart's seeds differ, and the whole run is
// reproducible. The restart with the highest log-likelihood is kept (ties go
// to the earliest).
//
// # Defaults
//
//   - Tolerance 1e-8 (DefaultTolerance): iteration stops when the mean
//     per-row log-likelihood (total divided by the total weight) changes by at
//     most this many nats between iterations. It is an absolute per-row
//     criterion, so it means the same for 100 rows as for a million. The common
//     1e-3 stops EM, which can crawl, long before it settles on real data;
//     near a maximum the remaining gain per row is about Δ/(1−ρ) for a per-step
//     change Δ and a convergence rate ρ, so at 1e-8 the parameters are within a
//     small fraction of their standard errors for any practical sample size.
//   - MaxIterations 1000 (DefaultMaxIterations) per restart. A run that hits
//     the cap is reported with Converged false and a note. MaxIterations = -1
//     (NoIterations) asks for no iteration at all: the start is evaluated and
//     returned unchanged (useful to score given parameters, or to see where
//     k-means++ starts). Other negative values are rejected.
//   - Restarts 3 (DefaultRestarts) with k-means++ seeding; 1 with a given
//     start or labels.
//   - Ridge: Settings.Ridge zero means no ridge, a positive value is added
//     to every covariance diagonal entry (in the data's squared units), and a
//     negative value asks for the default: 1e-6 (DefaultRidgeFraction) times
//     each feature's variance in the data on that feature's diagonal entry
//     (spherical: 1e-6 times the mean feature variance). The default therefore
//     scales with the data and does not depend on the units chosen for any one
//     feature. The effective values are echoed in Report.Settings["ridge"].
//   - Criterion BIC when choosing K; Family gaussian; Structure full (or the
//     structure of Settings.Start).
//
// # Choosing K
//
// With Settings.MaxComponents > 0 every K in [MinComponents (default 1),
// MaxComponents] is fitted with its restarts, and the K with the lowest BIC
// (or AIC, per Settings.Criterion) is returned; Report.Selection holds the
// table. Row weights count as frequencies: n in BIC is the total weight.
//
// # Collapsed components
//
// A component collapses when the rows it explains fall below a threshold of
// effective rows (its share of the total weight times the number of rows
// with positive weight): D+1 for full covariances, 2 for diagonal and
// spherical, 1 for tied; the option "min_component_rows" overrides it. A
// component also collapses when its new covariance is not usable: a
// variance, or a conditional variance in the Cholesky factorisation, at or
// below 1e-12 (VarianceFloor) times the data's variance of that feature, or
// a matrix mixture.CheckCovariance rejects (not positive definite, or a
// correlation-matrix condition number above 1e14).
//
// A collapsed component is re-seeded: its mean becomes the worst-explained
// row (lowest mixture log-density under the parameters of that iteration's
// E-step; ties to the lower row index; distinct rows for several collapses in
// one iteration), its covariance the data's covariance plus ridge (in the
// component's structure), and its weight 1/K before all weights are
// renormalised. A tied model whose shared covariance is not usable gets the
// data's covariance plus ridge. Each event is recorded in Report.Notes, for
// example "component 3 collapsed at iteration 12 (1.2 effective rows, below
// the minimum 3) and was re-seeded at row 881" (rows and components are
// 0-based; the first 20 events are listed, then a count). The iteration after
// a re-seed never counts as converged. The data's own covariance plus ridge is
// checked before fitting (a full or tied fit of linearly dependent features
// with no ridge is refused), so a re-seeded component is always usable: no
// fit returns NaN or a covariance that is not positive definite.
//
// # Determinism
//
// The same data, settings and seed give bit-identical parameters, history
// and report for any GOMAXPROCS. Rows are split into contiguous chunks whose
// size depends only on N, K and D; the chunks run on up to GOMAXPROCS
// goroutines (no allocation per row), each summing its rows in order into its
// own accumulator, and the chunk sums are added in chunk order. Random draws
// happen only in k-means++ seeding, on the calling goroutine, from the one
// seeded generator. Results may differ in the last bits between CPU
// architectures whose compilers fuse multiply-adds differently.
//
// # Input checks
//
// Fit refuses, with a fitters.Error naming the field, row (0-based) or
// limit: no rows or columns; a values slice of the wrong length; NaN or ±Inf
// (naming row and column) or a magnitude above 1e100; weights of the wrong
// length, negative, not finite, above 1e100 or all zero; a constant column
// (FailedPrecondition); fewer distinct rows of positive weight than
// components (FailedPrecondition); K < 1; a start whose dimension, family,
// structure or component count disagrees with the data or settings; labels
// of the wrong length or out of range, or leaving a component empty; unknown
// options; a non-Gaussian family (Unimplemented). A refused fit changes
// nothing it was given.
//
// # What a fit means
//
// A fitted mixture describes the data it was given: its components are
// statistical groupings, not diagnoses. Whether a group of readings from a
// pump means a fault, and what to do about it, is for the operator's own
// procedures to decide.
package em
