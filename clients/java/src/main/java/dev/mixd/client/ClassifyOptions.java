package dev.mixd.client;

/**
 * Options of {@link MixdClient#classify}. Instances are immutable; each {@code with} method returns
 * a changed copy.
 *
 * <p>With {@link #withObserved(boolean[][])} the posteriors are those given each row's observed
 * features only.
 */
public final class ClassifyOptions {
  private static final ClassifyOptions DEFAULTS = new ClassifyOptions(0, 0, false, null);

  private final long version;
  private final double minPosterior;
  private final boolean posteriors;
  private final Observed observed;

  private ClassifyOptions(
      long version, double minPosterior, boolean posteriors, Observed observed) {
    this.version = version;
    this.minPosterior = minPosterior;
    this.posteriors = posteriors;
    this.observed = observed;
  }

  /**
   * Returns the defaults: the newest version, no confidence threshold, no posterior matrix.
   *
   * @return the default options
   */
  public static ClassifyOptions defaults() {
    return DEFAULTS;
  }

  /**
   * Pins a model version.
   *
   * @param version the version; 0 means the newest
   * @return a copy with the version set
   */
  public ClassifyOptions withVersion(long version) {
    return new ClassifyOptions(version, minPosterior, posteriors, observed);
  }

  /**
   * Marks rows whose largest posterior probability is below {@code threshold} as not confident.
   *
   * @param threshold a probability in [0, 1]; 0 disables the mark
   * @return a copy with the threshold set
   */
  public ClassifyOptions withMinPosterior(double threshold) {
    return new ClassifyOptions(version, threshold, posteriors, observed);
  }

  /**
   * Asks for every component's posterior probability as well.
   *
   * @param on whether to return them
   * @return a copy with the flag set
   */
  public ClassifyOptions withPosteriors(boolean on) {
    return new ClassifyOptions(version, minPosterior, on, observed);
  }

  /**
   * Marks which values of the rows are observed ({@code observed[i][j]} for feature {@code j} of
   * row {@code i}); the posteriors are then those given the observed features only. Values at
   * unobserved positions are ignored but must still be finite (put 0 there). The array must have
   * the rows' shape and is read, not copied, when the call sends the rows.
   *
   * @param observed one flag per value, the rows' shape; null means every value is observed
   * @return a copy with the mask set
   */
  public ClassifyOptions withObserved(boolean[][] observed) {
    return new ClassifyOptions(
        version, minPosterior, posteriors, observed == null ? null : Observed.of(observed, "observed"));
  }

  /**
   * Marks which values of the rows are observed, as {@link #withObserved(boolean[][])}, with one
   * flag per value in row-major order (flag {@code i * cols + j} for feature {@code j} of row
   * {@code i}).
   *
   * @param observed rows × cols flags, row after row; null means every value is observed
   * @return a copy with the mask set
   */
  public ClassifyOptions withObserved(boolean[] observed) {
    return new ClassifyOptions(
        version, minPosterior, posteriors, observed == null ? null : Observed.of(observed, "observed"));
  }

  /** The mask, or null when every value is observed. */
  Observed observed() {
    return observed;
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
   * Returns the confidence threshold (0: none).
   *
   * @return the threshold
   */
  public double minPosterior() {
    return minPosterior;
  }

  /**
   * Returns whether the posterior matrix is requested.
   *
   * @return the flag
   */
  public boolean posteriors() {
    return posteriors;
  }
}
