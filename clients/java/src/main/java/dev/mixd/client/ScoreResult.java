package dev.mixd.client;

import java.util.Optional;

/**
 * Per-row scores of a batch, in the order of the input rows. However the batch travelled (one
 * message or many chunks), the result is the same.
 */
public final class ScoreResult {
  private final String model;
  private final long version;
  private final double[] logDensities;
  private final double[] percentiles;
  private final Matrix componentLogDensities;
  private final double logLikelihood;
  private final double[] outlierStatistics;
  private final boolean[] outliers;

  ScoreResult(
      String model,
      long version,
      double[] logDensities,
      double[] percentiles,
      Matrix componentLogDensities,
      double logLikelihood,
      double[] outlierStatistics,
      boolean[] outliers) {
    this.model = model;
    this.version = version;
    this.logDensities = logDensities;
    this.percentiles = percentiles;
    this.componentLogDensities = componentLogDensities;
    this.logLikelihood = logLikelihood;
    this.outlierStatistics = outlierStatistics;
    this.outliers = outliers;
  }

  /**
   * Returns the model that scored, {@code "models/{id}"}.
   *
   * @return the model's resource name
   */
  public String model() {
    return model;
  }

  /**
   * Returns the version that scored (every chunk of a batch uses the same one).
   *
   * @return the version
   */
  public long version() {
    return version;
  }

  /**
   * Returns the mixture log-density (natural log) of each row; for a row scored with unobserved
   * features, the log-density of its observed features under the marginal mixture (0 when nothing
   * is observed).
   *
   * @return one value per row
   */
  public double[] logDensities() {
    return logDensities;
  }

  /**
   * Returns each row's percentile in [0, 100] among the log-densities of the model's training rows:
   * 0.1 means the row is less likely under the model than 99.9% of the training rows. This is a
   * statement about the model and its training data only: a low percentile does not say that the
   * equipment that produced the row is faulty, nor a high one that it is healthy. Rows scored with
   * an unobserved feature ({@link ScoreOptions#withObserved(boolean[][])}) get NaN: the
   * log-density of their observed features is not comparable with the training rows' full ones.
   * All are NaN for a model stored without training quantiles (an imported model without a fit
   * report).
   *
   * @return one value per row
   */
  public double[] percentiles() {
    return percentiles;
  }

  /**
   * Returns each component's log-density (without its weight), rows × components, when asked for
   * with {@link ScoreOptions#withComponentLogDensities}.
   *
   * @return the matrix, or empty when not asked for
   */
  public Optional<Matrix> componentLogDensities() {
    return Optional.ofNullable(componentLogDensities);
  }

  /**
   * Returns the sum of the log-densities.
   *
   * @return the log-likelihood of the batch
   */
  public double logLikelihood() {
    return logLikelihood;
  }

  /**
   * Returns, for Student-t models, each row's outlier statistic: the squared Mahalanobis distance
   * to its most probable component divided by the dimension.
   *
   * @return one value per row, or empty when the daemon sent none
   */
  public Optional<double[]> outlierStatistics() {
    return Optional.ofNullable(outlierStatistics);
  }

  /**
   * Returns, for Student-t models, whether each row lies beyond the outlier level. A flag marks
   * statistical rarity under the fitted model, not a diagnosis; decisions about equipment belong to
   * the operator's own procedures.
   *
   * @return one flag per row, or empty when the daemon sent none
   */
  public Optional<boolean[]> outliers() {
    return Optional.ofNullable(outliers);
  }
}
