package dev.mixd.client;

import java.util.Optional;

/** Per-row component assignments of a batch, in the order of the input rows. */
public final class ClassifyResult {
  private final String model;
  private final long version;
  private final int[] components;
  private final double[] maxPosteriors;
  private final boolean[] confident;
  private final Matrix posteriors;

  ClassifyResult(
      String model,
      long version,
      int[] components,
      double[] maxPosteriors,
      boolean[] confident,
      Matrix posteriors) {
    this.model = model;
    this.version = version;
    this.components = components;
    this.maxPosteriors = maxPosteriors;
    this.confident = confident;
    this.posteriors = posteriors;
  }

  /**
   * Returns the model that classified, {@code "models/{id}"}.
   *
   * @return the model's resource name
   */
  public String model() {
    return model;
  }

  /**
   * Returns the version that classified.
   *
   * @return the version
   */
  public long version() {
    return version;
  }

  /**
   * Returns each row's most probable component, from 0 (ties go to the lower index).
   *
   * @return one index per row
   */
  public int[] components() {
    return components;
  }

  /**
   * Returns each row's largest posterior probability.
   *
   * @return one value per row
   */
  public double[] maxPosteriors() {
    return maxPosteriors;
  }

  /**
   * Returns, for each row, false where its largest posterior is below the threshold set with
   * {@link ClassifyOptions#withMinPosterior} (all true without a threshold).
   *
   * @return one flag per row
   */
  public boolean[] confident() {
    return confident;
  }

  /**
   * Returns the posterior probabilities, rows × components, when asked for with {@link
   * ClassifyOptions#withPosteriors}.
   *
   * @return the matrix, or empty when not asked for
   */
  public Optional<Matrix> posteriors() {
    return Optional.ofNullable(posteriors);
  }
}
