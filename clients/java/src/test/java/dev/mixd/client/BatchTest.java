package dev.mixd.client;

import static org.junit.jupiter.api.Assertions.assertEquals;
import static org.junit.jupiter.api.Assertions.assertTrue;

import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.extension.ExtendWith;

/** One million rows classified through the streaming path, checked row by row against Go. */
@ExtendWith(SharedDaemon.class)
class BatchTest {
  static final int ROWS = 1_000_000;

  @Test
  void classifyOneMillionRowsThroughTheStream(Daemon daemon) throws Exception {
    Counting counter = new Counting();
    try (MixdClient client = MixdClient.builder(daemon.address()).intercept(counter).build()) {
      client.fit("batch-pumps", Pumps.rows(41, 3000), FitOptions.components(3).withSeed(2));
      double[] rows = Pumps.flat(42, ROWS);
      ClassifyResult c = client.classify("batch-pumps", rows, 3, ClassifyOptions.defaults());
      assertEquals(ROWS, c.components().length);
      assertEquals(ROWS, c.maxPosteriors().length);
      // 24-byte rows in chunks of at most DEFAULT_CHUNK_BYTES: ceil(1e6 / 172032) = 6 messages.
      int perChunk = MixdClient.DEFAULT_CHUNK_BYTES / 24;
      int chunks = (ROWS + perChunk - 1) / perChunk;
      assertEquals(6, chunks);
      assertEquals(chunks, counter.sent("mixd.v1.MixtureService/ClassifyStream"));
      assertEquals(0, counter.sent("mixd.v1.MixtureService/Classify"));
      byte[] doc = client.exportModel("batch-pumps", 0);
      GoReference go = GoReference.evaluate(doc, rows, 3, "assign", 0, 0);
      Check.same(go.ints("components"), c.components(), "component");
      Check.close(go.get("max_posteriors").values(), c.maxPosteriors(), 1e-12, "max posterior");
      for (boolean b : c.confident()) {
        assertTrue(b, "no threshold: every row confident");
      }
    }
  }
}
