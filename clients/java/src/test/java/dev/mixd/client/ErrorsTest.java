package dev.mixd.client;

import static org.junit.jupiter.api.Assertions.assertEquals;
import static org.junit.jupiter.api.Assertions.assertFalse;
import static org.junit.jupiter.api.Assertions.assertInstanceOf;
import static org.junit.jupiter.api.Assertions.assertThrows;
import static org.junit.jupiter.api.Assertions.assertTrue;

import io.grpc.Status;
import java.net.ServerSocket;
import java.nio.charset.StandardCharsets;
import java.nio.file.Path;
import java.time.Duration;
import java.util.concurrent.ExecutionException;
import java.util.concurrent.TimeUnit;
import org.junit.jupiter.api.AfterAll;
import org.junit.jupiter.api.BeforeAll;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.TestInstance;
import org.junit.jupiter.api.extension.ExtendWith;
import org.junit.jupiter.api.io.TempDir;

/** Every documented error reaches the caller as the right exception with the daemon's message. */
@ExtendWith(SharedDaemon.class)
@TestInstance(TestInstance.Lifecycle.PER_CLASS)
class ErrorsTest {
  static final String MODEL = "errors-pumps";

  MixdClient client;
  Daemon daemon;

  @BeforeAll
  void fit(Daemon daemon) {
    this.daemon = daemon;
    client = MixdClient.connect(daemon.address());
    client.fit(MODEL, Pumps.rows(21, 600), FitOptions.components(2).withSeed(1));
  }

  @AfterAll
  void close() {
    client.close();
  }

  private static double[][] withNaN(int n, int row, int col) {
    double[][] r = Pumps.rows(22, n);
    r[row][col] = Double.NaN;
    return r;
  }

  @Test
  void nanInScoreIsInvalidArgumentNamingTheRow() {
    InvalidArgumentException e =
        assertThrows(InvalidArgumentException.class, () -> client.score(MODEL, withNaN(10, 3, 1)));
    assertEquals(Status.Code.INVALID_ARGUMENT, e.code());
    assertEquals("score " + MODEL, e.operation());
    assertTrue(e.statusMessage().contains("row 3, column 1 is NaN"), e.statusMessage());
    assertTrue(e.getMessage().startsWith("score " + MODEL + ": INVALID_ARGUMENT: "), e.getMessage());
    assertInstanceOf(InvalidArgumentException.class, e.getCause(), "blocking calls rethrow");
  }

  @Test
  void nanInALaterChunkOfAStreamIsInvalidArgument() {
    try (MixdClient small = MixdClient.builder(daemon.address()).chunkBytes(1024).build()) {
      // 1024-byte chunks hold 42 rows of 3 columns: row 200 is in chunk 4.
      assertThrows(InvalidArgumentException.class, () -> small.classify(MODEL, withNaN(400, 200, 2)));
      assertThrows(InvalidArgumentException.class, () -> small.score(MODEL, withNaN(400, 200, 0)));
    }
  }

  @Test
  void nanInFitIsInvalidArgumentAndStoresNothing() {
    assertThrows(
        InvalidArgumentException.class,
        () -> client.fit("errors-nan", withNaN(300, 100, 0), FitOptions.components(2)));
    assertThrows(NotFoundException.class, () -> client.getModel("errors-nan", 0));
  }

  @Test
  void wrongColumnCountIsInvalidArgument() {
    double[] two = {1, 2, 3, 4};
    InvalidArgumentException e =
        assertThrows(
            InvalidArgumentException.class,
            () -> client.classify(MODEL, two, 2, ClassifyOptions.defaults()));
    assertTrue(e.statusMessage().contains("dimension"), e.statusMessage());
    assertThrows(
        InvalidArgumentException.class,
        () -> client.score(MODEL, new double[][] {{1, 2, 3, 4}}));
  }

  @Test
  void raggedRowsAreRefusedBeforeSending() {
    InvalidArgumentException e =
        assertThrows(
            InvalidArgumentException.class,
            () -> client.score(MODEL, new double[][] {{1, 2, 3}, {1, 2}}));
    assertTrue(e.statusMessage().contains("rows[1] has 2 values"), e.statusMessage());
    assertThrows(
        InvalidArgumentException.class,
        () -> client.score(MODEL, new double[] {1, 2, 3, 4}, 3, ScoreOptions.defaults()));
    assertThrows(
        InvalidArgumentException.class,
        () ->
            client.fit(
                "errors-weights",
                Pumps.rows(1, 10),
                FitOptions.components(1).withRowWeights(new double[9])));
    assertThrows(InvalidArgumentException.class, () -> client.sample(MODEL, -1, SampleOptions.defaults()));
  }

  @Test
  void badObservedMaskIsInvalidArgument() throws Exception {
    double[][] rows = Pumps.rows(24, 4);
    // Refused by the client before sending, naming the mask and the shapes.
    InvalidArgumentException flat =
        assertThrows(
            InvalidArgumentException.class,
            () ->
                client.score(
                    MODEL,
                    Check.flat(rows),
                    3,
                    ScoreOptions.defaults().withObserved(new boolean[11])));
    assertEquals("score " + MODEL, flat.operation());
    assertTrue(
        flat.statusMessage().contains("observed has 11 flags; want one per value, 4×3 = 12"),
        flat.statusMessage());
    boolean[][] ragged = {{true, true, true}, {true, true}, {true, true, true}, {true, true, true}};
    InvalidArgumentException r =
        assertThrows(
            InvalidArgumentException.class,
            () -> client.classify(MODEL, rows, ClassifyOptions.defaults().withObserved(ragged)));
    assertTrue(r.statusMessage().contains("observed[1] has 2 flags"), r.statusMessage());
    InvalidArgumentException p =
        assertThrows(
            InvalidArgumentException.class,
            () -> client.predict(MODEL, rows, new boolean[3][3], PredictOptions.defaults()));
    assertEquals("predict " + MODEL, p.operation());
    assertTrue(p.statusMessage().contains("observed has 3 rows"), p.statusMessage());
    assertThrows(
        InvalidArgumentException.class,
        () -> client.predict(MODEL, rows, null, PredictOptions.defaults().withDraws(-1, 0)));

    // Refused by the daemon: a mask of the wrong length sent through the generated stub.
    dev.mixd.api.v1.MixtureServiceOuterClass.ScoreRequest req =
        dev.mixd.api.v1.MixtureServiceOuterClass.ScoreRequest.newBuilder()
            .setModel(MODEL)
            .setRows(Rows.of(rows, "rows").encode(0, 4))
            .setObservedMask(com.google.protobuf.ByteString.copyFrom(new byte[] {1, 0}))
            .build();
    java.util.concurrent.CompletableFuture<Object> f = new java.util.concurrent.CompletableFuture<>();
    client
        .stub()
        .score(
            req,
            new io.grpc.stub.StreamObserver<>() {
              @Override
              public void onNext(dev.mixd.api.v1.MixtureServiceOuterClass.ScoreResponse v) {
                f.complete(v);
              }

              @Override
              public void onError(Throwable t) {
                f.completeExceptionally(t);
              }

              @Override
              public void onCompleted() {}
            });
    ExecutionException e = assertThrows(ExecutionException.class, () -> f.get(30, TimeUnit.SECONDS));
    MixdException m = MixdException.from("score", e.getCause());
    assertInstanceOf(InvalidArgumentException.class, m);
    assertTrue(
        m.statusMessage().contains("observed_mask has 2 bytes, want one per value, rows*cols = 4*3 = 12"),
        m.statusMessage());
  }

  @Test
  void unknownModelIsNotFound() {
    double[][] rows = Pumps.rows(23, 5);
    NotFoundException e =
        assertThrows(NotFoundException.class, () -> client.score("errors-missing", rows));
    assertTrue(e.statusMessage().contains("errors-missing"), e.statusMessage());
    assertThrows(NotFoundException.class, () -> client.classify("errors-missing", rows));
    assertThrows(
        NotFoundException.class,
        () -> client.sample("errors-missing", 10, SampleOptions.defaults()));
    assertThrows(
        NotFoundException.class,
        () -> client.sample("errors-missing", 100_000, SampleOptions.defaults()));
    assertThrows(NotFoundException.class, () -> client.getModel("errors-missing", 0));
    assertThrows(NotFoundException.class, () -> client.exportModel("errors-missing", 0));
    assertThrows(NotFoundException.class, () -> client.getModel(MODEL, 999));
    assertThrows(
        NotFoundException.class,
        () ->
            client.score(
                "errors-missing",
                rows,
                ScoreOptions.defaults().withComponentLogDensities(true)));
    assertThrows(NotFoundException.class, () -> client.getJob("fitJobs/no-such-job"));
  }

  @Test
  void asyncCallsFailTheirFutureWithTheSameException() {
    ExecutionException e =
        assertThrows(
            ExecutionException.class,
            () ->
                client
                    .scoreAsync("errors-missing", Pumps.rows(1, 2), ScoreOptions.defaults())
                    .get(30, TimeUnit.SECONDS));
    assertInstanceOf(NotFoundException.class, e.getCause());
    ExecutionException ragged =
        assertThrows(
            ExecutionException.class,
            () ->
                client
                    .classifyAsync(MODEL, new double[][] {{1, 2, 3}, {}}, ClassifyOptions.defaults())
                    .get(30, TimeUnit.SECONDS));
    assertInstanceOf(InvalidArgumentException.class, ragged.getCause());
  }

  @Test
  void invalidDocumentsAndSettingsAreInvalidArgument() {
    byte[] doc = "{\"format\":\"mixd-model\",\"format_version\":1,\"name\":\"x\"}".getBytes(StandardCharsets.UTF_8);
    assertThrows(InvalidArgumentException.class, () -> client.importModel(doc, "errors-doc"));
    assertThrows(NotFoundException.class, () -> client.getModel("errors-doc", 0));
    MixdException e =
        assertThrows(
            MixdException.class,
            () ->
                client.fit(
                    "errors-option",
                    Pumps.rows(2, 200),
                    FitOptions.components(2).withOption("no-such-option", "1")));
    assertEquals(Status.Code.INVALID_ARGUMENT, e.code(), e.getMessage());
    assertTrue(e.statusMessage().contains("no-such-option"), e.statusMessage());
  }

  @Test
  void unknownFitterIsReported() {
    MixdException e =
        assertThrows(
            MixdException.class,
            () ->
                client.fit(
                    "errors-fitter", Pumps.rows(2, 50), FitOptions.components(2).withFitter("nope")));
    assertEquals(Status.Code.INVALID_ARGUMENT, e.code(), e.getMessage());
    assertTrue(e.statusMessage().contains("unknown fitter \"nope\""), e.statusMessage());
  }

  @Test
  void noDaemonAtTheAddressIsUnavailable(@TempDir Path dir) throws Exception {
    int port;
    try (ServerSocket s = new ServerSocket(0, 1, java.net.InetAddress.getLoopbackAddress())) {
      port = s.getLocalPort();
    }
    try (MixdClient c = MixdClient.connect("127.0.0.1:" + port)) {
      UnavailableException e = assertThrows(UnavailableException.class, c::listFitters);
      assertTrue(e.isRetryable());
      assertThrows(UnavailableException.class, () -> c.score(MODEL, Pumps.rows(1, 3)));
    }
    try (MixdClient c = MixdClient.connect("unix:" + dir.resolve("none.sock"))) {
      assertThrows(UnavailableException.class, c::listModels);
    }
  }

  @Test
  void malformedAddressesAreRefusedAtOnce() {
    assertThrows(IllegalArgumentException.class, () -> MixdClient.connect("no-port"));
    assertThrows(IllegalArgumentException.class, () -> MixdClient.connect("127.0.0.1:http"));
    assertThrows(IllegalArgumentException.class, () -> MixdClient.connect("127.0.0.1:70000"));
    assertThrows(IllegalArgumentException.class, () -> MixdClient.connect("unix:"));
  }

  @Test
  void exhaustedDefaultDeadlineIsDeadlineExceeded() {
    try (MixdClient c = MixdClient.builder(daemon.address()).timeout(Duration.ofNanos(1)).build()) {
      DeadlineExceededException e =
          assertThrows(DeadlineExceededException.class, c::listFitters);
      assertFalse(e.isRetryable());
    }
  }

  @Test
  void closedClientFailsCalls() {
    MixdClient c = MixdClient.connect(daemon.address());
    assertFalse(c.listFitters().isEmpty());
    c.close();
    MixdException e = assertThrows(MixdException.class, c::listFitters);
    assertEquals(Status.Code.UNAVAILABLE, e.code(), e.getMessage());
  }

  @Test
  void listenerExceptionCancelsTheFit() {
    CancelledException e =
        assertThrows(
            CancelledException.class,
            () ->
                client.fit(
                    "errors-listener",
                    Pumps.rows(3, 500),
                    FitOptions.components(2),
                    p -> {
                      throw new IllegalStateException("listener bug");
                    }));
    assertTrue(e.statusMessage().contains("listener bug"), e.statusMessage());
  }
}
