package dev.mixd.client;

import io.grpc.CallCredentials;
import io.grpc.Channel;
import io.grpc.ChannelCredentials;
import io.grpc.ClientInterceptor;
import io.grpc.ClientInterceptors;
import io.grpc.Deadline;
import io.grpc.InsecureChannelCredentials;
import io.grpc.ManagedChannel;
import io.grpc.Status;
import io.grpc.TlsChannelCredentials;
import io.grpc.netty.shaded.io.grpc.netty.NettyChannelBuilder;
import io.grpc.netty.shaded.io.netty.channel.EventLoopGroup;
import io.grpc.netty.shaded.io.netty.channel.MultiThreadIoEventLoopGroup;
import io.grpc.netty.shaded.io.netty.channel.epoll.Epoll;
import io.grpc.netty.shaded.io.netty.channel.epoll.EpollDomainSocketChannel;
import io.grpc.netty.shaded.io.netty.channel.epoll.EpollIoHandler;
import io.grpc.netty.shaded.io.netty.channel.unix.DomainSocketAddress;
import io.grpc.netty.shaded.io.netty.util.concurrent.DefaultThreadFactory;
import io.grpc.stub.ClientCallStreamObserver;
import io.grpc.stub.ClientResponseObserver;
import io.grpc.stub.StreamObserver;
import java.io.IOException;
import java.io.UncheckedIOException;
import java.nio.file.Path;
import java.time.Duration;
import java.util.ArrayList;
import java.util.List;
import java.util.Objects;
import java.util.concurrent.CancellationException;
import java.util.concurrent.CompletableFuture;
import java.util.concurrent.ExecutionException;
import java.util.concurrent.Executor;
import java.util.concurrent.TimeUnit;
import java.util.function.Consumer;
import java.util.function.Function;
import java.util.function.IntFunction;
import java.util.function.Supplier;
import dev.mixd.api.v1.MixtureServiceGrpc;
import dev.mixd.api.v1.MixtureServiceOuterClass.CancelFitJobRequest;
import dev.mixd.api.v1.MixtureServiceOuterClass.ClassifyRequest;
import dev.mixd.api.v1.MixtureServiceOuterClass.ClassifyResponse;
import dev.mixd.api.v1.MixtureServiceOuterClass.ClassifyStreamRequest;
import dev.mixd.api.v1.MixtureServiceOuterClass.ClassifyStreamResponse;
import dev.mixd.api.v1.MixtureServiceOuterClass.CompareModelsRequest;
import dev.mixd.api.v1.MixtureServiceOuterClass.CompareModelsResponse;
import dev.mixd.api.v1.MixtureServiceOuterClass.CreateFitJobRequest;
import dev.mixd.api.v1.MixtureServiceOuterClass.CreateFitJobResponse;
import dev.mixd.api.v1.MixtureServiceOuterClass.DeleteModelRequest;
import dev.mixd.api.v1.MixtureServiceOuterClass.ExportModelRequest;
import dev.mixd.api.v1.MixtureServiceOuterClass.FitRequest;
import dev.mixd.api.v1.MixtureServiceOuterClass.FitResponse;
import dev.mixd.api.v1.MixtureServiceOuterClass.GetFitJobRequest;
import dev.mixd.api.v1.MixtureServiceOuterClass.GetFitJobResponse;
import dev.mixd.api.v1.MixtureServiceOuterClass.GetModelRequest;
import dev.mixd.api.v1.MixtureServiceOuterClass.ImportModelRequest;
import dev.mixd.api.v1.MixtureServiceOuterClass.ListFitJobsRequest;
import dev.mixd.api.v1.MixtureServiceOuterClass.ListFitJobsResponse;
import dev.mixd.api.v1.MixtureServiceOuterClass.ListFittersRequest;
import dev.mixd.api.v1.MixtureServiceOuterClass.ListModelVersionsRequest;
import dev.mixd.api.v1.MixtureServiceOuterClass.ListModelVersionsResponse;
import dev.mixd.api.v1.MixtureServiceOuterClass.ListModelsRequest;
import dev.mixd.api.v1.MixtureServiceOuterClass.ListModelsResponse;
import dev.mixd.api.v1.MixtureServiceOuterClass.PredictRequest;
import dev.mixd.api.v1.MixtureServiceOuterClass.PredictResponse;
import dev.mixd.api.v1.MixtureServiceOuterClass.SampleRequest;
import dev.mixd.api.v1.MixtureServiceOuterClass.SampleStreamRequest;
import dev.mixd.api.v1.MixtureServiceOuterClass.SampleStreamResponse;
import dev.mixd.api.v1.MixtureServiceOuterClass.ScoreRequest;
import dev.mixd.api.v1.MixtureServiceOuterClass.ScoreResponse;
import dev.mixd.api.v1.MixtureServiceOuterClass.ScoreStreamRequest;
import dev.mixd.api.v1.MixtureServiceOuterClass.ScoreStreamResponse;
import dev.mixd.api.v1.MixtureServiceOuterClass.WatchFitJobRequest;
import dev.mixd.api.v1.MixtureServiceOuterClass.WatchFitJobResponse;
import dev.mixd.api.v1.Types;

/**
 * A connection to one mixd daemon, with typed calls that take and return plain Java arrays.
 *
 * <p>Rows travel as little-endian IEEE-754 bytes (the daemon's fast path); a batch larger than one
 * gRPC message is split into chunks and sent over the daemon's streaming calls automatically, with
 * the same result as one call. Unary calls get a default deadline ({@link #DEFAULT_TIMEOUT});
 * fits, watches and streamed batches get none. A deadline set on the caller's gRPC {@link
 * io.grpc.Context} applies to every call.
 *
 * <p>Every call has a blocking form, which throws a {@link MixdException}, and an {@code Async}
 * form returning a {@link CompletableFuture} that fails with one; cancelling such a future cancels
 * its RPCs. Futures complete on the client's callback executor. A client is safe for concurrent
 * use; close it when done.
 *
 * <pre>{@code
 * try (MixdClient client = MixdClient.connect("127.0.0.1:7313")) {
 *   Types.Model model = client.fit("pumps", rows, FitOptions.components(3).withSeed(7));
 *   ScoreResult scores = client.score("pumps", rows);
 * }
 * }</pre>
 */
public final class MixdClient implements AutoCloseable {
  /** Deadline of unary calls when the caller's context has none: 30 seconds. */
  public static final Duration DEFAULT_TIMEOUT = Duration.ofSeconds(30);

  /**
   * Largest amount of matrix data, in bytes, that one request message carries: 4 MiB less 64 KiB,
   * which keeps every message below gRPC's default 4 MiB limit with room for its other fields.
   */
  public static final int DEFAULT_CHUNK_BYTES = (4 << 20) - (64 << 10);

  /**
   * Largest response message the client accepts: 1 GiB. Responses can be wider than requests
   * (per-component outputs), so the limit is well above the request chunk size.
   */
  public static final int DEFAULT_MAX_INBOUND_BYTES = 1 << 30;

  /** Largest row count drawn with one unary Sample call; more go through SampleStream. */
  static final int SAMPLE_UNARY_ROWS = 4096;

  private final String address;
  private final ManagedChannel channel;
  private final EventLoopGroup eventLoop;
  private final MixtureServiceGrpc.MixtureServiceStub stub;
  private final Duration timeout;
  private final int chunkBytes;

  private MixdClient(Builder b) {
    this.address = b.address;
    this.timeout = b.timeout;
    this.chunkBytes = b.chunkBytes;
    ChannelCredentials creds;
    if (b.tls) {
      TlsChannelCredentials.Builder tb = TlsChannelCredentials.newBuilder();
      if (b.trustCertificates != null) {
        try {
          tb.trustManager(b.trustCertificates.toFile());
        } catch (IOException e) {
          throw new UncheckedIOException(
              "mixd: reading trust certificates " + b.trustCertificates + ": " + e.getMessage(),
              e);
        }
      }
      if (b.clientCertificate != null) {
        try {
          tb.keyManager(b.clientCertificate.toFile(), b.clientKey.toFile());
        } catch (IOException e) {
          throw new UncheckedIOException(
              "mixd: reading client certificate "
                  + b.clientCertificate
                  + " and key "
                  + b.clientKey
                  + ": "
                  + e.getMessage(),
              e);
        }
      }
      creds = tb.build();
    } else {
      creds = InsecureChannelCredentials.create();
    }
    String target = b.address.trim();
    NettyChannelBuilder nb;
    EventLoopGroup group = null;
    boolean unix = target.startsWith("unix:");
    if (unix) {
      String path = unixPath(target);
      if (!Epoll.isAvailable()) {
        throw new UnsupportedOperationException(
            "mixd: Unix socket "
                + path
                + " needs the Linux epoll transport, which is not available here: "
                + Epoll.unavailabilityCause());
      }
      group =
          new MultiThreadIoEventLoopGroup(
              1, new DefaultThreadFactory("mixd-uds", true), EpollIoHandler.newFactory());
      nb =
          NettyChannelBuilder.forAddress(new DomainSocketAddress(path), creds)
              .eventLoopGroup(group)
              .channelType(EpollDomainSocketChannel.class)
              .overrideAuthority("localhost");
    } else if (target.contains("://")) {
      nb = NettyChannelBuilder.forTarget(target, creds);
    } else {
      HostPort hp = HostPort.parse(target);
      nb = NettyChannelBuilder.forAddress(hp.host, hp.port, creds);
    }
    nb.maxInboundMessageSize(b.maxInboundBytes);
    if (b.authority != null) {
      nb.overrideAuthority(b.authority);
    }
    if (b.executor != null) {
      nb.executor(b.executor);
    }
    this.eventLoop = group;
    this.channel = nb.build();
    Channel ch = ClientInterceptors.intercept(channel, b.interceptors);
    MixtureServiceGrpc.MixtureServiceStub s = MixtureServiceGrpc.newStub(ch);
    if (b.token != null) {
      CallCredentials cc = new BearerToken(b.token, b.allowTokenWithoutTls || unix);
      s = s.withCallCredentials(cc);
    }
    this.stub = s;
  }

  /** Host and port of a "host:port" address. */
  private static final class HostPort {
    final String host;
    final int port;

    private HostPort(String host, int port) {
      this.host = host;
      this.port = port;
    }

    static HostPort parse(String s) {
      int colon = s.lastIndexOf(':');
      if (s.isEmpty() || colon <= 0 || colon == s.length() - 1) {
        throw new IllegalArgumentException(
            "mixd: address \"" + s + "\": want host:port or unix:/path/to/socket");
      }
      String host = s.substring(0, colon);
      if (host.startsWith("[") && host.endsWith("]")) {
        host = host.substring(1, host.length() - 1);
      }
      int port;
      try {
        port = Integer.parseInt(s.substring(colon + 1));
      } catch (NumberFormatException e) {
        throw new IllegalArgumentException(
            "mixd: address \"" + s + "\": port \"" + s.substring(colon + 1) + "\" is not a number",
            e);
      }
      if (port < 1 || port > 65535) {
        throw new IllegalArgumentException(
            "mixd: address \"" + s + "\": port " + port + " is out of range 1-65535");
      }
      return new HostPort(host, port);
    }
  }

  /** The socket path of "unix:/p", "unix:///p" or "unix:relative/p". */
  private static String unixPath(String target) {
    String p = target.substring("unix:".length());
    if (p.startsWith("//")) {
      p = p.substring(2);
    }
    if (p.isEmpty()) {
      throw new IllegalArgumentException("mixd: address \"" + target + "\" has no socket path");
    }
    return p;
  }

  /**
   * Connects, without TLS, to the daemon at {@code address}: {@code "host:port"} for TCP, or
   * {@code "unix:/path/to/socket"} for a Unix socket (Linux). The connection is made lazily: an
   * unreachable daemon shows up as an {@link UnavailableException} on the first call.
   *
   * @param address the daemon's address, as {@code mixd serve} prints it
   * @return the client
   * @throws IllegalArgumentException if the address cannot be parsed
   */
  public static MixdClient connect(String address) {
    return builder(address).build();
  }

  /**
   * Starts configuring a client for the daemon at {@code address} ({@code "host:port"} or {@code
   * "unix:/path"}; any gRPC target with a scheme, such as {@code "dns:///host:port"}, is passed on).
   *
   * @param address the daemon's address
   * @return a builder
   */
  public static Builder builder(String address) {
    return new Builder(address);
  }

  /** Configures a {@link MixdClient}; see {@link MixdClient#builder(String)}. */
  public static final class Builder {
    private final String address;
    private boolean tls;
    private Path trustCertificates;
    private Path clientCertificate;
    private Path clientKey;
    private Supplier<String> token;
    private boolean allowTokenWithoutTls;
    private Duration timeout = DEFAULT_TIMEOUT;
    private int chunkBytes = DEFAULT_CHUNK_BYTES;
    private int maxInboundBytes = DEFAULT_MAX_INBOUND_BYTES;
    private String authority;
    private Executor executor;
    private final List<ClientInterceptor> interceptors = new ArrayList<>();

    private Builder(String address) {
      this.address = Objects.requireNonNull(address, "address");
    }

    /**
     * Uses TLS, trusting the system's default certificate authorities.
     *
     * @return this builder
     */
    public Builder useTls() {
      this.tls = true;
      return this;
    }

    /**
     * Uses TLS, trusting only the certificates in a PEM file (for example the daemon's own
     * self-signed certificate, or a private certificate authority).
     *
     * @param pemFile the PEM file of trusted certificates
     * @return this builder
     */
    public Builder useTls(Path pemFile) {
      this.tls = true;
      this.trustCertificates = Objects.requireNonNull(pemFile, "pemFile");
      return this;
    }

    /**
     * Uses TLS and presents a client certificate, for daemons that require one (mutual TLS).
     *
     * @param certificateChainPem the client's certificate chain, PEM
     * @param privateKeyPem the client's private key, PEM (PKCS#8)
     * @return this builder
     */
    public Builder clientCertificate(Path certificateChainPem, Path privateKeyPem) {
      this.tls = true;
      this.clientCertificate = Objects.requireNonNull(certificateChainPem, "certificateChainPem");
      this.clientKey = Objects.requireNonNull(privateKeyPem, "privateKeyPem");
      return this;
    }

    /**
     * Sends {@code authorization: Bearer <token>} with every call. The token is only sent over TLS
     * or a Unix socket unless {@link #allowTokenWithoutTls} allows plain TCP; a call that would
     * send it otherwise fails with {@link UnauthenticatedException}.
     *
     * @param token the token
     * @return this builder
     */
    public Builder bearerToken(String token) {
      Objects.requireNonNull(token, "token");
      this.token = () -> token;
      return this;
    }

    /**
     * Like {@link #bearerToken(String)}, asking {@code token} for the current token before each
     * call (for tokens that expire and are renewed).
     *
     * @param token supplies the token; it should return quickly
     * @return this builder
     */
    public Builder bearerToken(Supplier<String> token) {
      this.token = Objects.requireNonNull(token, "token");
      return this;
    }

    /**
     * Allows the bearer token over plain TCP, where anyone on the path can read it. Meant for a
     * daemon behind a TLS-terminating proxy on the same host.
     *
     * @param allow whether to allow it
     * @return this builder
     */
    public Builder allowTokenWithoutTls(boolean allow) {
      this.allowTokenWithoutTls = allow;
      return this;
    }

    /**
     * Sets the deadline of unary calls (and of the page-following list calls as a whole) made from
     * a context without a deadline.
     *
     * @param timeout the deadline; zero or negative disables the default deadline
     * @return this builder
     */
    public Builder timeout(Duration timeout) {
      this.timeout = Objects.requireNonNull(timeout, "timeout");
      return this;
    }

    /**
     * Sets the largest amount of matrix data, in bytes, sent in one request message; larger
     * batches are split into chunks. Values below 1024 are raised to 1024.
     *
     * @param bytes the chunk size in bytes
     * @return this builder
     */
    public Builder chunkBytes(int bytes) {
      this.chunkBytes = Math.max(bytes, 1024);
      return this;
    }

    /**
     * Sets the largest response message the client accepts.
     *
     * @param bytes the limit in bytes
     * @return this builder
     */
    public Builder maxInboundMessageBytes(int bytes) {
      if (bytes <= 0) {
        throw new IllegalArgumentException("maxInboundMessageBytes must be positive: " + bytes);
      }
      this.maxInboundBytes = bytes;
      return this;
    }

    /**
     * Overrides the authority (host name) the client presents and checks in the daemon's TLS
     * certificate, for certificates issued to another name than the address.
     *
     * @param authority the host name
     * @return this builder
     */
    public Builder authority(String authority) {
      this.authority = Objects.requireNonNull(authority, "authority");
      return this;
    }

    /**
     * Sets the executor that runs callbacks: fit listeners, and the completion of every future.
     * The default is gRPC's shared cached thread pool.
     *
     * @param executor the executor
     * @return this builder
     */
    public Builder executor(Executor executor) {
      this.executor = Objects.requireNonNull(executor, "executor");
      return this;
    }

    /**
     * Adds interceptors to every call, for example for tracing or extra metadata.
     *
     * @param interceptors the interceptors, outermost last (as {@link ClientInterceptors#intercept}
     *     orders them)
     * @return this builder
     */
    public Builder intercept(ClientInterceptor... interceptors) {
      this.interceptors.addAll(List.of(interceptors));
      return this;
    }

    /**
     * Creates the client. No connection is made until the first call.
     *
     * @return the client
     * @throws IllegalArgumentException if the address cannot be parsed
     * @throws UnsupportedOperationException for a Unix socket where the epoll transport is missing
     * @throws UncheckedIOException if a certificate or key file cannot be read
     */
    public MixdClient build() {
      return new MixdClient(this);
    }
  }

  /**
   * Returns the address the client was made for.
   *
   * @return the address
   */
  public String address() {
    return address;
  }

  /**
   * Returns the generated asynchronous stub this client uses (with its credentials and
   * interceptors), for calls the client does not wrap.
   *
   * @return the stub
   */
  public MixtureServiceGrpc.MixtureServiceStub stub() {
    return stub;
  }

  /**
   * Closes the connection. Calls still in flight fail with {@link UnavailableException}. Waits up
   * to five seconds for the transport to shut down.
   */
  @Override
  public void close() {
    channel.shutdownNow();
    try {
      channel.awaitTermination(5, TimeUnit.SECONDS);
    } catch (InterruptedException e) {
      Thread.currentThread().interrupt();
    } finally {
      if (eventLoop != null) {
        eventLoop.shutdownGracefully(0, 1, TimeUnit.SECONDS);
      }
    }
  }

  // ---------------------------------------------------------------- plumbing

  /** Waits for {@code f}, turning its failure into a {@link MixdException} thrown here. */
  static <T> T await(CompletableFuture<T> f, String operation) {
    try {
      return f.get();
    } catch (InterruptedException e) {
      f.cancel(true);
      Thread.currentThread().interrupt();
      throw new CancelledException(operation, "the waiting thread was interrupted", e);
    } catch (CancellationException e) {
      throw new CancelledException(operation, "cancelled by the caller", e);
    } catch (ExecutionException e) {
      Throwable c = e.getCause();
      if (c instanceof MixdException) {
        throw ((MixdException) c).rethrown();
      }
      throw MixdException.from(operation, c);
    }
  }

  /** The stub for a unary call: the default deadline applies. */
  private MixtureServiceGrpc.MixtureServiceStub unaryStub() {
    if (timeout.isZero() || timeout.isNegative()) {
      return stub;
    }
    return stub.withDeadlineAfter(timeout.toNanos(), TimeUnit.NANOSECONDS);
  }

  /** Rows of {@code bytesPerRow} bytes that fit in one request message. */
  private int rowsPerChunk(long bytesPerRow) {
    if (bytesPerRow <= 0) {
      return 1 << 20;
    }
    return (int) Math.max(1, chunkBytes / bytesPerRow);
  }

  /** One unary RPC of the generated stub. */
  @FunctionalInterface
  private interface Unary<Q, R> {
    void call(MixtureServiceGrpc.MixtureServiceStub stub, Q request, StreamObserver<R> observer);
  }

  /** Starts a unary call in f's context; its response is decoded into f's value. */
  private <Q, R, T> void unary(
      CallFuture<T> f, MixtureServiceGrpc.MixtureServiceStub s, Unary<Q, R> m, Q req,
      Function<R, T> decode) {
    f.start(
        () ->
            m.call(
                s,
                req,
                new StreamObserver<R>() {
                  private R resp;

                  @Override
                  public void onNext(R value) {
                    resp = value;
                  }

                  @Override
                  public void onError(Throwable t) {
                    f.fail(t);
                  }

                  @Override
                  public void onCompleted() {
                    f.succeed(() -> decode.apply(resp));
                  }
                }));
  }

  /** A unary call as one operation. */
  private <Q, R, T> CallFuture<T> unary(
      String operation, Unary<Q, R> m, Q req, Function<R, T> decode) {
    CallFuture<T> f = new CallFuture<>(operation);
    unary(f, unaryStub(), m, req, decode);
    return f;
  }

  /** Follows the pages of a list call under one deadline. */
  private <R, T> CallFuture<List<T>> paged(
      String operation,
      Unary<String, R> page,
      Function<R, List<T>> items,
      Function<R, String> nextToken) {
    CallFuture<List<T>> f = new CallFuture<>(operation);
    Deadline deadline =
        timeout.isZero() || timeout.isNegative()
            ? null
            : Deadline.after(timeout.toNanos(), TimeUnit.NANOSECONDS);
    List<T> out = new ArrayList<>();
    nextPage(f, deadline, page, items, nextToken, out, "");
    return f;
  }

  private <R, T> void nextPage(
      CallFuture<List<T>> f,
      Deadline deadline,
      Unary<String, R> page,
      Function<R, List<T>> items,
      Function<R, String> nextToken,
      List<T> out,
      String token) {
    CallFuture<String> step = f.child();
    MixtureServiceGrpc.MixtureServiceStub s = deadline == null ? stub : stub.withDeadline(deadline);
    f.start(
        () ->
            unary(
                step,
                s,
                page,
                token,
                r -> {
                  out.addAll(items.apply(r));
                  return nextToken.apply(r);
                }));
    step.whenComplete(
        (next, err) -> {
          if (err != null) {
            f.fail(err);
          } else if (next.isEmpty()) {
            f.complete(out);
          } else {
            nextPage(f, deadline, page, items, nextToken, out, next);
          }
        });
  }

  /** Handles one response of a streaming call; may throw to abort the call. */
  @FunctionalInterface
  private interface Handler<R> {
    void accept(R response);
  }

  /**
   * The client side of a call that uploads {@code messages} request messages (built on demand
   * with flow control: a message is built only when the transport is ready for it) and then
   * half-closes, while it receives responses.
   */
  private static final class Upload<Q, R> implements ClientResponseObserver<Q, R> {
    private final CallFuture<?> future;
    private final int messages;
    private final IntFunction<Q> build;
    private final Handler<R> handler;
    private final Runnable onEnd;
    private ClientCallStreamObserver<Q> out;
    private int next;
    private boolean halfClosed;
    private volatile boolean done;

    Upload(
        CallFuture<?> future,
        int messages,
        IntFunction<Q> build,
        Handler<R> handler,
        Runnable onEnd) {
      this.future = future;
      this.messages = messages;
      this.build = build;
      this.handler = handler;
      this.onEnd = onEnd;
    }

    @Override
    public void beforeStart(ClientCallStreamObserver<Q> requestStream) {
      this.out = requestStream;
      requestStream.setOnReadyHandler(this::pump);
    }

    /** Sends while the transport is ready; gRPC runs it one at a time with the other callbacks. */
    private void pump() {
      try {
        while (!done && next < messages && out.isReady()) {
          out.onNext(build.apply(next++));
        }
        if (!done && !halfClosed && next >= messages) {
          halfClosed = true;
          out.onCompleted();
        }
      } catch (RuntimeException e) {
        abort(e);
      }
    }

    private void abort(Throwable e) {
      done = true;
      future.fail(e);
      out.cancel("mixd client: " + e.getMessage(), e);
    }

    @Override
    public void onNext(R value) {
      if (done) {
        return;
      }
      try {
        handler.accept(value);
      } catch (RuntimeException e) {
        abort(e);
      }
    }

    @Override
    public void onError(Throwable t) {
      done = true;
      future.fail(t);
    }

    @Override
    public void onCompleted() {
      done = true;
      try {
        onEnd.run();
      } catch (RuntimeException e) {
        future.fail(e);
      }
    }
  }

  /** A server-streaming call's observer. */
  private static <R> StreamObserver<R> receiver(
      CallFuture<?> f, Handler<R> handler, Runnable onEnd) {
    return new ClientResponseObserver<Object, R>() {
      private ClientCallStreamObserver<Object> call;
      private boolean done;

      @Override
      public void beforeStart(ClientCallStreamObserver<Object> requestStream) {
        call = requestStream;
      }

      @Override
      public void onNext(R value) {
        if (done) {
          return;
        }
        try {
          handler.accept(value);
        } catch (RuntimeException e) {
          done = true;
          f.fail(e);
          call.cancel("mixd client: " + e.getMessage(), e);
        }
      }

      @Override
      public void onError(Throwable t) {
        done = true;
        f.fail(t);
      }

      @Override
      public void onCompleted() {
        if (done) {
          return;
        }
        done = true;
        try {
          onEnd.run();
        } catch (RuntimeException e) {
          f.fail(e);
        }
      }
    };
  }

  /** Runs a client-side check, turning its exception into a failed future. */
  private static <T> CompletableFuture<T> failed(String operation, RuntimeException e) {
    CompletableFuture<T> f = new CompletableFuture<>();
    f.completeExceptionally(MixdException.from(operation, e));
    return f;
  }

  /** Re-labels a client-side check's exception with the operation. */
  private static MixdException checkFailed(String operation, MixdException e) {
    return MixdException.of(e.code(), operation, e.statusMessage(), null);
  }

  /** Shape of a model version: component count, family and the version itself. */
  private static final class Shape {
    final int components;
    final long version;
    final boolean studentT;

    Shape(int components, long version, boolean studentT) {
      this.components = components;
      this.version = version;
      this.studentT = studentT;
    }
  }

  /**
   * Looks up the number of components of a model version (and pins the version), so that chunks
   * are sized by the width of the response when per-component outputs are asked for.
   */
  private void shape(CallFuture<?> parent, String model, long version, Consumer<Shape> then) {
    CallFuture<Shape> s = parent.child();
    parent.start(
        () ->
            unary(
                s,
                unaryStub(),
                MixtureServiceGrpc.MixtureServiceStub::getModel,
                GetModelRequest.newBuilder().setName(model).setVersion(version).build(),
                r ->
                    new Shape(
                        r.getModel().getParameters().getComponentsCount(),
                        r.getModel().getVersion(),
                        r.getModel().getParameters().getFamily()
                            == Types.Family.FAMILY_STUDENT_T)));
    s.whenComplete(
        (v, e) -> {
          if (e != null) {
            parent.fail(e);
          } else {
            parent.start(() -> then.accept(v));
          }
        });
  }

  /** Splits n rows into chunks of at most step rows; returns the chunk boundaries. */
  private static int[] bounds(int n, int step) {
    int chunks = (n + step - 1) / step;
    int[] b = new int[chunks + 1];
    for (int i = 0; i < chunks; i++) {
      b[i + 1] = Math.min(n, b[i] + step);
    }
    return b;
  }

  /** Builds the message for rows {@code [lo, hi)}; {@code first} marks the one with settings. */
  @FunctionalInterface
  private interface ChunkRequest<Q> {
    Q build(int lo, int hi, boolean first);
  }

  /** Takes the response to chunk {@code i}, which held {@code rows} rows. */
  @FunctionalInterface
  private interface ChunkResponse<R> {
    void accept(int i, int rows, R response);
  }

  /**
   * The observer of a call that sends {@code n} rows in chunks of at most {@code step} rows and
   * receives one response per chunk, in order: {@code request} builds each chunk's message,
   * {@code response} takes each response with its chunk's index and row count, and a response
   * beyond the chunks sent fails the call.
   */
  private static <Q, R> Upload<Q, R> chunked(
      CallFuture<?> f,
      int n,
      int step,
      ChunkRequest<Q> request,
      ChunkResponse<R> response,
      Runnable onEnd) {
    int[] b = bounds(n, step);
    int chunks = b.length - 1;
    int[] received = new int[1];
    return new Upload<>(
        f,
        chunks,
        i -> request.build(b[i], b[i + 1], i == 0),
        r -> {
          int i = received[0]++;
          if (i >= chunks) {
            throw new Wire.ResponseException("more responses than the " + chunks + " chunks sent");
          }
          response.accept(i, b[i + 1] - b[i], r);
        },
        onEnd);
  }

  // ---------------------------------------------------------------- fit

  /** Per-row extras of a fit, encoded chunk by chunk. */
  private static Types.FitChunk fitChunk(Rows data, FitOptions o, int lo, int hi) {
    Types.FitChunk.Builder c = Types.FitChunk.newBuilder().setData(data.encode(lo, hi));
    double[] w = o.rowWeights();
    if (w != null) {
      c.setRowWeights(Rows.of(w, 1, "row weights").encode(lo, hi));
    }
    int[] labels = o.startLabels();
    if (labels != null) {
      java.nio.ByteBuffer buf =
          java.nio.ByteBuffer.allocate((hi - lo) * Integer.BYTES)
              .order(java.nio.ByteOrder.LITTLE_ENDIAN);
      buf.asIntBuffer().put(labels, lo, hi - lo);
      c.setStartLabels(
          Types.Labels.newBuilder()
              .setLittleEndian(com.google.protobuf.UnsafeByteOperations.unsafeWrap(buf)));
    }
    return c.build();
  }

  /** The chunk boundaries of a fit upload, after checking the per-row extras. */
  private int[] fitBounds(Rows data, FitOptions o) {
    long perRow = 8L * data.cols();
    if (o.rowWeights() != null) {
      if (o.rowWeights().length != data.rows()) {
        throw new InvalidArgumentException(
            "",
            "row weights: " + o.rowWeights().length + " values for " + data.rows() + " rows",
            null);
      }
      perRow += 8;
    }
    if (o.startLabels() != null) {
      if (o.startLabels().length != data.rows()) {
        throw new InvalidArgumentException(
            "",
            "start labels: " + o.startLabels().length + " values for " + data.rows() + " rows",
            null);
      }
      perRow += 4;
    }
    return bounds(data.rows(), rowsPerChunk(perRow));
  }

  private FitCall fitCall(String model, Rows data, FitOptions options, FitListener listener) {
    String op = "fit " + model;
    Objects.requireNonNull(options, "options");
    FitListener l = listener == null ? FitListener.NONE : listener;
    CallFuture<Types.Model> f = new CallFuture<>(op);
    CompletableFuture<Types.FitJob> job = new CompletableFuture<>();
    f.whenComplete(
        (m, e) -> {
          if (e != null) {
            job.completeExceptionally(e);
          }
        });
    FitCall call = new FitCall(job, f, true);
    int[] b;
    try {
      b = fitBounds(data, options);
    } catch (MixdException e) {
      f.completeExceptionally(checkFailed(op, e));
      return call;
    }
    Types.FitSpec spec = options.spec(model, data.rows());
    int chunks = b.length - 1;
    Types.Model[] result = new Types.Model[1];
    Upload<FitRequest, FitResponse> up =
        new Upload<>(
            f,
            Math.max(1, chunks),
            i -> {
              FitRequest.Builder r = FitRequest.newBuilder();
              if (i == 0) {
                r.setSpec(spec);
              }
              if (i < chunks) {
                r.setChunk(fitChunk(data, options, b[i], b[i + 1]));
              }
              return r.build();
            },
            resp -> {
              switch (resp.getEventCase()) {
                case JOB:
                  job.complete(resp.getJob());
                  listen(op, () -> l.onJob(resp.getJob()));
                  break;
                case PROGRESS:
                  listen(op, () -> l.onProgress(resp.getProgress()));
                  break;
                case MODEL:
                  result[0] = resp.getModel();
                  break;
                default:
                  break;
              }
            },
            () -> {
              if (result[0] == null) {
                f.fail(
                    Status.INTERNAL
                        .withDescription("the daemon ended the fit without a model")
                        .asRuntimeException());
              } else {
                f.complete(result[0]);
              }
            });
    f.start(() -> stub.fit(up));
    return call;
  }

  /** Runs a listener callback; its exception aborts the call as CANCELLED. */
  private static void listen(String op, Runnable r) {
    try {
      r.run();
    } catch (RuntimeException e) {
      throw new CancelledException(op, "the fit listener threw " + e, e);
    }
  }

  /**
   * Uploads training rows, fits a model named {@code model} (a new version when it exists) and
   * waits for the stored model. Interrupting the waiting thread cancels the fit.
   *
   * @param model the model id, {@code "pumps"} or {@code "models/pumps"}
   * @param rows the training rows, all of the same length
   * @param options what to fit
   * @param listener receives the job and every progress event; may be null
   * @return the stored model
   * @throws MixdException when the fit fails, e.g. {@link InvalidArgumentException} for a NaN in
   *     the data or an unknown option, {@link UnavailableException} when the fitter crashed
   */
  public Types.Model fit(
      String model, double[][] rows, FitOptions options, FitListener listener) {
    return fitAsync(model, rows, options, listener).await();
  }

  /**
   * Fits like {@link #fit(String, double[][], FitOptions, FitListener)} without a listener.
   *
   * @param model the model id
   * @param rows the training rows
   * @param options what to fit
   * @return the stored model
   * @throws MixdException when the fit fails
   */
  public Types.Model fit(String model, double[][] rows, FitOptions options) {
    return fit(model, rows, options, null);
  }

  /**
   * Fits from a flat row-major array; see {@link #fit(String, double[][], FitOptions,
   * FitListener)}.
   *
   * @param model the model id
   * @param values the training rows, row after row
   * @param cols the number of columns
   * @param options what to fit
   * @param listener receives the job and every progress event; may be null
   * @return the stored model
   * @throws MixdException when the fit fails
   */
  public Types.Model fit(
      String model, double[] values, int cols, FitOptions options, FitListener listener) {
    return fitAsync(model, values, cols, options, listener).await();
  }

  /**
   * Starts a fit and returns at once with a handle: its job, its eventual model, and {@link
   * FitCall#cancel()}, which makes the daemon cancel the fit.
   *
   * @param model the model id
   * @param rows the training rows, all of the same length
   * @param options what to fit
   * @param listener receives the job and every progress event; may be null
   * @return the running fit
   */
  public FitCall fitAsync(
      String model, double[][] rows, FitOptions options, FitListener listener) {
    Rows r;
    try {
      r = Rows.of(rows, "rows");
    } catch (MixdException e) {
      return failedFit("fit " + model, e);
    }
    return fitCall(model, r, options, listener);
  }

  /**
   * Starts a fit from a flat row-major array; see {@link #fitAsync(String, double[][], FitOptions,
   * FitListener)}.
   *
   * @param model the model id
   * @param values the training rows, row after row
   * @param cols the number of columns
   * @param options what to fit
   * @param listener receives the job and every progress event; may be null
   * @return the running fit
   */
  public FitCall fitAsync(
      String model, double[] values, int cols, FitOptions options, FitListener listener) {
    Rows r;
    try {
      r = Rows.of(values, cols, "values");
    } catch (MixdException e) {
      return failedFit("fit " + model, e);
    }
    return fitCall(model, r, options, listener);
  }

  private static FitCall failedFit(String op, MixdException e) {
    CallFuture<Types.Model> f = new CallFuture<>(op);
    CompletableFuture<Types.FitJob> job = new CompletableFuture<>();
    MixdException x = checkFailed(op, e);
    job.completeExceptionally(x);
    f.completeExceptionally(x);
    return new FitCall(job, f, true);
  }

  private CallFuture<Types.FitJob> startFitCall(String model, Rows data, FitOptions options) {
    String op = "start fit " + model;
    CallFuture<Types.FitJob> f = new CallFuture<>(op);
    int[] b;
    try {
      b = fitBounds(data, Objects.requireNonNull(options, "options"));
    } catch (MixdException e) {
      f.completeExceptionally(checkFailed(op, e));
      return f;
    }
    Types.FitSpec spec = options.spec(model, data.rows());
    int chunks = b.length - 1;
    CreateFitJobResponse[] resp = new CreateFitJobResponse[1];
    Upload<CreateFitJobRequest, CreateFitJobResponse> up =
        new Upload<>(
            f,
            Math.max(1, chunks),
            i -> {
              CreateFitJobRequest.Builder r = CreateFitJobRequest.newBuilder();
              if (i == 0) {
                r.setSpec(spec);
              }
              if (i < chunks) {
                r.setChunk(fitChunk(data, options, b[i], b[i + 1]));
              }
              return r.build();
            },
            r -> resp[0] = r,
            () -> {
              if (resp[0] == null) {
                f.fail(
                    Status.INTERNAL
                        .withDescription("the daemon returned no job")
                        .asRuntimeException());
              } else {
                f.complete(resp[0].getJob());
              }
            });
    f.start(() -> stub.createFitJob(up));
    return f;
  }

  /**
   * Uploads training rows and starts a fit job that runs whether or not anybody watches it; the
   * model is stored when the job succeeds. Follow the job with {@link #watchJob}, {@link #getJob}
   * or {@link #cancelJob}.
   *
   * @param model the model id
   * @param rows the training rows, all of the same length
   * @param options what to fit
   * @return the started job, named {@code "fitJobs/{id}"}
   * @throws MixdException when the upload is refused
   */
  public Types.FitJob startFit(String model, double[][] rows, FitOptions options) {
    return await(startFitAsync(model, rows, options), "start fit " + model);
  }

  /**
   * Starts a fit job from a flat row-major array; see {@link #startFit(String, double[][],
   * FitOptions)}.
   *
   * @param model the model id
   * @param values the training rows, row after row
   * @param cols the number of columns
   * @param options what to fit
   * @return the started job
   * @throws MixdException when the upload is refused
   */
  public Types.FitJob startFit(String model, double[] values, int cols, FitOptions options) {
    return await(startFitAsync(model, values, cols, options), "start fit " + model);
  }

  /**
   * Asynchronous {@link #startFit(String, double[][], FitOptions)}.
   *
   * @param model the model id
   * @param rows the training rows
   * @param options what to fit
   * @return the future of the started job
   */
  public CompletableFuture<Types.FitJob> startFitAsync(
      String model, double[][] rows, FitOptions options) {
    try {
      return startFitCall(model, Rows.of(rows, "rows"), options);
    } catch (MixdException e) {
      return failed("start fit " + model, checkFailed("start fit " + model, e));
    }
  }

  /**
   * Asynchronous {@link #startFit(String, double[], int, FitOptions)}.
   *
   * @param model the model id
   * @param values the training rows, row after row
   * @param cols the number of columns
   * @param options what to fit
   * @return the future of the started job
   */
  public CompletableFuture<Types.FitJob> startFitAsync(
      String model, double[] values, int cols, FitOptions options) {
    try {
      return startFitCall(model, Rows.of(values, cols, "values"), options);
    } catch (MixdException e) {
      return failed("start fit " + model, checkFailed("start fit " + model, e));
    }
  }

  /** The failure of a job that ended without a model, or null. */
  private static MixdException jobEnded(String op, Types.FitJob job) {
    if (job == null) {
      return null;
    }
    Types.FitJobState st = job.getState();
    if (st != Types.FitJobState.FIT_JOB_STATE_FAILED
        && st != Types.FitJobState.FIT_JOB_STATE_CANCELLED) {
      return null;
    }
    Status.Code code = Status.fromCodeValue(job.getErrorCode()).getCode();
    if (code == Status.Code.OK) {
      code =
          st == Types.FitJobState.FIT_JOB_STATE_CANCELLED
              ? Status.Code.CANCELLED
              : Status.Code.UNKNOWN;
    }
    String state = st == Types.FitJobState.FIT_JOB_STATE_CANCELLED ? "cancelled" : "failed";
    String msg = job.getErrorMessage().isEmpty() ? "no message" : job.getErrorMessage();
    return MixdException.of(code, op, "fit job " + job.getName() + " " + state + ": " + msg, null);
  }

  /**
   * Follows a fit job until it ends and returns the stored model.
   *
   * @param job the job's name, {@code "fitJobs/{id}"}
   * @param listener receives the job on every state change and every progress event; may be null
   * @return the stored model
   * @throws MixdException when the job fails (with the job's own code, e.g. {@link
   *     UnavailableException} when the fitter crashed) or was cancelled ({@link
   *     CancelledException}), or the job does not exist ({@link NotFoundException})
   */
  public Types.Model watchJob(String job, FitListener listener) {
    return watchJobAsync(job, listener).await();
  }

  /**
   * Starts following a fit job; see {@link #watchJob}. Cancelling the returned call stops the
   * watch, not the job.
   *
   * @param job the job's name
   * @param listener receives the job on every state change and every progress event; may be null
   * @return the watch
   */
  public FitCall watchJobAsync(String job, FitListener listener) {
    String op = "watch " + job;
    FitListener l = listener == null ? FitListener.NONE : listener;
    CallFuture<Types.Model> f = new CallFuture<>(op);
    CompletableFuture<Types.FitJob> first = new CompletableFuture<>();
    f.whenComplete(
        (m, e) -> {
          if (e != null) {
            first.completeExceptionally(e);
          }
        });
    Types.FitJob[] last = new Types.FitJob[1];
    Types.Model[] model = new Types.Model[1];
    StreamObserver<WatchFitJobResponse> obs =
        receiver(
            f,
            resp -> {
              switch (resp.getEventCase()) {
                case JOB:
                  last[0] = resp.getJob();
                  first.complete(resp.getJob());
                  listen(op, () -> l.onJob(resp.getJob()));
                  break;
                case PROGRESS:
                  listen(op, () -> l.onProgress(resp.getProgress()));
                  break;
                case MODEL:
                  model[0] = resp.getModel();
                  break;
                default:
                  break;
              }
            },
            () -> {
              if (model[0] != null) {
                f.complete(model[0]);
                return;
              }
              MixdException ended = jobEnded(op, last[0]);
              if (ended != null) {
                f.completeExceptionally(ended);
                return;
              }
              // The stream ended without a model: ask for the job once more.
              CallFuture<FitJobStatus> g = f.child();
              f.start(
                  () ->
                      unary(
                          g,
                          unaryStub(),
                          MixtureServiceGrpc.MixtureServiceStub::getFitJob,
                          GetFitJobRequest.newBuilder().setName(job).build(),
                          r -> new FitJobStatus(r.getJob(), r.hasModel() ? r.getModel() : null)));
              g.whenComplete(
                  (st, e) -> {
                    if (e != null) {
                      f.fail(e);
                      return;
                    }
                    MixdException x = jobEnded(op, st.job());
                    if (x != null) {
                      f.completeExceptionally(x);
                    } else if (st.model().isPresent()) {
                      f.complete(st.model().get());
                    } else {
                      f.fail(
                          Status.INTERNAL
                              .withDescription("the watch ended before the job did")
                              .asRuntimeException());
                    }
                  });
            });
    f.start(() -> stub.watchFitJob(WatchFitJobRequest.newBuilder().setName(job).build(), obs));
    return new FitCall(first, f, false);
  }

  /**
   * Returns a fit job and, once it succeeded, the model it wrote.
   *
   * @param job the job's name, {@code "fitJobs/{id}"}
   * @return the job and its model
   * @throws NotFoundException when the daemon knows no such job
   */
  public FitJobStatus getJob(String job) {
    return await(getJobAsync(job), "get job " + job);
  }

  /**
   * Asynchronous {@link #getJob}.
   *
   * @param job the job's name
   * @return the future of the job and its model
   */
  public CompletableFuture<FitJobStatus> getJobAsync(String job) {
    return unary(
        "get job " + job,
        MixtureServiceGrpc.MixtureServiceStub::getFitJob,
        GetFitJobRequest.newBuilder().setName(job).build(),
        (GetFitJobResponse r) -> new FitJobStatus(r.getJob(), r.hasModel() ? r.getModel() : null));
  }

  /**
   * Asks the daemon to cancel a running fit job.
   *
   * @param job the job's name, {@code "fitJobs/{id}"}
   * @return the job after the request
   * @throws NotFoundException when the daemon knows no such job
   */
  public Types.FitJob cancelJob(String job) {
    return await(cancelJobAsync(job), "cancel job " + job);
  }

  /**
   * Asynchronous {@link #cancelJob}.
   *
   * @param job the job's name
   * @return the future of the job after the request
   */
  public CompletableFuture<Types.FitJob> cancelJobAsync(String job) {
    return unary(
        "cancel job " + job,
        MixtureServiceGrpc.MixtureServiceStub::cancelFitJob,
        CancelFitJobRequest.newBuilder().setName(job).build(),
        r -> r.getJob());
  }

  /**
   * Lists the daemon's recent fit jobs, newest first, following every page.
   *
   * @return the jobs
   * @throws MixdException when the call fails
   */
  public List<Types.FitJob> listJobs() {
    return await(listJobsAsync(), "list jobs");
  }

  /**
   * Asynchronous {@link #listJobs}.
   *
   * @return the future of the jobs
   */
  public CompletableFuture<List<Types.FitJob>> listJobsAsync() {
    return paged(
        "list jobs",
        (s, token, o) ->
            s.listFitJobs(ListFitJobsRequest.newBuilder().setPageToken(token).build(), o),
        ListFitJobsResponse::getJobsList,
        ListFitJobsResponse::getNextPageToken);
  }

  // ---------------------------------------------------------------- score

  /** Accumulates the per-row outputs of Score or ScoreStream responses. */
  private static final class ScoreAcc {
    final int n;
    final boolean wantComponents;
    String model = "";
    long version;
    final double[] logDens;
    final double[] pct;
    double[] comp;
    int compCols = -1;
    double logLik;
    double[] outlierStats;
    boolean[] outliers;
    int filled;

    ScoreAcc(int n, boolean wantComponents) {
      this.n = n;
      this.wantComponents = wantComponents;
      this.logDens = new double[n];
      this.pct = new double[n];
    }

    void add(
        int rows,
        Types.Matrix ld,
        Types.Matrix pc,
        Types.Matrix cl,
        double ll,
        Types.Matrix os,
        List<Boolean> flags) {
      int off = filled;
      if (off + rows > n) {
        throw new Wire.ResponseException("more rows in the responses than the " + n + " sent");
      }
      Wire.column(ld, "log_densities", rows, logDens, off);
      if (rows > 0 && pc.getRows() == 0 && pc.getCols() == 0) {
        // No training quantiles (an imported model without a fit report): no percentiles.
        java.util.Arrays.fill(pct, off, off + rows, Double.NaN);
      } else {
        Wire.column(pc, "percentiles", rows, pct, off);
      }
      if (wantComponents) {
        Wire.block(
            cl,
            "component_log_densities",
            rows,
            new Wire.Sink() {
              @Override
              public double[] target(int c) {
                if (compCols < 0) {
                  compCols = c;
                  comp = new double[Math.multiplyExact(n, c)];
                } else if (c != compCols) {
                  throw new Wire.ResponseException(
                      "component_log_densities has " + c + " columns, earlier chunks " + compCols);
                }
                return comp;
              }

              @Override
              public int offset(int c) {
                return off * c;
              }
            });
      }
      if (os.getRows() > 0 || !flags.isEmpty()) {
        if (outlierStats == null) {
          if (off > 0) {
            throw new Wire.ResponseException("outlier statistics missing from earlier chunks");
          }
          outlierStats = new double[n];
          outliers = new boolean[n];
        }
        Wire.column(os, "outlier_statistics", rows, outlierStats, off);
        Wire.flags(flags, "outliers", rows, outliers, off);
      } else if (outlierStats != null && rows > 0) {
        throw new Wire.ResponseException("outlier statistics missing from a chunk");
      }
      logLik += ll;
      filled += rows;
    }

    ScoreResult result() {
      if (filled != n) {
        throw new Wire.ResponseException("responses covered " + filled + " of " + n + " rows");
      }
      Matrix cm = null;
      if (wantComponents) {
        cm = compCols < 0 ? Matrix.empty() : new Matrix(n, compCols, comp);
      }
      return new ScoreResult(model, version, logDens, pct, cm, logLik, outlierStats, outliers);
    }
  }

  private CallFuture<ScoreResult> scoreCall(String model, Rows rows, ScoreOptions opts) {
    String op = "score " + model;
    Objects.requireNonNull(opts, "options");
    if (opts.observed() != null) {
      opts.observed().check(rows);
    }
    CallFuture<ScoreResult> f = new CallFuture<>(op);
    if (opts.componentLogDensities()) {
      shape(
          f,
          model,
          opts.version(),
          s -> scoreRun(f, model, rows, opts.withVersion(s.version), s.components + 2));
    } else {
      scoreRun(f, model, rows, opts, 0);
    }
    return f;
  }

  private void scoreRun(
      CallFuture<ScoreResult> f, String model, Rows rows, ScoreOptions opts, int outWidth) {
    Observed mask = opts.observed();
    int step = rowsPerChunk(8L * Math.max(rows.cols(), outWidth) + Observed.width(mask, rows));
    ScoreAcc acc = new ScoreAcc(rows.rows(), opts.componentLogDensities());
    if (rows.rows() <= step) {
      ScoreRequest req =
          ScoreRequest.newBuilder()
              .setModel(model)
              .setVersion(opts.version())
              .setRows(rows.encode(0, rows.rows()))
              .setObservedMask(Observed.bytes(mask, rows, 0, rows.rows()))
              .setIncludeComponentLogDensities(opts.componentLogDensities())
              .setOutlierLevel(opts.outlierLevel())
              .setResponseEncoding(Types.MatrixEncoding.MATRIX_ENCODING_LITTLE_ENDIAN)
              .build();
      unary(
          f,
          unaryStub(),
          MixtureServiceGrpc.MixtureServiceStub::score,
          req,
          (ScoreResponse r) -> {
            acc.model = r.getModel();
            acc.version = r.getVersion();
            acc.add(
                rows.rows(),
                r.getLogDensities(),
                r.getPercentiles(),
                r.getComponentLogDensities(),
                r.getLogLikelihood(),
                r.getOutlierStatistics(),
                r.getOutliersList());
            return acc.result();
          });
      return;
    }
    Upload<ScoreStreamRequest, ScoreStreamResponse> up =
        chunked(
            f,
            rows.rows(),
            step,
            (lo, hi, first) -> {
              // The mask is read from every message: each chunk carries its slice.
              ScoreStreamRequest.Builder r =
                  ScoreStreamRequest.newBuilder()
                      .setRows(rows.encode(lo, hi))
                      .setObservedMask(Observed.bytes(mask, rows, lo, hi));
              if (first) {
                r.setModel(model)
                    .setVersion(opts.version())
                    .setIncludeComponentLogDensities(opts.componentLogDensities())
                    .setOutlierLevel(opts.outlierLevel())
                    .setResponseEncoding(Types.MatrixEncoding.MATRIX_ENCODING_LITTLE_ENDIAN);
              }
              return r.build();
            },
            (i, n, r) -> {
              if (i == 0) {
                acc.model = r.getModel();
                acc.version = r.getVersion();
              }
              acc.add(
                  n,
                  r.getLogDensities(),
                  r.getPercentiles(),
                  r.getComponentLogDensities(),
                  r.getLogLikelihood(),
                  r.getOutlierStatistics(),
                  r.getOutliersList());
            },
            () -> f.succeed(acc::result));
    f.start(() -> stub.scoreStream(up));
  }

  /**
   * Returns the log-density and training percentile of every row under the newest version of a
   * model.
   *
   * @param model the model, {@code "pumps"} or {@code "models/pumps"}
   * @param rows the rows, each with the model's dimension
   * @return the scores, in row order
   * @throws MixdException e.g. {@link InvalidArgumentException} for a non-finite value or a wrong
   *     column count, {@link NotFoundException} for an unknown model
   */
  public ScoreResult score(String model, double[][] rows) {
    return score(model, rows, ScoreOptions.defaults());
  }

  /**
   * Scores rows with options; batches larger than one message go through the streaming call in
   * chunks, with the same result.
   *
   * @param model the model
   * @param rows the rows, each with the model's dimension
   * @param options version and extra outputs
   * @return the scores, in row order
   * @throws MixdException when the call fails
   */
  public ScoreResult score(String model, double[][] rows, ScoreOptions options) {
    return await(scoreAsync(model, rows, options), "score " + model);
  }

  /**
   * Scores a flat row-major array of rows.
   *
   * @param model the model
   * @param values the rows, row after row
   * @param cols the number of columns (the model's dimension)
   * @param options version and extra outputs
   * @return the scores, in row order
   * @throws MixdException when the call fails
   */
  public ScoreResult score(String model, double[] values, int cols, ScoreOptions options) {
    return await(scoreAsync(model, values, cols, options), "score " + model);
  }

  /**
   * Asynchronous {@link #score(String, double[][], ScoreOptions)}.
   *
   * @param model the model
   * @param rows the rows
   * @param options version and extra outputs
   * @return the future of the scores
   */
  public CompletableFuture<ScoreResult> scoreAsync(
      String model, double[][] rows, ScoreOptions options) {
    try {
      return scoreCall(model, Rows.of(rows, "rows"), options);
    } catch (MixdException e) {
      return failed("score " + model, checkFailed("score " + model, e));
    }
  }

  /**
   * Asynchronous {@link #score(String, double[], int, ScoreOptions)}.
   *
   * @param model the model
   * @param values the rows, row after row
   * @param cols the number of columns
   * @param options version and extra outputs
   * @return the future of the scores
   */
  public CompletableFuture<ScoreResult> scoreAsync(
      String model, double[] values, int cols, ScoreOptions options) {
    try {
      return scoreCall(model, Rows.of(values, cols, "values"), options);
    } catch (MixdException e) {
      return failed("score " + model, checkFailed("score " + model, e));
    }
  }

  // ---------------------------------------------------------------- classify

  /** Accumulates the per-row outputs of Classify or ClassifyStream responses. */
  private static final class ClassifyAcc {
    final int n;
    final boolean wantPosteriors;
    String model = "";
    long version;
    final int[] labels;
    final double[] maxPost;
    final boolean[] confident;
    double[] post;
    int postCols = -1;
    int filled;

    ClassifyAcc(int n, boolean wantPosteriors) {
      this.n = n;
      this.wantPosteriors = wantPosteriors;
      this.labels = new int[n];
      this.maxPost = new double[n];
      this.confident = new boolean[n];
    }

    void add(
        int rows, Types.Labels comp, Types.Matrix mp, Types.Matrix pp, List<Boolean> conf) {
      int off = filled;
      if (off + rows > n) {
        throw new Wire.ResponseException("more rows in the responses than the " + n + " sent");
      }
      Wire.labels(comp, "components", rows, labels, off);
      Wire.column(mp, "max_posteriors", rows, maxPost, off);
      Wire.flags(conf, "confident", rows, confident, off);
      if (wantPosteriors) {
        Wire.block(
            pp,
            "posteriors",
            rows,
            new Wire.Sink() {
              @Override
              public double[] target(int c) {
                if (postCols < 0) {
                  postCols = c;
                  post = new double[Math.multiplyExact(n, c)];
                } else if (c != postCols) {
                  throw new Wire.ResponseException(
                      "posteriors has " + c + " columns, earlier chunks " + postCols);
                }
                return post;
              }

              @Override
              public int offset(int c) {
                return off * c;
              }
            });
      }
      filled += rows;
    }

    ClassifyResult result() {
      if (filled != n) {
        throw new Wire.ResponseException("responses covered " + filled + " of " + n + " rows");
      }
      Matrix pm = null;
      if (wantPosteriors) {
        pm = postCols < 0 ? Matrix.empty() : new Matrix(n, postCols, post);
      }
      return new ClassifyResult(model, version, labels, maxPost, confident, pm);
    }
  }

  private CallFuture<ClassifyResult> classifyCall(String model, Rows rows, ClassifyOptions opts) {
    String op = "classify " + model;
    Objects.requireNonNull(opts, "options");
    if (opts.observed() != null) {
      opts.observed().check(rows);
    }
    CallFuture<ClassifyResult> f = new CallFuture<>(op);
    if (opts.posteriors()) {
      shape(
          f,
          model,
          opts.version(),
          s -> classifyRun(f, model, rows, opts.withVersion(s.version), s.components + 2));
    } else {
      classifyRun(f, model, rows, opts, 0);
    }
    return f;
  }

  private void classifyRun(
      CallFuture<ClassifyResult> f, String model, Rows rows, ClassifyOptions opts, int outWidth) {
    Observed mask = opts.observed();
    int step = rowsPerChunk(8L * Math.max(rows.cols(), outWidth) + Observed.width(mask, rows));
    ClassifyAcc acc = new ClassifyAcc(rows.rows(), opts.posteriors());
    if (rows.rows() <= step) {
      ClassifyRequest req =
          ClassifyRequest.newBuilder()
              .setModel(model)
              .setVersion(opts.version())
              .setRows(rows.encode(0, rows.rows()))
              .setObservedMask(Observed.bytes(mask, rows, 0, rows.rows()))
              .setMinPosterior(opts.minPosterior())
              .setIncludePosteriors(opts.posteriors())
              .setResponseEncoding(Types.MatrixEncoding.MATRIX_ENCODING_LITTLE_ENDIAN)
              .build();
      unary(
          f,
          unaryStub(),
          MixtureServiceGrpc.MixtureServiceStub::classify,
          req,
          (ClassifyResponse r) -> {
            acc.model = r.getModel();
            acc.version = r.getVersion();
            acc.add(
                rows.rows(),
                r.getComponents(),
                r.getMaxPosteriors(),
                r.getPosteriors(),
                r.getConfidentList());
            return acc.result();
          });
      return;
    }
    Upload<ClassifyStreamRequest, ClassifyStreamResponse> up =
        chunked(
            f,
            rows.rows(),
            step,
            (lo, hi, first) -> {
              ClassifyStreamRequest.Builder r =
                  ClassifyStreamRequest.newBuilder()
                      .setRows(rows.encode(lo, hi))
                      .setObservedMask(Observed.bytes(mask, rows, lo, hi));
              if (first) {
                r.setModel(model)
                    .setVersion(opts.version())
                    .setMinPosterior(opts.minPosterior())
                    .setIncludePosteriors(opts.posteriors())
                    .setResponseEncoding(Types.MatrixEncoding.MATRIX_ENCODING_LITTLE_ENDIAN);
              }
              return r.build();
            },
            (i, n, r) -> {
              if (i == 0) {
                acc.model = r.getModel();
                acc.version = r.getVersion();
              }
              acc.add(
                  n,
                  r.getComponents(),
                  r.getMaxPosteriors(),
                  r.getPosteriors(),
                  r.getConfidentList());
            },
            () -> f.succeed(acc::result));
    f.start(() -> stub.classifyStream(up));
  }

  /**
   * Returns the most probable component of every row under the newest version of a model.
   *
   * @param model the model
   * @param rows the rows, each with the model's dimension
   * @return the assignments, in row order
   * @throws MixdException e.g. {@link InvalidArgumentException} for a non-finite value or a wrong
   *     column count, {@link NotFoundException} for an unknown model
   */
  public ClassifyResult classify(String model, double[][] rows) {
    return classify(model, rows, ClassifyOptions.defaults());
  }

  /**
   * Classifies rows with options; batches larger than one message go through the streaming call
   * in chunks, with the same result.
   *
   * @param model the model
   * @param rows the rows, each with the model's dimension
   * @param options version, threshold and extra outputs
   * @return the assignments, in row order
   * @throws MixdException when the call fails
   */
  public ClassifyResult classify(String model, double[][] rows, ClassifyOptions options) {
    return await(classifyAsync(model, rows, options), "classify " + model);
  }

  /**
   * Classifies a flat row-major array of rows.
   *
   * @param model the model
   * @param values the rows, row after row
   * @param cols the number of columns (the model's dimension)
   * @param options version, threshold and extra outputs
   * @return the assignments, in row order
   * @throws MixdException when the call fails
   */
  public ClassifyResult classify(
      String model, double[] values, int cols, ClassifyOptions options) {
    return await(classifyAsync(model, values, cols, options), "classify " + model);
  }

  /**
   * Asynchronous {@link #classify(String, double[][], ClassifyOptions)}.
   *
   * @param model the model
   * @param rows the rows
   * @param options version, threshold and extra outputs
   * @return the future of the assignments
   */
  public CompletableFuture<ClassifyResult> classifyAsync(
      String model, double[][] rows, ClassifyOptions options) {
    try {
      return classifyCall(model, Rows.of(rows, "rows"), options);
    } catch (MixdException e) {
      return failed("classify " + model, checkFailed("classify " + model, e));
    }
  }

  /**
   * Asynchronous {@link #classify(String, double[], int, ClassifyOptions)}.
   *
   * @param model the model
   * @param values the rows, row after row
   * @param cols the number of columns
   * @param options version, threshold and extra outputs
   * @return the future of the assignments
   */
  public CompletableFuture<ClassifyResult> classifyAsync(
      String model, double[] values, int cols, ClassifyOptions options) {
    try {
      return classifyCall(model, Rows.of(values, cols, "values"), options);
    } catch (MixdException e) {
      return failed("classify " + model, checkFailed("classify " + model, e));
    }
  }

  // ---------------------------------------------------------------- predict

  /** Decodes a matrix of {@code rows} × {@code cols} into dst at offset off. */
  private static void into(
      Types.Matrix m, String field, int rows, int cols, double[] dst, int off) {
    Wire.block(
        m,
        field,
        rows,
        new Wire.Sink() {
          @Override
          public double[] target(int c) {
            if (c != cols) {
              throw new Wire.ResponseException(field + " has " + c + " columns, want " + cols);
            }
            return dst;
          }

          @Override
          public int offset(int c) {
            return off;
          }
        });
  }

  /** Accumulates the outputs of the Predict requests of one batch. */
  private static final class PredictAcc {
    final int n;
    final int d;
    final int k;
    final int draws;
    String model = "";
    long version;
    final double[] means;
    final double[] logDens;
    final double[] sd;
    final double[] cov;
    final double[] post;
    final double[] cmeans;
    final double[] cdf;
    final double[] cscales;
    final double[] drawn;

    PredictAcc(int n, int d, Shape s, PredictOptions o) {
      this.n = n;
      this.d = d;
      this.k = s.components;
      this.draws = o.draws();
      int nd = Math.multiplyExact(n, d);
      int nk = Math.multiplyExact(n, k);
      means = new double[nd];
      logDens = new double[n];
      sd = o.standardDeviations() ? new double[nd] : null;
      cov = o.covariances() ? new double[Math.multiplyExact(nd, d)] : null;
      post = o.components() ? new double[nk] : null;
      cmeans = o.components() ? new double[Math.multiplyExact(nk, d)] : null;
      cdf = o.components() && s.studentT ? new double[nk] : null;
      cscales =
          o.componentScales() ? new double[Math.multiplyExact(Math.multiplyExact(nk, d), d)] : null;
      drawn = draws > 0 ? new double[Math.multiplyExact(nd, draws)] : null;
    }

    void add(PredictResponse r, int lo, int hi) {
      int m = hi - lo;
      into(r.getMeans(), "means", m, d, means, lo * d);
      Wire.column(r.getLogDensities(), "log_densities", m, logDens, lo);
      if (sd != null) {
        into(r.getStandardDeviations(), "standard_deviations", m, d, sd, lo * d);
      }
      if (cov != null) {
        into(r.getCovariances(), "covariances", m, d * d, cov, lo * d * d);
      }
      if (post != null) {
        into(r.getPosteriors(), "posteriors", m, k, post, lo * k);
        into(r.getComponentMeans(), "component_means", m, k * d, cmeans, lo * k * d);
      }
      if (cdf != null) {
        into(r.getComponentDegreesOfFreedom(), "component_degrees_of_freedom", m, k, cdf, lo * k);
      }
      if (cscales != null) {
        into(r.getComponentScales(), "component_scales", m, k * d * d, cscales, lo * k * d * d);
      }
      if (drawn != null) {
        into(r.getDraws(), "draws", m * draws, d, drawn, lo * draws * d);
      }
    }

    private Matrix matrix(double[] v, int cols) {
      return v == null ? null : new Matrix(n, cols, v);
    }

    PredictResult result() {
      return new PredictResult(
          model,
          version,
          new Matrix(n, d, means),
          logDens,
          matrix(sd, d),
          matrix(cov, d * d),
          matrix(post, k),
          matrix(cmeans, k * d),
          matrix(cdf, k),
          matrix(cscales, k * d * d),
          drawn == null ? null : new Matrix(Math.multiplyExact(n, draws), d, drawn));
    }
  }

  private CallFuture<PredictResult> predictCall(
      String model, Rows rows, Observed observed, PredictOptions opts) {
    String op = "predict " + model;
    Objects.requireNonNull(opts, "options");
    if (observed != null) {
      observed.check(rows);
    }
    if (opts.draws() < 0) {
      throw new InvalidArgumentException("", "draws is " + opts.draws() + ", must not be negative", null);
    }
    CallFuture<PredictResult> f = new CallFuture<>(op);
    // Resolve the version once (every request of the batch uses it) and learn K, to size the
    // requests by the width of their responses.
    shape(f, model, opts.version(), s -> predictRun(f, model, rows, observed, opts, s));
    return f;
  }

  private void predictRun(
      CallFuture<PredictResult> f,
      String model,
      Rows rows,
      Observed observed,
      PredictOptions opts,
      Shape s) {
    long d = rows.cols();
    long k = s.components;
    long per = d + 1 + opts.draws() * d; // means, log-density, draws
    if (opts.standardDeviations()) {
      per += d;
    }
    if (opts.covariances()) {
      per += d * d;
    }
    if (opts.components()) {
      per += 2 * k + k * d;
    }
    if (opts.componentScales()) {
      per += k * d * d;
    }
    int step = rowsPerChunk(Math.max(8 * per, 8 * d + Observed.width(observed, rows)));
    int[] b = rows.rows() == 0 ? new int[] {0, 0} : bounds(rows.rows(), step);
    PredictAcc acc = new PredictAcc(rows.rows(), rows.cols(), s, opts);
    predictChunk(f, model, rows, observed, opts, s.version, b, 0, acc);
  }

  /** Sends the request of chunk i, then, once it is answered, the next one. */
  private void predictChunk(
      CallFuture<PredictResult> f,
      String model,
      Rows rows,
      Observed observed,
      PredictOptions opts,
      long version,
      int[] b,
      int i,
      PredictAcc acc) {
    int lo = b[i];
    int hi = b[i + 1];
    PredictRequest req =
        PredictRequest.newBuilder()
            .setModel(model)
            .setVersion(version)
            .setRows(rows.encode(lo, hi))
            .setObservedMask(Observed.bytes(observed, rows, lo, hi))
            .setIncludeStandardDeviations(opts.standardDeviations())
            .setIncludeCovariances(opts.covariances())
            .setIncludeComponents(opts.components())
            .setIncludeComponentScales(opts.componentScales())
            .setDraws(opts.draws())
            .setSeed(opts.seed())
            .setFirstRow(lo)
            .setResponseEncoding(Types.MatrixEncoding.MATRIX_ENCODING_LITTLE_ENDIAN)
            .build();
    CallFuture<Boolean> step = f.child();
    f.start(
        () ->
            unary(
                step,
                unaryStub(),
                MixtureServiceGrpc.MixtureServiceStub::predict,
                req,
                (PredictResponse r) -> {
                  if (r.getVersion() != version) {
                    throw new Wire.ResponseException(
                        "version " + r.getVersion() + " answered, " + version + " asked for");
                  }
                  acc.model = r.getModel();
                  acc.version = r.getVersion();
                  acc.add(r, lo, hi);
                  return Boolean.TRUE;
                }));
    step.whenComplete(
        (v, e) -> {
          if (e != null) {
            f.fail(e);
          } else if (i + 2 >= b.length) {
            f.succeed(acc::result);
          } else {
            predictChunk(f, model, rows, observed, opts, version, b, i + 1, acc);
          }
        });
  }

  /**
   * Predicts each row's unobserved features from its observed ones: the conditional distribution
   * of the unobserved features under the model (conditional prediction), its mean and on request
   * its spread, per-component parts and seeded draws (multiple imputation). The model version is
   * resolved once; a large batch is split into several requests, sized by the width of the
   * response, with the same result as one request (draws included). Read {@link PredictResult}
   * for what a prediction does and does not mean.
   *
   * @param model the model
   * @param rows the rows, each with the model's dimension; values at unobserved positions are
   *     ignored but must be finite (put 0 there)
   * @param observed one flag per value, the rows' shape, true where observed (the others are
   *     predicted); null means every value is observed (nothing to predict)
   * @param options version, extra outputs and draws
   * @return the predictions, in row order
   * @throws MixdException e.g. {@link InvalidArgumentException} for a mask of the wrong shape or
   *     negative draws, {@link NotFoundException} for an unknown model, {@link
   *     FailedPreconditionException} when a conditional moment asked for does not exist (a
   *     Student-t component with too few degrees of freedom), {@link
   *     ResourceExhaustedException} for rows × draws above the daemon's limit
   */
  public PredictResult predict(
      String model, double[][] rows, boolean[][] observed, PredictOptions options) {
    return await(predictAsync(model, rows, observed, options), "predict " + model);
  }

  /**
   * Predicts from a flat row-major array of rows and a flat row-major mask.
   *
   * @param model the model
   * @param values the rows, row after row
   * @param cols the number of columns (the model's dimension)
   * @param observed one flag per value, row after row (flag {@code i * cols + j} for feature
   *     {@code j} of row {@code i}); null means every value is observed
   * @param options version, extra outputs and draws
   * @return the predictions, in row order
   * @throws MixdException when the call fails
   */
  public PredictResult predict(
      String model, double[] values, int cols, boolean[] observed, PredictOptions options) {
    return await(predictAsync(model, values, cols, observed, options), "predict " + model);
  }

  /**
   * Asynchronous {@link #predict(String, double[][], boolean[][], PredictOptions)}.
   *
   * @param model the model
   * @param rows the rows
   * @param observed one flag per value, the rows' shape; null means every value is observed
   * @param options version, extra outputs and draws
   * @return the future of the predictions
   */
  public CompletableFuture<PredictResult> predictAsync(
      String model, double[][] rows, boolean[][] observed, PredictOptions options) {
    try {
      return predictCall(
          model,
          Rows.of(rows, "rows"),
          observed == null ? null : Observed.of(observed, "observed"),
          options);
    } catch (MixdException e) {
      return failed("predict " + model, checkFailed("predict " + model, e));
    }
  }

  /**
   * Asynchronous {@link #predict(String, double[], int, boolean[], PredictOptions)}.
   *
   * @param model the model
   * @param values the rows, row after row
   * @param cols the number of columns
   * @param observed one flag per value, row after row; null means every value is observed
   * @param options version, extra outputs and draws
   * @return the future of the predictions
   */
  public CompletableFuture<PredictResult> predictAsync(
      String model, double[] values, int cols, boolean[] observed, PredictOptions options) {
    try {
      return predictCall(
          model,
          Rows.of(values, cols, "values"),
          observed == null ? null : Observed.of(observed, "observed"),
          options);
    } catch (MixdException e) {
      return failed("predict " + model, checkFailed("predict " + model, e));
    }
  }

  // ---------------------------------------------------------------- compare

  private static CompareResult compareResult(CompareModelsResponse r) {
    List<ComponentMatch> matches = new ArrayList<>(r.getMatchesCount());
    for (dev.mixd.api.v1.MixtureServiceOuterClass.ComponentMatch m : r.getMatchesList()) {
      matches.add(
          new ComponentMatch(
              m.getComponent(),
              m.getOtherComponent(),
              m.getDistance(),
              m.getWeight(),
              m.getOtherWeight()));
    }
    int[] up = r.getUnmatchedComponentsList().stream().mapToInt(Integer::intValue).toArray();
    int[] uq = r.getUnmatchedOtherComponentsList().stream().mapToInt(Integer::intValue).toArray();
    return new CompareResult(
        r.getModel(),
        r.getVersion(),
        r.getOtherModel(),
        r.getOtherVersion(),
        r.getSamples(),
        r.getKlForward(),
        r.getKlForwardStandardError(),
        r.getKlBackward(),
        r.getKlBackwardStandardError(),
        matches,
        up,
        uq,
        r.getComponentDistance());
  }

  /**
   * Compares two models, or two versions of one model, over the same features: Monte Carlo
   * estimates of the Kullback–Leibler divergence in both directions with standard errors, and a
   * matching of their components by Bhattacharyya distance (for drift checks). Read {@link
   * CompareResult} for what the numbers do and do not mean.
   *
   * @param model the first model, p
   * @param version its version; 0 means the newest
   * @param otherModel the second model, q; null or empty means the same model as {@code model}
   * @param otherVersion its version; 0 means the newest
   * @param options number and seed of the draws
   * @return the comparison
   * @throws MixdException e.g. {@link InvalidArgumentException} when the models have different
   *     dimensions or feature names, {@link NotFoundException} for an unknown model or version,
   *     {@link ResourceExhaustedException} for more draws than the daemon allows
   */
  public CompareResult compareModels(
      String model, long version, String otherModel, long otherVersion, CompareOptions options) {
    return await(
        compareModelsAsync(model, version, otherModel, otherVersion, options), "compare " + model);
  }

  /**
   * Asynchronous {@link #compareModels}.
   *
   * @param model the first model, p
   * @param version its version; 0 means the newest
   * @param otherModel the second model, q; null or empty means the same model
   * @param otherVersion its version; 0 means the newest
   * @param options number and seed of the draws
   * @return the future of the comparison
   */
  public CompletableFuture<CompareResult> compareModelsAsync(
      String model, long version, String otherModel, long otherVersion, CompareOptions options) {
    Objects.requireNonNull(options, "options");
    CompareModelsRequest req =
        CompareModelsRequest.newBuilder()
            .setModel(model)
            .setVersion(version)
            .setOtherModel(otherModel == null ? "" : otherModel)
            .setOtherVersion(otherVersion)
            .setSamples(options.samples())
            .setSeed(options.seed())
            .build();
    return unary(
        "compare " + model,
        MixtureServiceGrpc.MixtureServiceStub::compareModels,
        req,
        MixdClient::compareResult);
  }

  // ---------------------------------------------------------------- sample

  /** Accumulates drawn rows of Sample or SampleStream responses. */
  private static final class SampleAcc {
    final int n;
    String model = "";
    long version;
    double[] rows;
    int cols = -1;
    final int[] labels;
    int filled;

    SampleAcc(int n) {
      this.n = n;
      this.labels = new int[n];
    }

    void add(Types.Matrix m, Types.Labels l) {
      long r = m.getRows();
      if (r < 0 || filled + r > n) {
        throw new Wire.ResponseException(
            "responses hold more than the " + n + " rows asked for (" + (filled + r) + ")");
      }
      int rows = (int) r;
      int off = filled;
      Wire.block(
          m,
          "rows",
          rows,
          new Wire.Sink() {
            @Override
            public double[] target(int c) {
              if (cols < 0) {
                cols = c;
                SampleAcc.this.rows = new double[Math.multiplyExact(n, c)];
              } else if (c != cols) {
                throw new Wire.ResponseException(
                    "rows has " + c + " columns, earlier chunks " + cols);
              }
              return SampleAcc.this.rows;
            }

            @Override
            public int offset(int c) {
              return off * c;
            }
          });
      Wire.labels(l, "components", rows, labels, off);
      filled += rows;
    }

    SampleResult result() {
      if (filled != n) {
        throw new Wire.ResponseException("got " + filled + " rows, asked for " + n);
      }
      Matrix m = cols < 0 ? Matrix.empty() : new Matrix(n, cols, rows);
      return new SampleResult(model, version, m, labels);
    }
  }

  /**
   * Draws {@code count} rows from a model. Counts above 4096 travel in chunks over the streaming
   * call; the rows equal those of one call with the same seed.
   *
   * @param model the model
   * @param count the number of rows, at least 0
   * @param options version and seed
   * @return the rows and their components
   * @throws MixdException e.g. {@link NotFoundException} for an unknown model
   */
  public SampleResult sample(String model, int count, SampleOptions options) {
    return await(sampleAsync(model, count, options), "sample " + model);
  }

  /**
   * Asynchronous {@link #sample}.
   *
   * @param model the model
   * @param count the number of rows, at least 0
   * @param options version and seed
   * @return the future of the rows and their components
   */
  public CompletableFuture<SampleResult> sampleAsync(
      String model, int count, SampleOptions options) {
    String op = "sample " + model;
    Objects.requireNonNull(options, "options");
    if (count < 0) {
      return failed(op, new InvalidArgumentException(op, "count " + count + " is negative", null));
    }
    CallFuture<SampleResult> f = new CallFuture<>(op);
    SampleAcc acc = new SampleAcc(count);
    if (count <= SAMPLE_UNARY_ROWS) {
      unary(
          f,
          unaryStub(),
          MixtureServiceGrpc.MixtureServiceStub::sample,
          SampleRequest.newBuilder()
              .setModel(model)
              .setVersion(options.version())
              .setCount(count)
              .setSeed(options.seed())
              .setResponseEncoding(Types.MatrixEncoding.MATRIX_ENCODING_LITTLE_ENDIAN)
              .build(),
          r -> {
            acc.model = r.getModel();
            acc.version = r.getVersion();
            acc.add(r.getRows(), r.getComponents());
            return acc.result();
          });
      return f;
    }
    boolean[] first = {true};
    StreamObserver<SampleStreamResponse> obs =
        receiver(
            f,
            r -> {
              if (first[0]) {
                first[0] = false;
                acc.model = r.getModel();
                acc.version = r.getVersion();
              }
              acc.add(r.getRows(), r.getComponents());
            },
            () -> f.succeed(acc::result));
    SampleStreamRequest req =
        SampleStreamRequest.newBuilder()
            .setModel(model)
            .setVersion(options.version())
            .setCount(count)
            .setSeed(options.seed())
            .setResponseEncoding(Types.MatrixEncoding.MATRIX_ENCODING_LITTLE_ENDIAN)
            .build();
    f.start(() -> stub.sampleStream(req, obs));
    return f;
  }

  // ---------------------------------------------------------------- models

  /**
   * Returns one version of a model.
   *
   * @param name {@code "models/{id}"} or {@code "{id}"}
   * @param version the version; 0 means the newest
   * @return the model
   * @throws NotFoundException when there is no such model or version
   */
  public Types.Model getModel(String name, long version) {
    return await(getModelAsync(name, version), "get model " + name);
  }

  /**
   * Asynchronous {@link #getModel}.
   *
   * @param name the model's name
   * @param version the version; 0 means the newest
   * @return the future of the model
   */
  public CompletableFuture<Types.Model> getModelAsync(String name, long version) {
    return unary(
        "get model " + name,
        MixtureServiceGrpc.MixtureServiceStub::getModel,
        GetModelRequest.newBuilder().setName(name).setVersion(version).build(),
        r -> r.getModel());
  }

  /**
   * Lists the newest version of every model, by name, following every page.
   *
   * @return the models
   * @throws MixdException when the call fails
   */
  public List<Types.Model> listModels() {
    return await(listModelsAsync(), "list models");
  }

  /**
   * Asynchronous {@link #listModels}.
   *
   * @return the future of the models
   */
  public CompletableFuture<List<Types.Model>> listModelsAsync() {
    return paged(
        "list models",
        (s, token, o) ->
            s.listModels(ListModelsRequest.newBuilder().setPageToken(token).build(), o),
        ListModelsResponse::getModelsList,
        ListModelsResponse::getNextPageToken);
  }

  /**
   * Lists every version of one model, oldest first.
   *
   * @param name the model's name
   * @return the versions
   * @throws NotFoundException when there is no such model
   */
  public List<Types.Model> listVersions(String name) {
    return await(listVersionsAsync(name), "list versions of " + name);
  }

  /**
   * Asynchronous {@link #listVersions}.
   *
   * @param name the model's name
   * @return the future of the versions
   */
  public CompletableFuture<List<Types.Model>> listVersionsAsync(String name) {
    return paged(
        "list versions of " + name,
        (s, token, o) ->
            s.listModelVersions(
                ListModelVersionsRequest.newBuilder().setName(name).setPageToken(token).build(),
                o),
        ListModelVersionsResponse::getModelsList,
        ListModelVersionsResponse::getNextPageToken);
  }

  /**
   * Deletes one version of a model, or every version.
   *
   * @param name the model's name
   * @param version the version to delete; 0 deletes every version
   * @return the number of versions deleted
   * @throws NotFoundException when there is no such model or version
   */
  public long deleteModel(String name, long version) {
    return await(deleteModelAsync(name, version), "delete model " + name);
  }

  /**
   * Asynchronous {@link #deleteModel}.
   *
   * @param name the model's name
   * @param version the version to delete; 0 deletes every version
   * @return the future of the number of versions deleted
   */
  public CompletableFuture<Long> deleteModelAsync(String name, long version) {
    return unary(
        "delete model " + name,
        MixtureServiceGrpc.MixtureServiceStub::deleteModel,
        DeleteModelRequest.newBuilder().setName(name).setVersion(version).build(),
        r -> r.getDeletedVersions());
  }

  /**
   * Returns a model version as a model document: UTF-8 JSON in mixd's own documented format,
   * which {@link #importModel} reads back.
   *
   * @param name the model's name
   * @param version the version; 0 means the newest
   * @return the document's bytes
   * @throws NotFoundException when there is no such model or version
   */
  public byte[] exportModel(String name, long version) {
    return await(exportModelAsync(name, version), "export model " + name);
  }

  /**
   * Asynchronous {@link #exportModel}.
   *
   * @param name the model's name
   * @param version the version; 0 means the newest
   * @return the future of the document's bytes
   */
  public CompletableFuture<byte[]> exportModelAsync(String name, long version) {
    return unary(
        "export model " + name,
        MixtureServiceGrpc.MixtureServiceStub::exportModel,
        ExportModelRequest.newBuilder().setName(name).setVersion(version).build(),
        r -> r.getDocument().toByteArray());
  }

  /**
   * Validates a model document and stores it as a new version.
   *
   * @param document the document (UTF-8 JSON)
   * @param name store under this model id instead of the document's own; null or empty keeps the
   *     document's
   * @return the stored model
   * @throws InvalidArgumentException naming the field at fault when the document is invalid
   */
  public Types.Model importModel(byte[] document, String name) {
    return await(importModelAsync(document, name), "import model");
  }

  /**
   * Asynchronous {@link #importModel}.
   *
   * @param document the document
   * @param name the model id to store under, or null or empty for the document's own
   * @return the future of the stored model
   */
  public CompletableFuture<Types.Model> importModelAsync(byte[] document, String name) {
    Objects.requireNonNull(document, "document");
    return unary(
        "import model",
        MixtureServiceGrpc.MixtureServiceStub::importModel,
        ImportModelRequest.newBuilder()
            .setDocument(com.google.protobuf.ByteString.copyFrom(document))
            .setName(name == null ? "" : name)
            .build(),
        r -> r.getModel());
  }

  /**
   * Lists the fitters the daemon can run, with their options and defaults.
   *
   * @return the fitters, by name
   * @throws MixdException when the call fails
   */
  public List<Types.FitterInfo> listFitters() {
    return await(listFittersAsync(), "list fitters");
  }

  /**
   * Asynchronous {@link #listFitters}.
   *
   * @return the future of the fitters
   */
  public CompletableFuture<List<Types.FitterInfo>> listFittersAsync() {
    return unary(
        "list fitters",
        MixtureServiceGrpc.MixtureServiceStub::listFitters,
        ListFittersRequest.getDefaultInstance(),
        r -> r.getFittersList());
  }
}
