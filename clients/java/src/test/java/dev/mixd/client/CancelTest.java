package dev.mixd.client;

import static org.junit.jupiter.api.Assertions.assertEquals;
import static org.junit.jupiter.api.Assertions.assertInstanceOf;
import static org.junit.jupiter.api.Assertions.assertThrows;
import static org.junit.jupiter.api.Assertions.assertTrue;

import io.grpc.Status;
import java.util.concurrent.CountDownLatch;
import java.util.concurrent.ExecutionException;
import java.util.concurrent.TimeUnit;
import dev.mixd.api.v1.Types;
import org.junit.jupiter.api.AfterAll;
import org.junit.jupiter.api.BeforeAll;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.TestInstance;
import org.junit.jupiter.api.extension.ExtendWith;

/**
 * Cancelling a running fit: through the handle of {@code fitAsync} (the daemon cancels the fit when
 * the call ends) and through {@code cancelJob} while a watch follows the job.
 */
@ExtendWith(SharedDaemon.class)
@TestInstance(TestInstance.Lifecycle.PER_CLASS)
class CancelTest {
  MixdClient client;

  /**
   * A fit that runs far longer than the test waits: 200 000 rows, 8 components, 20 restarts, an
   * iteration cap of 100 000 and a tolerance so small that only an exact fixed point converges.
   */
  static final FitOptions LONG =
      FitOptions.components(8)
          .withSeed(5)
          .withRestarts(20)
          .withMaxIterations(100_000)
          .withTolerance(Double.MIN_VALUE);

  static final double[] DATA = Pumps.flat(31, 200_000);

  @BeforeAll
  void connect(Daemon daemon) {
    client = MixdClient.connect(daemon.address());
  }

  @AfterAll
  void close() {
    client.close();
  }

  /** Polls the job until it reaches a final state. */
  private Types.FitJob awaitEnd(String job) throws InterruptedException {
    long deadline = System.nanoTime() + TimeUnit.SECONDS.toNanos(60);
    while (true) {
      Types.FitJob j = client.getJob(job).job();
      switch (j.getState()) {
        case FIT_JOB_STATE_SUCCEEDED:
        case FIT_JOB_STATE_FAILED:
        case FIT_JOB_STATE_CANCELLED:
          return j;
        default:
          break;
      }
      if (System.nanoTime() > deadline) {
        throw new AssertionError("job " + job + " still " + j.getState() + " after 60 s");
      }
      Thread.sleep(50);
    }
  }

  @Test
  void cancellingTheFitCallCancelsTheJob() throws Exception {
    CountDownLatch firstProgress = new CountDownLatch(1);
    FitCall call = client.fitAsync("cancel-call", DATA, 3, LONG, p -> firstProgress.countDown());
    Types.FitJob job = call.job().get(120, TimeUnit.SECONDS);
    assertTrue(firstProgress.await(120, TimeUnit.SECONDS), "no progress event within 120 s");
    call.cancel();
    ExecutionException e =
        assertThrows(ExecutionException.class, () -> call.result().get(30, TimeUnit.SECONDS));
    CancelledException c = assertInstanceOf(CancelledException.class, e.getCause());
    assertEquals(Status.Code.CANCELLED, c.code());
    assertThrows(CancelledException.class, call::await);
    Types.FitJob end = awaitEnd(job.getName());
    assertEquals(Types.FitJobState.FIT_JOB_STATE_CANCELLED, end.getState(), end.toString());
    assertThrows(NotFoundException.class, () -> client.getModel("cancel-call", 0));
  }

  @Test
  void cancelJobEndsTheWatchWithCancelled() throws Exception {
    Types.FitJob job = client.startFit("cancel-job", DATA, 3, LONG);
    CountDownLatch firstProgress = new CountDownLatch(1);
    FitCall watch = client.watchJobAsync(job.getName(), p -> firstProgress.countDown());
    assertTrue(firstProgress.await(120, TimeUnit.SECONDS), "no progress event within 120 s");
    Types.FitJob after = client.cancelJob(job.getName());
    assertEquals(job.getName(), after.getName());
    CancelledException c = assertThrows(CancelledException.class, watch::await);
    assertTrue(c.statusMessage().contains(job.getName()), c.statusMessage());
    assertEquals(Types.FitJobState.FIT_JOB_STATE_CANCELLED, awaitEnd(job.getName()).getState());
    assertThrows(NotFoundException.class, () -> client.getModel("cancel-job", 0));
  }

  @Test
  void interruptingABlockingFitCancelsIt() throws Exception {
    CountDownLatch firstProgress = new CountDownLatch(1);
    String[] jobName = new String[1];
    Throwable[] thrown = new Throwable[1];
    Thread t =
        new Thread(
            () -> {
              try {
                client.fit(
                    "cancel-interrupt",
                    DATA,
                    3,
                    LONG,
                    new FitListener() {
                      @Override
                      public void onProgress(Types.FitProgress p) {
                        firstProgress.countDown();
                      }

                      @Override
                      public void onJob(Types.FitJob job) {
                        jobName[0] = job.getName();
                      }
                    });
              } catch (Throwable e) {
                thrown[0] = e;
              }
            });
    t.start();
    assertTrue(firstProgress.await(120, TimeUnit.SECONDS), "no progress event within 120 s");
    t.interrupt();
    t.join(30_000);
    assertInstanceOf(CancelledException.class, thrown[0]);
    assertEquals(Types.FitJobState.FIT_JOB_STATE_CANCELLED, awaitEnd(jobName[0]).getState());
  }
}
