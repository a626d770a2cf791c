package dev.mixd.client;

/**
 * Options of {@link MixdClient#predict}: the model version, which optional outputs to return, and
 * the number and seed of draws. Instances are immutable; each {@code with} method returns a changed
 * copy.
 *
 * <pre>{@code
 * PredictOptions opts = PredictOptions.defaults().withStandardDeviations(true).withDraws(20, 7);
 * }</pre>
 */
public final class PredictOptions {
  private static final PredictOptions DEFAULTS =
      new PredictOptions(0, false, false, false, false, 0, 0);

  private final long version;
  private final boolean standardDeviations;
  private final boolean covariances;
  private final boolean components;
  private final boolean componentScales;
  private final int draws;
  private final long seed;

  private PredictOptions(
      long version,
      boolean standardDeviations,
      boolean covariances,
      boolean components,
      boolean componentScales,
      int draws,
      long seed) {
    this.version = version;
    this.standardDeviations = standardDeviations;
    this.covariances = covariances;
    this.components = components;
    this.componentScales = componentScales;
    this.draws = draws;
    this.seed = seed;
  }

  /**
   * Returns the defaults: the newest version, only the conditional means and log-densities, no
   * draws.
   *
   * @return the default options
   */
  public static PredictOptions defaults() {
    return DEFAULTS;
  }

  /**
   * Pins a model version. Without one the newest version is looked up once, so that every request
   * of a large batch uses the same version.
   *
   * @param version the version; 0 means the newest
   * @return a copy with the version set
   */
  public PredictOptions withVersion(long version) {
    return new PredictOptions(
        version, standardDeviations, covariances, components, componentScales, draws, seed);
  }

  /**
   * Asks for the conditional standard deviation of every feature (0 for observed features).
   *
   * @param on whether to return them
   * @return a copy with the flag set
   */
  public PredictOptions withStandardDeviations(boolean on) {
    return new PredictOptions(version, on, covariances, components, componentScales, draws, seed);
  }

  /**
   * Asks for each row's conditional covariance matrix.
   *
   * @param on whether to return them
   * @return a copy with the flag set
   */
  public PredictOptions withCovariances(boolean on) {
    return new PredictOptions(
        version, standardDeviations, on, components, componentScales, draws, seed);
  }

  /**
   * Asks for the per-component parts: the conditional weights (posteriors given the observed
   * features), the components' conditional means and, for Student-t models, their conditional
   * degrees of freedom.
   *
   * @param on whether to return them
   * @return a copy with the flag set
   */
  public PredictOptions withComponents(boolean on) {
    return new PredictOptions(
        version, standardDeviations, covariances, on, componentScales, draws, seed);
  }

  /**
   * Asks for each component's conditional covariance (Gaussian) or scale (Student-t) matrix.
   *
   * @param on whether to return them
   * @return a copy with the flag set
   */
  public PredictOptions withComponentScales(boolean on) {
    return new PredictOptions(
        version, standardDeviations, covariances, components, on, draws, seed);
  }

  /**
   * Asks for completed rows drawn from each row's conditional distribution (multiple
   * imputation). Row {@code i}'s draws depend only on the model version, the seed and {@code i},
   * not on how the batch is split into requests.
   *
   * @param count draws per row, at least 0 (0 draws none)
   * @param seed seed of the draws (read as an unsigned 64-bit value)
   * @return a copy with the draws set
   */
  public PredictOptions withDraws(int count, long seed) {
    return new PredictOptions(
        version, standardDeviations, covariances, components, componentScales, count, seed);
  }

  /**
   * Returns the model version to use (0: newest).
   *
   * @return the version
   */
  public long version() {
    return version;
  }

  /**
   * Returns whether standard deviations are requested.
   *
   * @return the flag
   */
  public boolean standardDeviations() {
    return standardDeviations;
  }

  /**
   * Returns whether covariance matrices are requested.
   *
   * @return the flag
   */
  public boolean covariances() {
    return covariances;
  }

  /**
   * Returns whether the per-component parts are requested.
   *
   * @return the flag
   */
  public boolean components() {
    return components;
  }

  /**
   * Returns whether the components' conditional matrices are requested.
   *
   * @return the flag
   */
  public boolean componentScales() {
    return componentScales;
  }

  /**
   * Returns the number of draws per row.
   *
   * @return the count (0: none)
   */
  public int draws() {
    return draws;
  }

  /**
   * Returns the seed of the draws.
   *
   * @return the seed (an unsigned 64-bit value)
   */
  public long seed() {
    return seed;
  }
}
