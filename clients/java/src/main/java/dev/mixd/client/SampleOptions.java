package dev.mixd.client;

/**
 * Options of {@link MixdClient#sample}. Instances are immutable; each {@code with} method returns a
 * changed copy.
 */
public final class SampleOptions {
  private static final SampleOptions DEFAULTS = new SampleOptions(0, 0);

  private final long version;
  private final long seed;

  private SampleOptions(long version, long seed) {
    this.version = version;
    this.seed = seed;
  }

  /**
   * Returns the defaults: the newest version, seed 0.
   *
   * @return the default options
   */
  public static SampleOptions defaults() {
    return DEFAULTS;
  }

  /**
   * Pins a model version.
   *
   * @param version the version; 0 means the newest
   * @return a copy with the version set
   */
  public SampleOptions withVersion(long version) {
    return new SampleOptions(version, seed);
  }

  /**
   * Sets the seed of the draw: the same model, seed and count give the same rows, whether they
   * travel in one message or in many.
   *
   * @param seed the seed, read as an unsigned 64-bit integer
   * @return a copy with the seed set
   */
  public SampleOptions withSeed(long seed) {
    return new SampleOptions(version, seed);
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
   * Returns the seed (an unsigned 64-bit integer).
   *
   * @return the seed
   */
  public long seed() {
    return seed;
  }
}
