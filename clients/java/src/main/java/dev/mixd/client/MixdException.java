package dev.mixd.client;

import io.grpc.Status;
import io.grpc.StatusException;
import io.grpc.StatusRuntimeException;
import java.util.Objects;

/**
 * A call to the mixd daemon failed.
 *
 * <p>Every failure carries the canonical gRPC {@link Status.Code} and the status message, which
 * for errors raised by the daemon is the daemon's own text (it names the field, row or limit at
 * fault). The codes the daemon documents have their own subclasses, so callers can catch what they
 * can act on:
 *
 * <ul>
 *   <li>{@link InvalidArgumentException} — the request is malformed (NaN in a row, wrong column
 *       count, bad option);
 *   <li>{@link NotFoundException} — no such model, version or job;
 *   <li>{@link AlreadyExistsException}, {@link FailedPreconditionException},
 *       {@link ResourceExhaustedException} — conflicts and limits;
 *   <li>{@link UnavailableException} — no daemon at the address, or a fitter crashed; retryable;
 *   <li>{@link DeadlineExceededException}, {@link CancelledException} — the call ran out of time
 *       or was cancelled;
 *   <li>{@link UnauthenticatedException}, {@link PermissionDeniedException} — missing, wrong or
 *       insufficient credentials;
 *   <li>{@link UnimplementedException}.
 * </ul>
 *
 * Any other code is reported as a plain {@code MixdException}. Checks the client makes before
 * sending anything (ragged rows, negative counts) raise the same classes, with the code the daemon
 * would have used.
 */
public class MixdException extends RuntimeException {
  private static final long serialVersionUID = 1L;

  private final transient Status.Code code;
  private final String operation;
  private final String statusMessage;

  /**
   * Creates an exception.
   *
   * @param code the gRPC status code
   * @param operation what the client was doing, e.g. {@code "score pumps"}; may be empty
   * @param statusMessage the status message (the daemon's own words); may be empty
   * @param cause the underlying exception, or null
   */
  public MixdException(Status.Code code, String operation, String statusMessage, Throwable cause) {
    super(format(code, operation, statusMessage), cause);
    this.code = Objects.requireNonNull(code, "code");
    this.operation = operation == null ? "" : operation;
    this.statusMessage = statusMessage == null ? "" : statusMessage;
  }

  private static String format(Status.Code code, String operation, String msg) {
    StringBuilder b = new StringBuilder();
    if (operation != null && !operation.isEmpty()) {
      b.append(operation).append(": ");
    }
    b.append(code);
    if (msg != null && !msg.isEmpty()) {
      b.append(": ").append(msg);
    }
    return b.toString();
  }

  /**
   * Returns the gRPC status code of the failure.
   *
   * @return the code, never {@link Status.Code#OK}
   */
  public Status.Code code() {
    return code;
  }

  /**
   * Returns what the client was doing when the call failed, e.g. {@code "score pumps"}.
   *
   * @return the operation, possibly empty
   */
  public String operation() {
    return operation;
  }

  /**
   * Returns the status message without the client's prefix: for failures reported by the daemon,
   * the daemon's own message.
   *
   * @return the message, possibly empty
   */
  public String statusMessage() {
    return statusMessage;
  }

  /**
   * Returns whether repeating the same call later may succeed (the code is {@code UNAVAILABLE}).
   *
   * @return true for {@link UnavailableException}
   */
  public boolean isRetryable() {
    return code == Status.Code.UNAVAILABLE;
  }

  /**
   * Creates the exception class that matches {@code code}.
   *
   * @param code the gRPC status code
   * @param operation what the client was doing; may be empty
   * @param statusMessage the status message; may be empty
   * @param cause the underlying exception, or null
   * @return an instance of the subclass for {@code code}, or of {@code MixdException}
   */
  public static MixdException of(
      Status.Code code, String operation, String statusMessage, Throwable cause) {
    switch (code) {
      case INVALID_ARGUMENT:
        return new InvalidArgumentException(operation, statusMessage, cause);
      case NOT_FOUND:
        return new NotFoundException(operation, statusMessage, cause);
      case ALREADY_EXISTS:
        return new AlreadyExistsException(operation, statusMessage, cause);
      case FAILED_PRECONDITION:
        return new FailedPreconditionException(operation, statusMessage, cause);
      case RESOURCE_EXHAUSTED:
        return new ResourceExhaustedException(operation, statusMessage, cause);
      case UNAVAILABLE:
        return new UnavailableException(operation, statusMessage, cause);
      case DEADLINE_EXCEEDED:
        return new DeadlineExceededException(operation, statusMessage, cause);
      case CANCELLED:
        return new CancelledException(operation, statusMessage, cause);
      case UNIMPLEMENTED:
        return new UnimplementedException(operation, statusMessage, cause);
      case UNAUTHENTICATED:
        return new UnauthenticatedException(operation, statusMessage, cause);
      case PERMISSION_DENIED:
        return new PermissionDeniedException(operation, statusMessage, cause);
      default:
        return new MixdException(code, operation, statusMessage, cause);
    }
  }

  /**
   * Converts any failure of a call into a {@code MixdException}: gRPC status exceptions keep their
   * code and message, a {@code MixdException} is returned as it is, and anything else becomes
   * {@code INTERNAL} (a fault of the client) with the exception's text.
   *
   * @param operation what the client was doing
   * @param t the failure
   * @return the converted exception
   */
  public static MixdException from(String operation, Throwable t) {
    if (t instanceof MixdException) {
      return (MixdException) t;
    }
    Status s = null;
    if (t instanceof StatusRuntimeException) {
      s = ((StatusRuntimeException) t).getStatus();
    } else if (t instanceof StatusException) {
      s = ((StatusException) t).getStatus();
    }
    if (s != null) {
      String msg = s.getDescription();
      if (msg == null && s.getCause() != null) {
        msg = s.getCause().toString();
      }
      return of(s.getCode(), operation, msg, t);
    }
    return of(Status.Code.INTERNAL, operation, String.valueOf(t), t);
  }

  /**
   * Returns an exception of the same class, code and message whose cause is this one; blocking
   * calls throw it so that the stack trace shows the caller's thread.
   */
  MixdException rethrown() {
    return of(code, operation, statusMessage, this);
  }
}
