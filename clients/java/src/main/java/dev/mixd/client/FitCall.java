package dev.mixd.client;

import java.util.concurrent.CompletableFuture;
import dev.mixd.api.v1.Types;

/**
 * A fit (or a watch of a fit job) in progress: its job, its eventual model, and a way to cancel
 * it. Returned by {@link MixdClient#fitAsync} and {@link MixdClient#watchJobAsync}.
 *
 * <pre>{@code
 * FitCall call = client.fitAsync("pumps", rows, FitOptions.components(3), p -> {});
 * ...
 * call.cancel();               // the daemon stops the fit
 * call.result().join();        // fails with CancelledException
 * }</pre>
 */
public final class FitCall {
  private final CompletableFuture<Types.FitJob> job;
  private final CallFuture<Types.Model> result;
  private final boolean ownsFit;

  FitCall(CompletableFuture<Types.FitJob> job, CallFuture<Types.Model> result, boolean ownsFit) {
    this.job = job;
    this.result = result;
    this.ownsFit = ownsFit;
  }

  /**
   * Returns a future of the job running the fit, completed as soon as the daemon reports it (its
   * name, {@code "fitJobs/{id}"}, works with {@link MixdClient#getJob} and {@link
   * MixdClient#cancelJob}). It fails like {@link #result()} when the call fails first.
   *
   * @return the job's future
   */
  public CompletableFuture<Types.FitJob> job() {
    return job;
  }

  /**
   * Returns a future of the stored model. It fails with a {@link MixdException}: {@link
   * CancelledException} after {@link #cancel()} or when the job was cancelled, {@link
   * InvalidArgumentException} for a bad request, and so on.
   *
   * @return the model's future
   */
  public CompletableFuture<Types.Model> result() {
    return result;
  }

  /**
   * Cancels the call. For a fit started by {@link MixdClient#fitAsync} the daemon cancels the fit
   * itself and stores nothing; for a watch only the watching stops and the job runs on (use {@link
   * MixdClient#cancelJob} to stop it). Cancelling a finished call does nothing.
   */
  public void cancel() {
    result.cancelCalls();
  }

  /**
   * Returns whether cancelling this call cancels the fit (true for {@code fitAsync}, false for a
   * watch).
   *
   * @return whether the call owns the fit
   */
  public boolean ownsFit() {
    return ownsFit;
  }

  /**
   * Waits for the stored model. An interrupt of the waiting thread cancels the call.
   *
   * @return the model
   * @throws MixdException when the fit fails or is cancelled
   */
  public Types.Model await() {
    return MixdClient.await(result, result.operation);
  }
}
