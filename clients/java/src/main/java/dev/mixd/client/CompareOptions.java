package dev.mixd.client;

/**
 * Options of {@link MixdClient#compareModels}: the number and seed of the Monte Carlo draws.
 * Instances are immutable; each {@code with} method returns a changed copy.
 */
public final class CompareOptions {
  private static final CompareOptions DEFAULTS = new CompareOptions(0, 0);

  private final long samples;
  private final long seed;

  private CompareOptions(long samples, long seed) {
    this.samples = samples;
    this.seed = seed;
  }

  /**
   * Returns the defaults: the daemon's number of draws (20000 per direction), seed 0.
   *
   * @return the default options
   */
  public static CompareOptions defaults() {
    return DEFAULTS;
  }

  /**
   * Sets the number of draws per direction.
   *
   * @param samples at least 2, or 0 for the daemon's default
   * @return a copy with the count set
   */
  public CompareOptions withSamples(long samples) {
    return new CompareOptions(samples, seed);
  }

  /**
   * Sets the seed of the draws: the same versions, samples and seed give the same result.
   *
   * @param seed the seed (read as an unsigned 64-bit value)
   * @return a copy with the seed set
   */
  public CompareOptions withSeed(long seed) {
    return new CompareOptions(samples, seed);
  }

  /**
   * Returns the number of draws per direction (0: the daemon's default).
   *
   * @return the count
   */
  public long samples() {
    return samples;
  }

  /**
   * Returns the seed of the draws.
   *
   * @return the seed
   */
  public long seed() {
    return seed;
  }
}
