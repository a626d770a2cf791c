package dev.mixd.client;

import io.grpc.Status;

/**
 * What the call would create exists already ({@code ALREADY_EXISTS}).
 */
public class AlreadyExistsException extends MixdException {
  private static final long serialVersionUID = 1L;

  /**
   * Creates the exception.
   *
   * @param operation what the client was doing; may be empty
   * @param statusMessage the status message (the daemon's own words); may be empty
   * @param cause the underlying exception, or null
   */
  public AlreadyExistsException(String operation, String statusMessage, Throwable cause) {
    super(Status.Code.ALREADY_EXISTS, operation, statusMessage, cause);
  }
}
