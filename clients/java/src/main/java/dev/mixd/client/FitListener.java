package dev.mixd.client;

import dev.mixd.api.v1.Types;

/**
 * Receives the events of a running fit: the job first, then progress as the fitter iterates. The
 * daemon sends each caller at most ten progress events a second (always the latest, and the last
 * one before the fit ends), so events may skip iterations. Callbacks run one at a time on the
 * client's callback executor; they should return quickly, and one that throws cancels the fit.
 *
 * <pre>{@code
 * client.fit("pumps", rows, FitOptions.components(3),
 *     p -> System.out.printf("iteration %d: %.3f%n", p.getIteration(), p.getObjective()));
 * }</pre>
 */
@FunctionalInterface
public interface FitListener {
  /** A listener that ignores every event. */
  FitListener NONE = p -> {};

  /**
   * Called with the progress of the running fit.
   *
   * @param progress the number of components being fitted, the restart, the iteration and the
   *     objective (log-likelihood or variational bound) after it
   */
  void onProgress(Types.FitProgress progress);

  /**
   * Called with the job running the fit as soon as the daemon creates it, and again on every
   * change of its state. The default does nothing.
   *
   * @param job the job, named {@code "fitJobs/{id}"}
   */
  default void onJob(Types.FitJob job) {}
}
