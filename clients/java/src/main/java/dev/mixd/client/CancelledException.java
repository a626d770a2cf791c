package dev.mixd.client;

import io.grpc.Status;

/**
 * The call, or the fit job it followed, was cancelled ({@code CANCELLED}).
 */
public class CancelledException extends MixdException {
  private static final long serialVersionUID = 1L;

  /**
   * Creates the exception.
   *
   * @param operation what the client was doing; may be empty
   * @param statusMessage the status message (the daemon's own words); may be empty
   * @param cause the underlying exception, or null
   */
  public CancelledException(String operation, String statusMessage, Throwable cause) {
    super(Status.Code.CANCELLED, operation, statusMessage, cause);
  }
}
