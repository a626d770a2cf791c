package dev.mixd.client;

import io.grpc.Status;

/**
 * The named model, model version or fit job does not exist ({@code NOT_FOUND}).
 */
public class NotFoundException extends MixdException {
  private static final long serialVersionUID = 1L;

  /**
   * Creates the exception.
   *
   * @param operation what the client was doing; may be empty
   * @param statusMessage the status message (the daemon's own words); may be empty
   * @param cause the underlying exception, or null
   */
  public NotFoundException(String operation, String statusMessage, Throwable cause) {
    super(Status.Code.NOT_FOUND, operation, statusMessage, cause);
  }
}
