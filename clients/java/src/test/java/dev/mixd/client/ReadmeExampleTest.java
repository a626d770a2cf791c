package dev.mixd.client;

import static org.junit.jupiter.api.Assertions.assertEquals;
import static org.junit.jupiter.api.Assertions.assertTrue;

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
 * The README's Java example is this project's PumpQuickstart, character for character, and it runs
 * against a real daemon.
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
