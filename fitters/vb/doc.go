// Package vb is mixd's variational Bayesian estimator for Gaussian mixtures
// (registered as "vb"). Given an upper bound K on the number of components it
// fits a posterior distribution over weights, means and precisions; surplus
// components fall back to their prior with negligible weight, so the data
// choose how many components they use.
//
// # Model and priors
//
// Rows x_n (optionally with frequency weights w_n, which act as row counts)
// come from K Gaussian components. The priors, after Bishop (2006, Pattern
// Recognition and Machine Learning, section 10.2):
//
//   - weights: a symmetric Dirichlet(α0, …, α0) (option weight_prior=dirichlet,
//     the default), or the truncated stick-breaking representation of a
//     Dirichlet process (weight_prior=stick_breaking; Blei and Jordan, 2006,
//     Variational inference for Dirichlet process mixtures, Bayesian Analysis
//     1:121–144): π_k = v_k Π_{j<k}(1−v_j), v_k ~ Beta(1, α0) for k < K and
//     v_K = 1. Option concentration sets α0; default 1/K for the Dirichlet
//     prior and 1 for stick-breaking. Small values favour few components.
//   - means and precisions, full structure: μ_k | Λ_k ~ N(m0, (β0 Λ_k)⁻¹),
//     Λ_k ~ Wishart(W0, ν0). Options: prior_mean = m0 (default: the data
//     mean), mean_strength = β0 (default 1, in rows), wishart_dof = ν0
//     (default D, must exceed D−1), wishart_inverse_scale = W0⁻¹ (default:
//     the data covariance with divisor n−1).
//   - diagonal structure: every coordinate j has its own precision λ_kj with
//     a one-dimensional Wishart (gamma) prior Gamma(ν0/2, rate s0_j/2), and
//     μ_kj | λ_kj ~ N(m0_j, (β0 λ_kj)⁻¹). Default s0_j: the data variance of
//     column j. (This is a proper mean-field family: E[log λ_kj] = ψ(ν_k/2) −
//     log(b_kj), not the Wishart expression.)
//   - spherical structure: Λ_k = λ_k I with λ_k ~ Gamma(Dν0/2, rate D s0/2),
//     i.e. ν0 prior degrees of freedom per coordinate; default s0: the mean
//     data variance. In one dimension all three structures are the same model.
//   - tied structure: one precision matrix Λ ~ Wishart(W0, ν0) shared by all
//     components, μ_k | Λ ~ N(m0, (β0 Λ)⁻¹), with the full structure's
//     options and defaults. Its posterior is one Wishart with ν = ν0 + Σ_k N_k
//     and W⁻¹ = W0⁻¹ + Σ_k [N_k S_k + (β0 N_k/β_k)(x̄_k − m0)(x̄_k − m0)ᵀ]
//     (the full structure's update summed over components), and the bound
//     counts the Wishart's prior and entropy terms once.
//
// Settings.Ridge, when positive, is added to the diagonal of the prior
// inverse scale (so it widens the prior and keeps the updates exact); the
// default is no ridge, because W_k⁻¹ ⪰ W0⁻¹ already keeps every precision
// matrix well defined.
//
// # Updates and bound
//
// Coordinate ascent in log space (Bishop 2006, eqs. 10.46–10.49 and
// 10.58–10.66): responsibilities r_nk ∝ exp(E[log π_k] + ½E[log|Λ_k|] −
// (D/2) log 2π − D/(2β_k) − ½ν_k (x_n−m_k)ᵀ W_k (x_n−m_k)) normalised by
// log-sum-exp, with E[log π_k] and E[log|Λ_k|] through the digamma function;
// then α_k = α0 + N_k (or the Beta sticks γ_k1 = 1 + N_k, γ_k2 = α0 + Σ_{j>k}
// N_j), β_k = β0 + N_k, m_k = (β0 m0 + N_k x̄_k)/β_k, ν_k = ν0 + N_k,
// W_k⁻¹ = W0⁻¹ + N_k S_k + (β0 N_k/β_k)(x̄_k − m0)(x̄_k − m0)ᵀ.
//
// The bound is the complete evidence lower bound, eqs. 10.70–10.77 with the
// Wishart normaliser and entropy (B.79, B.82), the Dirichlet normalisers, or
// for stick-breaking the Beta terms; no constant is dropped, so for K = 1 it
// equals the exact log marginal likelihood of the conjugate model (tested).
// It is reported after every iteration through the progress callback and in
// Report.History; it never decreases (tested at every iteration). A run stops
// when |L_t − L_{t−1}| ≤ tolerance·|L_t| (default tolerance 1e-10) or after
// MaxIterations (default 2000; −1 evaluates the start only).
//
// # Start, restarts, determinism
//
// As in the em fitter: k-means++ seeding (Arthur and Vassilvitskii, 2007) on
// standardised columns followed by a nearest-seed assignment gives starting
// responsibilities (default 3 restarts, the highest final bound wins);
// Settings.Labels gives them per row; Settings.Start gives them as the
// posterior probabilities under the caller's parameters (any family). The
// first update is computed from those responsibilities. All random choices
// come from one PCG generator seeded with Settings.Seed. Passes over the data
// use fixed chunks of 1024 rows whose partial sums are added in chunk order,
// so a result is bit-identical for any GOMAXPROCS. A MaxComponents range is
// honoured as the Fitter contract asks (every K is fitted and the served
// model with the lowest BIC or AIC is kept).
//
// # Collapse policy
//
// Nothing is re-seeded. A component that loses its rows reverts to its prior
// (that is how the method selects K), and no precision matrix can become
// singular because W_k⁻¹ ⪰ W0⁻¹. A component whose expected row count N_k =
// Σ_n w_n r_nk is below option min_expected_rows (default D+1, the rows that
// determine a full covariance) is not counted in Report.EffectiveComponents
// and is listed in the notes.
//
// # Served model
//
// Settings.Family chooses what is stored (student_t: the predictive model,
// gaussian: the plug-in model); when it is unset, option served_model does
// (the two must agree when both are given):
//
//   - predictive (default for full and spherical): the posterior predictive
//     density, a mixture of multivariate Student-t components (Bishop 2006,
//     eqs. 10.81–10.82) with weights E[π_k], locations m_k, degrees of freedom
//     ν_k + 1 − D and scale matrices (1+β_k)/((ν_k+1−D) β_k) W_k⁻¹; for the
//     spherical structure, 2a_k degrees of freedom and scale (b_k/a_k)(1+β_k)/β_k I
//     with a_k, b_k the gamma shape and rate. It integrates over the
//     parameters' uncertainty, so nearly empty components have broad, heavy
//     tails.
//   - plugin (default, and the only choice, for diagonal and tied: for
//     diagonal the predictive is a product of univariate Student-t densities,
//     not a multivariate one; for tied its scale matrices differ between
//     components by the factor (1+β_k)/β_k, so it is not a tied mixture):
//     a Gaussian mixture with weights E[π_k], means m_k and covariances
//     E[Λ_k]⁻¹ = W_k⁻¹/ν_k (for tied, the one shared W⁻¹/ν).
//
// Components whose expected weight is below MinServedWeight (1e-10) are left
// out of the served model and the other weights renormalised (noted in the
// report). Report.LogLikelihood, BIC and AIC are those of the served model on
// the training rows; Report.Bound is the final bound; Report.Settings echoes
// every effective option, including "served_model". FitPosterior also returns
// the fitted variational distribution itself.
//
// # Limits
//
// Data values must be finite with magnitude at most 1e100; the options
// concentration, mean_strength and wishart_dof must lie in [1e-300, 1e12];
// wishart_inverse_scale values (and the ridge) at most 1e250 in magnitude;
// prior_mean within 1e6 data standard deviations of the data mean. Errors
// name the row, column, option or value at fault.
//
// # What a result means
//
// The effective number of components and the served density describe the
// training data under this model and prior; they are not a statement that
// a pumping station has that many operating states, nor a safety judgement.
// Decisions about equipment remain with the operator's own procedures.
package vb
