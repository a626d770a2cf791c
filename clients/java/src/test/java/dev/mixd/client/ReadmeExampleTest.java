package dev.mixd.client;

import static org.junit.jupiter.api.Assertions.assertEquals;
import static org.junit.jupiter.api.Assertions.assertTrue;

import dev.mixd.client.example.PumpGaps;
import dev.mixd.client.example.PumpQuickstart;
import java.io.ByteArrayOutputStream;
import java.io.PrintStream;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.regex.Matcher;
import java.util.regex.Pattern;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.extension.ExtendWith;

/**
 * The README's Java examples are this project's PumpQuickstart and PumpGaps, character for
 * character, and they run against a real daemon.
 */
@ExtendWith(SharedDaemon.class)
class ReadmeExampleTest {
  static final Path PROJECT = Daemon.repoRoot().resolve("clients/java");

  @Test
  void readmeShowsTheCompiledExample() throws Exception {
    String readme = Files.readString(PROJECT.resolve("README.md"));
    Matcher m = Pattern.compile("```java\n(.*?)```", Pattern.DOTALL).matcher(readme);
    assertTrue(m.find(), "README.md has no ```java block");
    String source =
        Files.readString(
            PROJECT.resolve("src/test/java/dev/mixd/client/example/PumpQuickstart.java"));
    assertEquals(source, m.group(1), "README's example differs from PumpQuickstart.java");
    assertTrue(m.find(), "README.md has no second ```java block");
    String gaps =
        Files.readString(PROJECT.resolve("src/test/java/dev/mixd/client/example/PumpGaps.java"));
    assertEquals(gaps, m.group(1), "README's second example differs from PumpGaps.java");
  }

  private static String capture(Runnable r) {
    ByteArrayOutputStream buf = new ByteArrayOutputStream();
    PrintStream old = System.out;
    System.setOut(new PrintStream(buf, true, StandardCharsets.UTF_8));
    try {
      r.run();
    } finally {
      System.setOut(old);
    }
    String out = buf.toString(StandardCharsets.UTF_8);
    System.out.print(out);
    return out;
  }

  @Test
  void gapsExampleRunsAndPrintsTheClientsAnswers(Daemon daemon) {
    capture(() -> PumpQuickstart.main(new String[] {daemon.address()}));
    String out = capture(() -> PumpGaps.main(new String[] {daemon.address()}));
    double[][] reading = {{41.0, 37.0, 0.0}};
    boolean[][] seen = {{true, true, false}};
    try (MixdClient c = MixdClient.connect(daemon.address())) {
      double ld =
          c.score("pump-station", reading, ScoreOptions.defaults().withObserved(seen))
              .logDensities()[0];
      assertTrue(out.contains(String.format("log-density of flow and current: %.4f%n", ld)), out);
      PredictResult p =
          c.predict(
              "pump-station",
              reading,
              seen,
              PredictOptions.defaults().withStandardDeviations(true).withDraws(3, 1));
      assertTrue(
          out.contains(
              String.format(
                  "vibration: %.4f ± %.4f mm/s, draws %.4f %.4f %.4f%n",
                  p.means().get(0, 2),
                  p.standardDeviations().orElseThrow().get(0, 2),
                  p.draws().orElseThrow().get(0, 2),
                  p.draws().orElseThrow().get(1, 2),
                  p.draws().orElseThrow().get(2, 2))),
          out);
      // The vibration of the middle regime, 2.30 mm/s with spread 0.25 (testdata/pumps/README.md).
      assertEquals(2.3, p.means().get(0, 2), 0.15, out);
      CompareResult d =
          c.compareModels("pump-station", 1, "", 0, CompareOptions.defaults().withSeed(1));
      assertTrue(
          out.contains(
              String.format(
                  "KL(v1 || v%d) = %.4f ± %.4f nats%n",
                  d.otherVersion(), d.klForward(), d.klForwardStandardError())),
          out);
    }
  }

  @Test
  void exampleRuns(Daemon daemon) {
    ByteArrayOutputStream buf = new ByteArrayOutputStream();
    PrintStream old = System.out;
    System.setOut(new PrintStream(buf, true, StandardCharsets.UTF_8));
    try {
      PumpQuickstart.main(new String[] {daemon.address()});
    } finally {
      System.setOut(old);
    }
    String out = buf.toString(StandardCharsets.UTF_8);
    System.out.print(out);
    assertTrue(Pattern.compile("(?m)^iteration \\d+: -?\\d").matcher(out).find(), out);
    Matcher stored = Pattern.compile("stored models/pump-station version \\d+").matcher(out);
    assertTrue(stored.find(), out);
    Matcher r =
        Pattern.compile("reading (\\d): log-density (\\S+), percentile (\\S+), component (\\d)")
            .matcher(out);
    double[] pct = new double[2];
    int n = 0;
    while (r.find()) {
      pct[Integer.parseInt(r.group(1))] = Double.parseDouble(r.group(3));
      n++;
    }
    assertEquals(2, n, out);
    // The day-regime reading is ordinary; the low-flow, high-current, high-vibration one is rarer
    // than nearly every training reading.
    assertTrue(pct[0] > 10, out);
    assertTrue(pct[1] < 1, out);
  }
}
