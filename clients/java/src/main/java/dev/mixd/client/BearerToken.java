package dev.mixd.client;

import io.grpc.CallCredentials;
import io.grpc.Metadata;
import io.grpc.SecurityLevel;
import io.grpc.Status;
import java.util.concurrent.Executor;
import java.util.function.Supplier;

/**
 * Call credentials that add {@code authorization: Bearer <token>} to every call. The token is not
 * sent over a connection without TLS unless that was allowed explicitly (Unix sockets are allowed:
 * they never leave the machine).
 */
final class BearerToken extends CallCredentials {
  static final Metadata.Key<String> AUTHORIZATION =
      Metadata.Key.of("authorization", Metadata.ASCII_STRING_MARSHALLER);

  private final Supplier<String> token;
  private final boolean allowWithoutTls;

  BearerToken(Supplier<String> token, boolean allowWithoutTls) {
    this.token = token;
    this.allowWithoutTls = allowWithoutTls;
  }

  @Override
  public void applyRequestMetadata(
      RequestInfo info, Executor appExecutor, MetadataApplier applier) {
    if (!allowWithoutTls && info.getSecurityLevel() != SecurityLevel.PRIVACY_AND_INTEGRITY) {
      applier.fail(
          Status.UNAUTHENTICATED.withDescription(
              "the bearer token is only sent over TLS: connect with TLS, or allow it with"
                  + " MixdClient.Builder.allowTokenWithoutTls(true)"));
      return;
    }
    String t;
    try {
      t = token.get();
    } catch (RuntimeException e) {
      applier.fail(Status.UNAUTHENTICATED.withDescription("bearer token: " + e).withCause(e));
      return;
    }
    if (t == null || t.isEmpty()) {
      applier.fail(Status.UNAUTHENTICATED.withDescription("bearer token is empty"));
      return;
    }
    Metadata md = new Metadata();
    md.put(AUTHORIZATION, "Bearer " + t);
    applier.apply(md);
  }
}
