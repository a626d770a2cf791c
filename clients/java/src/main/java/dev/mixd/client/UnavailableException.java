package dev.mixd.client;

import io.grpc.Status;

/**
 * The daemon could not be reached, is shutting down, or a fitter process crashed
 * ({@code UNAVAILABLE}). The same call may succeed when retried later.
 */
public class UnavailableException extends MixdException {
  private static final long serialVersionUID = 1L;

  /**
   * Creates the exception.
   *
   * @param operation what the client was doing; may be empty
   * @param statusMessage the status message (the daemon's own words); may be empty
   * @param cause the underlying exception, or null
   */
  public UnavailableException(String operation, String statusMessage, Throwable cause) {
    super(Status.Code.UNAVAILABLE, operation, statusMessage, cause);
  }
}
