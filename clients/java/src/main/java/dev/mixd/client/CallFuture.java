package dev.mixd.client;

import io.grpc.Context;
import java.util.concurrent.CompletableFuture;
import java.util.function.Supplier;

/**
 * The future of one client operation (one or more RPCs). Its calls start inside a cancellable
 * gRPC {@link Context} forked from the caller's (so a deadline the caller set on its context
 * applies); cancelling the future cancels that context and with it every RPC in flight.
 */
final class CallFuture<T> extends CompletableFuture<T> {
  final String operation;
  final Context.CancellableContext context;
  private volatile boolean cancelledByCaller;

  CallFuture(String operation) {
    this.operation = operation;
    this.context = Context.current().withCancellation();
    whenComplete((v, e) -> context.cancel(null));
  }

  /**
   * Creates the future of a step of this operation (one RPC of several): its context is a child of
   * this one, so cancelling this operation cancels the step too.
   */
  <U> CallFuture<U> child() {
    Context prev = context.attach();
    try {
      return new CallFuture<>(operation);
    } finally {
      context.detach(prev);
    }
  }

  /** Runs {@code start} (which starts RPCs) inside this operation's context. */
  void start(Runnable start) {
    try {
      context.run(start);
    } catch (RuntimeException e) {
      fail(e);
    }
  }

  /** Cancels the operation's RPCs; the future fails with {@link CancelledException}. */
  void cancelCalls() {
    cancelledByCaller = true;
    if (!isDone()) {
      completeExceptionally(new CancelledException(operation, "cancelled by the caller", null));
    }
    context.cancel(null);
  }

  /** Fails the future with {@code t} converted into a {@link MixdException}. */
  void fail(Throwable t) {
    if (isDone()) {
      return;
    }
    if (cancelledByCaller) {
      completeExceptionally(new CancelledException(operation, "cancelled by the caller", t));
    } else if (t instanceof Wire.ResponseException) {
      completeExceptionally(
          MixdException.of(
              io.grpc.Status.Code.INTERNAL,
              operation,
              "unusable response: " + t.getMessage(),
              t));
    } else {
      completeExceptionally(MixdException.from(operation, t));
    }
  }

  /** Completes with the value {@code decode} returns, or fails with what it throws. */
  void succeed(Supplier<T> decode) {
    if (isDone()) {
      return;
    }
    T v;
    try {
      v = decode.get();
    } catch (RuntimeException e) {
      fail(e);
      return;
    }
    complete(v);
  }

  @Override
  public boolean cancel(boolean mayInterruptIfRunning) {
    boolean r = super.cancel(mayInterruptIfRunning);
    cancelledByCaller = true;
    context.cancel(null);
    return r;
  }
}
