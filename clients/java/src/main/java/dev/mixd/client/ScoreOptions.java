package dev.mixd.client;

/**
 * Options of {@link MixdClient#score}. Instances are immutable; each {@code with} method returns a
 * changed copy.
 *
 * <pre>{@code
 * ScoreOptions opts = ScoreOptions.defaults().withVersion(3).withComponentLogDensities(true);
 * }</pre>
 */
public final class ScoreOptions {
  private static final ScoreOptions DEFAULTS = new ScoreOptions(0, false, 0);

  private final long version;
  private final boolean componentLogDensities;
  private final double outlierLevel;

  private ScoreOptions(long version, boolean componentLogDensities, double outlierLevel) {
    this.version = version;
    this.componentLogDensities = componentLogDensities;
    this.outlierLevel = outlierLevel;
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
    return new ScoreOptions(version, componentLogDensities, outlierLevel);
  }

  /**
   * Asks for each component's log-density (without its weight) as well.
   *
   * @param on whether to return them
   * @return a copy with the flag set
   */
  public ScoreOptions withComponentLogDensities(boolean on) {
    return new ScoreOptions(version, on, outlierLevel);
  }

  /**
   * Sets the tail probability level of the outlier rule of Student-t models.
   *
   * @param level a level strictly between 0 and 1, or 0 for the level stored with the model
   * @return a copy with the level set
   */
  public ScoreOptions withOutlierLevel(double level) {
    return new ScoreOptions(version, componentLogDensities, level);
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
