package dev.mixd.client;

import static org.junit.jupiter.api.Assertions.assertArrayEquals;
import static org.junit.jupiter.api.Assertions.assertEquals;
import static org.junit.jupiter.api.Assertions.assertTrue;

import io.grpc.netty.shaded.io.netty.channel.epoll.Epoll;
import dev.mixd.api.v1.Types;
import org.junit.jupiter.api.Test;

/** A daemon listening on a Unix socket, reached through the epoll transport (Linux). */
class UnixSocketTest {
  @Test
  void fitScoreClassifyOverAUnixSocket() throws Exception {
    // The Unix-socket transport is Linux-only; CI and the development machines are Linux, where
    // this must run: fail rather than skip there.
    if (System.getProperty("os.name").toLowerCase(java.util.Locale.ROOT).contains("linux")) {
      assertTrue(Epoll.isAvailable(), "epoll unavailable on Linux: " + Epoll.unavailabilityCause());
    } else {
      org.junit.jupiter.api.Assumptions.assumeTrue(Epoll.isAvailable(), "not Linux");
    }
    try (Daemon d = Daemon.startUnix()) {
      assertTrue(d.address().startsWith("unix:"), d.address());
      // A bearer token is allowed over a Unix socket without TLS: it never leaves the machine.
      try (MixdClient c = MixdClient.builder(d.address()).bearerToken("local").build()) {
        assertTrue(c.listFitters().stream().anyMatch(f -> f.getName().equals("em")));
        double[][] rows = Pumps.rows(51, 800);
        Types.Model m = c.fit("uds-pumps", rows, FitOptions.components(3).withSeed(4));
        assertEquals("models/uds-pumps", m.getName());
        ScoreResult s = c.score("uds-pumps", rows);
        assertEquals(800, s.logDensities().length);
        assertEquals(m.getReport().getLogLikelihood(), s.logLikelihood(), 1e-6 * Math.abs(s.logLikelihood()));
        ClassifyResult k = c.classify("uds-pumps", rows);
        assertEquals(800, k.components().length);
        // The same rows in many chunks over the socket give the same answers.
        try (MixdClient small = MixdClient.builder(d.address()).chunkBytes(2048).build()) {
          assertArrayEquals(k.components(), small.classify("uds-pumps", rows).components());
          assertArrayEquals(s.logDensities(), small.score("uds-pumps", rows).logDensities());
        }
      }
    }
  }
}
