package dev.mixd.client;

import java.util.List;

/**
 * A comparison of two model versions p and q over the same features: Monte Carlo estimates of the
 * Kullback–Leibler divergence in both directions, with standard errors, and a matching of their
 * components.
 *
 * <p>KL(p‖q) = E<sub>p</sub>[log p(X) − log q(X)] is estimated from seeded draws of p, and KL(q‖p)
 * from draws of q, in nats. What the numbers mean: 0 says the two models spread probability over
 * the feature space in the same way, larger values say more differently; the two directions differ
 * in general (KL(p‖q) is large where p puts probability that q does not expect). What they do not
 * mean: a divergence says <em>that</em> the models differ, not why (a shifted regime, a new
 * component, a fitting artefact), not which model is right, and not whether the difference matters
 * for a given use. There is no universal threshold: derive alert levels from your own history of
 * comparisons. Being estimates, values near 0 may come out slightly negative; read every value
 * with its standard error, and keep in mind that differences in far tails, which few draws reach,
 * are estimated poorly. Decisions about equipment safety belong to the operator's own procedures.
 */
public final class CompareResult {
  private final String model;
  private final long version;
  private final String otherModel;
  private final long otherVersion;
  private final long samples;
  private final double klForward;
  private final double klForwardStandardError;
  private final double klBackward;
  private final double klBackwardStandardError;
  private final List<ComponentMatch> matches;
  private final int[] unmatchedComponents;
  private final int[] unmatchedOtherComponents;
  private final String componentDistance;

  CompareResult(
      String model,
      long version,
      String otherModel,
      long otherVersion,
      long samples,
      double klForward,
      double klForwardStandardError,
      double klBackward,
      double klBackwardStandardError,
      List<ComponentMatch> matches,
      int[] unmatchedComponents,
      int[] unmatchedOtherComponents,
      String componentDistance) {
    this.model = model;
    this.version = version;
    this.otherModel = otherModel;
    this.otherVersion = otherVersion;
    this.samples = samples;
    this.klForward = klForward;
    this.klForwardStandardError = klForwardStandardError;
    this.klBackward = klBackward;
    this.klBackwardStandardError = klBackwardStandardError;
    this.matches = List.copyOf(matches);
    this.unmatchedComponents = unmatchedComponents;
    this.unmatchedOtherComponents = unmatchedOtherComponents;
    this.componentDistance = componentDistance;
  }

  /**
   * Returns the first model, p, {@code "models/{id}"}.
   *
   * @return the resource name
   */
  public String model() {
    return model;
  }

  /**
   * Returns the version of p.
   *
   * @return the version
   */
  public long version() {
    return version;
  }

  /**
   * Returns the other model, q, {@code "models/{id}"}.
   *
   * @return the resource name
   */
  public String otherModel() {
    return otherModel;
  }

  /**
   * Returns the version of q.
   *
   * @return the version
   */
  public long otherVersion() {
    return otherVersion;
  }

  /**
   * Returns the number of draws per direction.
   *
   * @return the count
   */
  public long samples() {
    return samples;
  }

  /**
   * Returns the estimate of KL(p‖q) in nats, from draws of p.
   *
   * @return the estimate
   */
  public double klForward() {
    return klForward;
  }

  /**
   * Returns the standard error of {@link #klForward()}.
   *
   * @return the standard error
   */
  public double klForwardStandardError() {
    return klForwardStandardError;
  }

  /**
   * Returns the estimate of KL(q‖p) in nats, from draws of q.
   *
   * @return the estimate
   */
  public double klBackward() {
    return klBackward;
  }

  /**
   * Returns the standard error of {@link #klBackward()}.
   *
   * @return the standard error
   */
  public double klBackwardStandardError() {
    return klBackwardStandardError;
  }

  /**
   * Returns the pairs of matched components (min(K<sub>p</sub>, K<sub>q</sub>) of them, ordered by
   * p's component), chosen so that the sum of their distances is smallest.
   *
   * @return the pairs (unmodifiable)
   */
  public List<ComponentMatch> matches() {
    return matches;
  }

  /**
   * Returns the components of p left without a partner (when p has more components).
   *
   * @return the indices
   */
  public int[] unmatchedComponents() {
    return unmatchedComponents;
  }

  /**
   * Returns the components of q left without a partner (when q has more components).
   *
   * @return the indices
   */
  public int[] unmatchedOtherComponents() {
    return unmatchedOtherComponents;
  }

  /**
   * Returns the distance the matching uses: {@code "bhattacharyya"} (between Gaussian components;
   * Student-t components through their moment-matched Gaussians).
   *
   * @return the distance's name
   */
  public String componentDistance() {
    return componentDistance;
  }
}
