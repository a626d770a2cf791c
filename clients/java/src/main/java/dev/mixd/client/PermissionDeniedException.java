package dev.mixd.client;

import io.grpc.Status;

/**
 * The caller's credentials do not allow the call ({@code PERMISSION_DENIED}), for example a token
 * that may only read models calling a method that changes them.
 */
public class PermissionDeniedException extends MixdException {
  private static final long serialVersionUID = 1L;

  /**
   * Creates the exception.
   *
   * @param operation what the client was doing; may be empty
   * @param statusMessage the status message (the daemon's own words); may be empty
   * @param cause the underlying exception, or null
   */
  public PermissionDeniedException(String operation, String statusMessage, Throwable cause) {
    super(Status.Code.PERMISSION_DENIED, operation, statusMessage, cause);
  }
}
