package dev.mixd.client;

import io.grpc.Status;

/**
 * The call did not finish before its deadline ({@code DEADLINE_EXCEEDED}).
 */
public class DeadlineExceededException extends MixdException {
  private static final long serialVersionUID = 1L;

  /**
   * Creates the exception.
   *
   * @param operation what the client was doing; may be empty
   * @param statusMessage the status message (the daemon's own words); may be empty
   * @param cause the underlying exception, or null
   */
  public DeadlineExceededException(String operation, String statusMessage, Throwable cause) {
    super(Status.Code.DEADLINE_EXCEEDED, operation, statusMessage, cause);
  }
}
