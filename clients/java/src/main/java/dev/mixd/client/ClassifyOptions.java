package dev.mixd.client;

/**
 * Options of {@link MixdClient#classify}. Instances are immutable; each {@code with} method returns
 * a changed copy.
 */
public final class ClassifyOptions {
  private static final ClassifyOptions DEFAULTS = new ClassifyOptions(0, 0, false);

  private final long version;
  private final double minPosterior;
  private final boolean posteriors;

  private ClassifyOptions(long version, double minPosterior, boolean posteriors) {
    this.version = version;
    this.minPosterior = minPosterior;
    this.posteriors = posteriors;
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
    return new ClassifyOptions(version, minPosterior, posteriors);
  }

  /**
   * Marks rows whose largest posterior probability is below {@code threshold} as not confident.
   *
   * @param threshold a probability in [0, 1]; 0 disables the mark
   * @return a copy with the threshold set
   */
  public ClassifyOptions withMinPosterior(double threshold) {
    return new ClassifyOptions(version, threshold, posteriors);
  }

  /**
   * Asks for every component's posterior probability as well.
   *
   * @param on whether to return them
   * @return a copy with the flag set
   */
  public ClassifyOptions withPosteriors(boolean on) {
    return new ClassifyOptions(version, minPosterior, on);
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
