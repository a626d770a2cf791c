package dev.mixd.client;

import java.util.Optional;

/**
 * The conditional distribution of each row's unobserved features given its observed ones, in the
 * order of the input rows: a mixture whose weights are the components' posteriors given the
 * observed features and whose components are the components' conditionals (Gaussian: the Schur
 * complement; Student-t: Student-t with ν + (observed count) degrees of freedom).
 *
 * <p>What it means and does not mean: the means are the model's expected values of the missing
 * readings given the observed ones, and the spreads their uncertainty <em>under the model</em>.
 * They are estimates, not measurements: when the observed values are unusual for the model (see
 * {@link #logDensities()}) or the model is wrong, a prediction can be far off while its spread
 * looks small. A predicted value must not stand in for a measurement in decisions about the safety
 * of equipment; those belong to the operator's own procedures.
 */
public final class PredictResult {
  private final String model;
  private final long version;
  private final Matrix means;
  private final double[] logDensities;
  private final Matrix standardDeviations;
  private final Matrix covariances;
  private final Matrix posteriors;
  private final Matrix componentMeans;
  private final Matrix componentDegreesOfFreedom;
  private final Matrix componentScales;
  private final Matrix draws;

  PredictResult(
      String model,
      long version,
      Matrix means,
      double[] logDensities,
      Matrix standardDeviations,
      Matrix covariances,
      Matrix posteriors,
      Matrix componentMeans,
      Matrix componentDegreesOfFreedom,
      Matrix componentScales,
      Matrix draws) {
    this.model = model;
    this.version = version;
    this.means = means;
    this.logDensities = logDensities;
    this.standardDeviations = standardDeviations;
    this.covariances = covariances;
    this.posteriors = posteriors;
    this.componentMeans = componentMeans;
    this.componentDegreesOfFreedom = componentDegreesOfFreedom;
    this.componentScales = componentScales;
    this.draws = draws;
  }

  /**
   * Returns the model used, {@code "models/{id}"}.
   *
   * @return the model's resource name
   */
  public String model() {
    return model;
  }

  /**
   * Returns the version used (the same for every request of a large batch).
   *
   * @return the version
   */
  public long version() {
    return version;
  }

  /**
   * Returns each row with its unobserved features replaced by their conditional mean, rows ×
   * dimension; observed values are copied.
   *
   * @return the completed rows
   */
  public Matrix means() {
    return means;
  }

  /**
   * Returns the log-density of each row's observed features under the marginal mixture (0 for a
   * row with nothing observed).
   *
   * @return one value per row
   */
  public double[] logDensities() {
    return logDensities;
  }

  /**
   * Returns the conditional standard deviations, rows × dimension (0 for observed features), when
   * asked for with {@link PredictOptions#withStandardDeviations}.
   *
   * @return the matrix, or empty when not asked for
   */
  public Optional<Matrix> standardDeviations() {
    return Optional.ofNullable(standardDeviations);
  }

  /**
   * Returns each row's conditional covariance matrix (law of total covariance over the
   * components), rows × dimension², one row-major block per row with zero rows and columns for
   * observed features, when asked for with {@link PredictOptions#withCovariances}.
   *
   * @return the matrix, or empty when not asked for
   */
  public Optional<Matrix> covariances() {
    return Optional.ofNullable(covariances);
  }

  /**
   * Returns the conditional weights of the components, rows × components, when asked for with
   * {@link PredictOptions#withComponents}.
   *
   * @return the matrix, or empty when not asked for
   */
  public Optional<Matrix> posteriors() {
    return Optional.ofNullable(posteriors);
  }

  /**
   * Returns each component's conditional mean with observed values copied, rows × (components ·
   * dimension), component after component within a row, when asked for with {@link
   * PredictOptions#withComponents}.
   *
   * @return the matrix, or empty when not asked for
   */
  public Optional<Matrix> componentMeans() {
    return Optional.ofNullable(componentMeans);
  }

  /**
   * Returns, for Student-t models, each component's conditional degrees of freedom, rows ×
   * components, when asked for with {@link PredictOptions#withComponents}.
   *
   * @return the matrix, or empty for Gaussian models or when not asked for
   */
  public Optional<Matrix> componentDegreesOfFreedom() {
    return Optional.ofNullable(componentDegreesOfFreedom);
  }

  /**
   * Returns each component's conditional covariance (Gaussian) or scale (Student-t) matrix, rows ×
   * (components · dimension²), row-major blocks component after component, when asked for with
   * {@link PredictOptions#withComponentScales}.
   *
   * @return the matrix, or empty when not asked for
   */
  public Optional<Matrix> componentScales() {
    return Optional.ofNullable(componentScales);
  }

  /**
   * Returns the drawn completed rows, (rows · draws) × dimension: the draws of row {@code i} are
   * rows {@code i·draws} to {@code (i+1)·draws − 1}; observed values are copied. Present when
   * asked for with {@link PredictOptions#withDraws}.
   *
   * @return the matrix, or empty when no draws were asked for
   */
  public Optional<Matrix> draws() {
    return Optional.ofNullable(draws);
  }
}
