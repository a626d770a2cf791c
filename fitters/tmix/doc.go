// Package tmix is the robust mixd estimator: mixtures of multivariate
// Student-t distributions fitted by ECM (Peel and McLachlan, 2000) with the
// degrees of freedom estimated by ECME steps (Liu and Rubin, 1995). Heavy-
// tailed components give rows far from every centre little weight, so gross
// errors do not drag the means and inflate the scale matrices the way they
// do in a Gaussian mixture, and the rows the fitted model finds rare are
// counted by the outlier rule shared with the daemon's Score
// (mixture.Model.Outliers). It is registered under the name "tmix" (Name)
// and implements fitters.Fitter; New returns one.
//
// # Model
//
// p(x) = Σ_k w_k t_p(x; μ_k, Σ_k, ν_k), with t_p the p-variate Student-t
// density with location μ_k, scale matrix Σ_k and ν_k degrees of freedom
// (mixture's package documentation gives the density). Each row is, in the
// latent formulation, drawn from N(μ_k, Σ_k/u) with u ~ Gamma(ν_k/2, ν_k/2).
//
// # One iteration
//
// E-step, for row i and component k, with δ_ik = (x_i−μ_k)ᵀ Σ_k⁻¹ (x_i−μ_k):
//
//	τ_ik = w_k t_p(x_i; θ_k) / Σ_j w_j t_p(x_i; θ_j)     (log-sum-exp)
//	u_ik = (ν_k + p) / (ν_k + δ_ik)                     (latent row weight)
//
// First CM-step (row weights r_i of the caller included; n_k = Σ r τ):
//
//	w_k = n_k / Σ r,   μ_k = Σ r τ u x / Σ r τ u,   Σ_k = Σ r τ u (x−μ_k)(x−μ_k)ᵀ / n_k
//
// restricted to the structure: diagonal keeps the diagonal, spherical the
// mean of the diagonal, tied pools the scatter of every component over Σ r.
// The ridge is then added to the diagonal, as in the em fitter: by default
// DefaultRidgeFraction (1e-6) times each feature's variance in the data
// (times the mean feature variance for spherical); Settings.Ridge = 0 means
// none, a positive value that absolute amount.
//
// Degrees-of-freedom step (option "dof_update"):
//
//   - "ecme" (default): ν maximises the observed-data log-likelihood with the
//     other parameters at their new values (Liu and Rubin, 1995). Plain ECM
//     is known to crawl when ν is large; ECME does not. With one shared ν
//     this is one search; with ν per component the components are updated
//     one after the other (each a conditional maximisation). The search works
//     on θ = log ν inside [dof_floor, dof_cap] with the exact derivative of
//     the log-likelihood (per row ½[(ν+p)δ/(ν(ν+δ)) − log(1+δ/ν)] plus
//     ½[ψ((ν+p)/2) − ψ(ν/2) − p/ν], weighted by τ): it brackets a sign
//     change of the derivative by growing steps from the current value (the
//     first one twice the Newton step, with the curvature remembered from
//     the previous iteration), then closes the bracket by the Illinois
//     variant of regula falsi. Every point evaluated is a candidate and the
//     best is kept, starting with the current value, so the log-likelihood
//     never decreases. ν is located to a relative 1e-6; when the derivative
//     keeps its sign up to a bound, ν is set to that bound.
//   - "ecm": ν solves Peel and McLachlan's equation
//     1 − ψ(ν/2) + log(ν/2) + (1/n_k) Σ τ (log u − u) + ψ((ν⁰+p)/2) − log((ν⁰+p)/2) = 0
//     (u and τ from the E-step at the current ν⁰), whose left side decreases
//     in ν, by bisection on log ν inside [dof_floor, dof_cap]. When it has no
//     root inside, ν is held at the bound and the report says so
//     ("ECM: the degrees-of-freedom equation of ... had no root inside ...").
//
// With "dof" set to a number, ν is fixed and every iteration is an EM
// iteration for the t mixture with known ν.
//
// Convergence is declared when the mean per-row log-likelihood changes by
// at most Settings.Tolerance (DefaultTolerance 1e-8 nats per row) from one
// iteration to the next; Settings.MaxIterations caps the iterations
// (DefaultMaxIterations 1000; NoIterations evaluates the start only). The
// report's History holds the log-likelihood of the starting parameters and
// after every iteration; it never decreases when the ridge is 0 and no
// component collapses (tested on every iteration).
//
// # Options and defaults
//
//	dof                "estimate" (default) or a positive number: ν fixed for every component
//	dof_update         "ecme" (default) or "ecm"
//	dof_sharing        "shared" (default; but "per_component" when a Student-t start
//	                   has unequal ν and the option is not given): one ν for all components; "per_component"
//	dof_start          10 (DefaultDFStart), or the start's values (see below)
//	dof_floor          0.5 (DefaultDFFloor)
//	dof_cap            200 (DefaultDFCap; at most MaxDFCap = 1e8)
//	outlier_level      0.999 (mixture.DefaultOutlierLevel)
//	min_component_rows D+1 for full, 2 for diagonal and spherical, 1 for tied
//
// The floor keeps a few extreme rows from driving ν towards 0 (below ν = 1
// a component has no mean). The cap bounds the search where the t
// component is already nearly Gaussian; a component held there is noted in
// the report ("ended at the cap"). dof_update, dof_sharing, dof_start,
// dof_floor and dof_cap are rejected when dof is a number.
//
// One shared ν is the default because of what the outlier flags need: with
// a ν per component, a small component can take the gross errors in and
// lower its own ν towards 2, under which the F(p, ν) tail is so heavy that
// the rule no longer flags them (seen on Old Faithful with four recording
// errors appended, see the tests), while a near-Gaussian neighbour flags
// ordinary rows. A shared ν is pulled down by the same errors, but all
// components then judge rows by one tail. Choose "per_component" when the
// components genuinely differ in their tails and flags matter less.
//
// # Starting values
//
// As the em fitter: k-means++ seeding (Arthur and Vassilvitskii, 2007) on
// standardised features, then a nearest-seed assignment whose weights,
// means and covariances (plus ridge) become the start, ν at dof_start;
// Settings.Restarts such starts (DefaultRestarts 3) drawn from one PCG
// stream seeded by Settings.Seed, the best log-likelihood kept. The stream
// and the seeding are the em fitter's, so both fitters start from the same
// partitions. Settings.Start gives starting parameters instead (Gaussian or
// Student-t; a Student-t start's ν, clamped into [floor, cap] and, for a
// shared ν, averaged with the weights, is the starting ν unless dof_start
// or a fixed dof is given). Settings.Labels gives a starting component per
// row. Choosing K over [MinComponents, MaxComponents] by BIC or AIC works
// as in the em fitter.
//
// # Collapsed components
//
// A component whose effective number of rows falls below
// min_component_rows, whose latent weights all underflow, or whose scale
// matrix is not acceptable (a conditional variance below VarianceFloor
// times the data's variance, or rejected by mixture.CheckCovariance) is
// re-seeded at the worst-explained row (the lowest mixture log-density not
// already used in that iteration) with the data covariance plus ridge,
// weight 1/K before renormalising, and (per-component ν) ν at dof_start;
// the report notes "component k collapsed at iteration t (...) and was
// re-seeded at row i". An unusable tied matrix is replaced by the data
// covariance. The convergence test skips an iteration with a re-seed.
//
// # Determinism
//
// Rows are processed in fixed chunks of 2048 whatever GOMAXPROCS is; each
// chunk sums in row order and the chunk sums are added in chunk order, so
// the same data, settings and seed give bit-identical models for any
// number of cores.
//
// # The report
//
// LogLikelihood is that of the returned model on the training rows
// (mixture.Model.LogLikelihood, caller weights). BIC and AIC (lower is
// better) count (K−1) weights, K·D means, the scale-matrix parameters of
// the structure and the degrees of freedom actually estimated: K with
// per_component, 1 when shared, 0 when fixed. mixture.Model.FreeParameters
// always counts K (its documentation says so), so for a shared or fixed ν
// the report's criteria are lower than Model.BIC/AIC by (K−1)·ln n (or
// K·ln n) and 2(K−1) (or 2K).
//
// FlaggedRows counts the training rows of positive weight flagged by
// mixture.Model.Outliers at OutlierLevel (option outlier_level); a closing
// note repeats the count. RowWeights gives each row's latent weight
// Σ_k τ_ik u_ik under a fitted model; the daemon's Score gives each row's
// outlier statistic and flag by the same rule as the report.
//
// # What a flag means
//
// A row is flagged when δ/p, its squared Mahalanobis distance to its most
// probable component over the dimension, lies beyond the outlier_level
// quantile of F(p, ν) — the distribution that statistic has for rows the
// fitted model itself generates. A flag therefore says "this row is rare
// under the fitted model": at level 0.999 about one row in a thousand of
// perfectly ordinary data is flagged by chance, and a fault that the
// training data already contained may look ordinary. A flag is not a
// diagnosis of a sensor, pump or process fault, and the absence of a flag
// is not a statement that equipment is healthy. Decisions about equipment
// and safety belong to the operator's own procedures; use flags as one
// input to them.
//
// # Sources
//
//   - D. Peel and G. J. McLachlan (2000), Robust mixture modelling using the
//     t distribution, Statistics and Computing 10:339–348 (E-step, CM-steps,
//     the ECM equation for ν).
//   - C. Liu and D. B. Rubin (1995), ML estimation of the t distribution
//     using EM and its extensions, ECM and ECME, Statistica Sinica
//     5:19–39 (ECME).
//   - X.-L. Meng and D. B. Rubin (1993), Maximum likelihood estimation via
//     the ECM algorithm: a general framework, Biometrika 80:267–278
//     (monotonicity of ECM).
//   - D. Arthur and S. Vassilvitskii (2007), k-means++: the advantages of
//     careful seeding, SODA (seeding).
//   - M. Dowell and P. Jarratt (1971), A modified regula falsi method for
//     computing the root of an equation, BIT 11:168–174 (Illinois method).
//
// Checks against outside references are in the tests: scipy.stats.t.fit
// for one component in one dimension, the em fitter at ν = 1e6, Old
// Faithful with appended recording errors, and scipy/mpmath values for the
// outlier rule (testdata/tmix/make_reference.py).
package tmix
