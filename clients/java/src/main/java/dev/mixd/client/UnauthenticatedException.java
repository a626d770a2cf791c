package dev.mixd.client;

import io.grpc.Status;

/**
 * The call carried no valid credentials ({@code UNAUTHENTICATED}), or the client refused to send
 * its bearer token over a connection without TLS.
 */
public class UnauthenticatedException extends MixdException {
  private static final long serialVersionUID = 1L;

  /**
   * Creates the exception.
   *
   * @param operation what the client was doing; may be empty
   * @param statusMessage the status message (the daemon's own words); may be empty
   * @param cause the underlying exception, or null
   */
  public UnauthenticatedException(String operation, String statusMessage, Throwable cause) {
    super(Status.Code.UNAUTHENTICATED, operation, statusMessage, cause);
  }
}
