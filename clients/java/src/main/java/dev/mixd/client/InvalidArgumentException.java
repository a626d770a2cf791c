package dev.mixd.client;

import io.grpc.Status;

/**
 * The request was malformed ({@code INVALID_ARGUMENT}): a non-finite value in a row, a column count
 * that differs from the model's dimension, an unknown option, an invalid model document. The
 * message names the field, row or value; nothing was stored.
 */
public class InvalidArgumentException extends MixdException {
  private static final long serialVersionUID = 1L;

  /**
   * Creates the exception.
   *
   * @param operation what the client was doing; may be empty
   * @param statusMessage the status message (the daemon's own words); may be empty
   * @param cause the underlying exception, or null
   */
  public InvalidArgumentException(String operation, String statusMessage, Throwable cause) {
    super(Status.Code.INVALID_ARGUMENT, operation, statusMessage, cause);
  }
}
