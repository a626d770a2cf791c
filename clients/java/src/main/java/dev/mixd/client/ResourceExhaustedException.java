package dev.mixd.client;

import io.grpc.Status;

/**
 * The request is beyond one of the daemon's limits ({@code RESOURCE_EXHAUSTED}); the message names the
 * limit and the serve flag that raises it.
 */
public class ResourceExhaustedException extends MixdException {
  private static final long serialVersionUID = 1L;

  /**
   * Creates the exception.
   *
   * @param operation what the client was doing; may be empty
   * @param statusMessage the status message (the daemon's own words); may be empty
   * @param cause the underlying exception, or null
   */
  public ResourceExhaustedException(String operation, String statusMessage, Throwable cause) {
    super(Status.Code.RESOURCE_EXHAUSTED, operation, statusMessage, cause);
  }
}
