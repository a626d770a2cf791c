package dev.mixd.client;

import io.grpc.Status;

/**
 * The daemon is not in a state where the call can run ({@code FAILED_PRECONDITION}), for
 * example cancelling a fit job that has already ended.
 */
public class FailedPreconditionException extends MixdException {
  private static final long serialVersionUID = 1L;

  /**
   * Creates the exception.
   *
   * @param operation what the client was doing; may be empty
   * @param statusMessage the status message (the daemon's own words); may be empty
   * @param cause the underlying exception, or null
   */
  public FailedPreconditionException(String operation, String statusMessage, Throwable cause) {
    super(Status.Code.FAILED_PRECONDITION, operation, statusMessage, cause);
  }
}
