package dev.mixd.client;

import io.grpc.Status;

/**
 * The daemon does not implement the call or the requested feature ({@code UNIMPLEMENTED}).
 */
public class UnimplementedException extends MixdException {
  private static final long serialVersionUID = 1L;

  /**
   * Creates the exception.
   *
   * @param operation what the client was doing; may be empty
   * @param statusMessage the status message (the daemon's own words); may be empty
   * @param cause the underlying exception, or null
   */
  public UnimplementedException(String operation, String statusMessage, Throwable cause) {
    super(Status.Code.UNIMPLEMENTED, operation, statusMessage, cause);
  }
}
