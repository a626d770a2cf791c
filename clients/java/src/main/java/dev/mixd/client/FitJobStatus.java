package dev.mixd.client;

import java.util.Optional;
import dev.mixd.api.v1.Types;

/** A fit job as the daemon reports it and, once it succeeded, the model it wrote. */
public final class FitJobStatus {
  private final Types.FitJob job;
  private final Types.Model model;

  FitJobStatus(Types.FitJob job, Types.Model model) {
    this.job = job;
    this.model = model;
  }

  /**
   * Returns the job: its state, latest progress, and error code and message when it failed.
   *
   * @return the job
   */
  public Types.FitJob job() {
    return job;
  }

  /**
   * Returns the model the job wrote, once it succeeded.
   *
   * @return the model, or empty while the job runs or when it did not succeed
   */
  public Optional<Types.Model> model() {
    return Optional.ofNullable(model);
  }
}
