package dev.mixd.client;

/**
 * Options of {@link MixdClient#score}. Instances are immutable; each {@code with} method returns a
 * changed copy.
 *
 * <pre>{@code
 * ScoreOptions opts = ScoreOptions.defaults().withVersion(3).withComponentLogDensities(true);
 * }</pre>
 *
 * <p>With {@link #withObserved(boolean[][])} rows are scored under the marginal mixture of their
 * observed features (exact for Gaussian and Student-t components); their percentile is then NaN.
 */
public final class ScoreOptions {
  private static final ScoreOptions DEFAULTS = new ScoreOptions(0, false, 0, null);

  private final long version;
  private final boolean componentLogDensities;
  private final double outlierLevel;
  private final Observed observed;

  private ScoreOptions(
      long version, boolean componentLogDensities, double outlierLevel, Observed observed) {
    this.version = version;
    this.componentLogDensities = componentLogDensities;
    this.outlierLevel = outlierLevel;
    this.observed = observed;
  }

  /**
   * Returns the defaults: the newest version, no per-component output, the model's own outlier
   * level.
   *
   * @return the default options
   */
  public static ScoreOptions defaults() {
    return DEFAULTS;
  }

  /**
   * Pins a model version.
   *
   * @param version the version; 0 means the newest
   * @return a copy with the version set
   */
  public ScoreOptions withVersion(long version) {
    return new ScoreOptions(version, componentLogDensities, outlierLevel, observed);
  }

  /**
   * Asks for each component's log-density (without its weight) as well.
   *
   * @param on whether to return them
   * @return a copy with the flag set
   */
  public ScoreOptions withComponentLogDensities(boolean on) {
    return new ScoreOptions(version, on, outlierLevel, observed);
  }

  /**
   * Sets the tail probability level of the outlier rule of Student-t models.
   *
   * @param level a level strictly between 0 and 1, or 0 for the level stored with the model
   * @return a copy with the level set
   */
  public ScoreOptions withOutlierLevel(double level) {
    return new ScoreOptions(version, componentLogDensities, level, observed);
  }

  /**
   * Marks which values of the rows are observed: {@code observed[i][j]} is true when feature
   * {@code j} of row {@code i} was observed. Rows are then scored under the marginal mixture of
   * their observed features, and a row with an unobserved feature gets a NaN percentile (a
   * marginal log-density is not comparable with the training rows' full ones). Values at
   * unobserved positions are ignored but must still be finite (put 0 there): NaN is never a
   * missing-value marker. The array must have the rows' shape (checked when the call starts) and
   * is read, not copied, when the call sends the rows.
   *
   * @param observed one flag per value, the rows' shape; null means every value is observed
   * @return a copy with the mask set
   */
  public ScoreOptions withObserved(boolean[][] observed) {
    return new ScoreOptions(
        version,
        componentLogDensities,
        outlierLevel,
        observed == null ? null : Observed.of(observed, "observed"));
  }

  /**
   * Marks which values of the rows are observed, as {@link #withObserved(boolean[][])}, with one
   * flag per value in row-major order (the layout of the flat {@code double[] values, int cols}
   * calls: flag {@code i * cols + j} belongs to feature {@code j} of row {@code i}).
   *
   * @param observed rows × cols flags, row after row; null means every value is observed
   * @return a copy with the mask set
   */
  public ScoreOptions withObserved(boolean[] observed) {
    return new ScoreOptions(
        version,
        componentLogDensities,
        outlierLevel,
        observed == null ? null : Observed.of(observed, "observed"));
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
   * Returns whether per-component log-densities are requested.
   *
   * @return the flag
   */
  public boolean componentLogDensities() {
    return componentLogDensities;
  }

  /**
   * Returns the outlier level (0: the model's own).
   *
   * @return the level
   */
  public double outlierLevel() {
    return outlierLevel;
  }
}
