package dev.mixd.client;

import java.io.IOException;
import java.io.UncheckedIOException;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.ArrayList;
import java.util.Comparator;
import java.util.List;
import java.util.concurrent.TimeUnit;
import java.util.stream.Stream;

/**
 * A real mixd daemon for the tests: the Go binary is built once per test JVM from the repository
 * this Maven project lives in, and each {@code Daemon} runs it on 127.0.0.1 port 0 (or a Unix
 * socket) with a temporary data directory.
 */
final class Daemon implements AutoCloseable {
  /** The line mixd prints on stderr once it accepts connections. */
  static final String LISTENING = "mixd: listening on ";

  private static Path binary;
  private static Path workDir;

  private final Process process;
  private final Path dir;
  private final Path log;
  private final String address;

  private Daemon(Process process, Path dir, Path log, String address) {
    this.process = process;
    this.dir = dir;
    this.log = log;
    this.address = address;
  }

  /** The repository root: -Dmixd.repoRoot (set by the pom), else two levels above the project. */
  static Path repoRoot() {
    String p = System.getProperty("mixd.repoRoot");
    Path root =
        p != null && !p.isEmpty()
            ? Path.of(p)
            : Path.of(System.getProperty("user.dir")).resolve("../..");
    root = root.toAbsolutePath().normalize();
    if (!Files.isRegularFile(root.resolve("go.mod"))) {
      throw new IllegalStateException("no go.mod in " + root + ": set -Dmixd.repoRoot");
    }
    return root;
  }

  /** A temporary directory for the whole test run, removed when the JVM exits. */
  static synchronized Path workDir() throws IOException {
    if (workDir == null) {
      Path d = Files.createTempDirectory("mixd-java-test");
      Runtime.getRuntime().addShutdownHook(new Thread(() -> deleteTree(d)));
      workDir = d;
    }
    return workDir;
  }

  /**
   * Builds the daemon once per JVM, or takes the prebuilt binary named by -Dmixd.binary (for
   * running the tests against a daemon built elsewhere).
   */
  static synchronized Path binary() throws IOException, InterruptedException {
    String given = System.getProperty("mixd.binary");
    if (binary == null && given != null && !given.isEmpty()) {
      binary = Path.of(given).toAbsolutePath();
    }
    if (binary == null) {
      Path out = workDir().resolve("mixd");
      run(repoRoot(), List.of("go", "build", "-o", out.toString(), "./cmd/mixd"), 600);
      binary = out;
    }
    return binary;
  }

  /** Runs a command to completion, failing with its output when it exits non-zero. */
  static String run(Path dir, List<String> cmd, long timeoutSeconds)
      throws IOException, InterruptedException {
    Path out = Files.createTempFile(workDir(), "cmd", ".out");
    Path err = Files.createTempFile(workDir(), "cmd", ".err");
    Process p =
        new ProcessBuilder(cmd)
            .directory(dir.toFile())
            .redirectOutput(out.toFile())
            .redirectError(err.toFile())
            .start();
    if (!p.waitFor(timeoutSeconds, TimeUnit.SECONDS)) {
      p.destroyForcibly();
      throw new IllegalStateException(String.join(" ", cmd) + ": timed out");
    }
    String stdout = Files.readString(out, StandardCharsets.UTF_8);
    String stderr = Files.readString(err, StandardCharsets.UTF_8);
    Files.deleteIfExists(out);
    Files.deleteIfExists(err);
    if (p.exitValue() != 0) {
      throw new IllegalStateException(
          String.join(" ", cmd) + ": exit " + p.exitValue() + "\n" + stderr);
    }
    return stdout;
  }

  /** Starts a daemon listening on 127.0.0.1, port 0. */
  static Daemon startTcp() throws IOException, InterruptedException {
    return start("127.0.0.1:0");
  }

  /** Starts a daemon listening on a Unix socket in a new temporary directory. */
  static Daemon startUnix() throws IOException, InterruptedException {
    Path d = Files.createTempDirectory(workDir(), "uds");
    return start("unix:" + d.resolve("mixd.sock"));
  }

  private static Daemon start(String listen) throws IOException, InterruptedException {
    Path bin = binary();
    Path dir = Files.createTempDirectory(workDir(), "daemon");
    Path log = dir.resolve("stderr.log");
    List<String> cmd = new ArrayList<>();
    cmd.add(bin.toString());
    cmd.add("serve");
    cmd.add("--listen");
    cmd.add(listen);
    cmd.add("--data-dir");
    cmd.add(dir.resolve("data").toString());
    Process p =
        new ProcessBuilder(cmd)
            .directory(dir.toFile())
            .redirectOutput(ProcessBuilder.Redirect.DISCARD)
            .redirectError(log.toFile())
            .start();
    long deadline = System.nanoTime() + TimeUnit.SECONDS.toNanos(60);
    while (System.nanoTime() < deadline) {
      for (String line : Files.readAllLines(log, StandardCharsets.UTF_8)) {
        if (line.startsWith(LISTENING)) {
          return new Daemon(p, dir, log, line.substring(LISTENING.length()).trim());
        }
      }
      if (!p.isAlive()) {
        throw new IllegalStateException(
            "mixd exited with " + p.exitValue() + ":\n" + Files.readString(log));
      }
      Thread.sleep(20);
    }
    p.destroyForcibly();
    throw new IllegalStateException("mixd printed no listening line:\n" + Files.readString(log));
  }

  /** The address mixd printed: "127.0.0.1:PORT" or "unix:/path". */
  String address() {
    return address;
  }

  /** What the daemon wrote on stderr so far. */
  String log() {
    try {
      return Files.readString(log);
    } catch (IOException e) {
      throw new UncheckedIOException(e);
    }
  }

  /** Stops the daemon (SIGTERM, then SIGKILL after 15 s) and removes its directory. */
  @Override
  public void close() throws InterruptedException {
    process.destroy();
    if (!process.waitFor(15, TimeUnit.SECONDS)) {
      process.destroyForcibly();
      process.waitFor(5, TimeUnit.SECONDS);
    }
    deleteTree(dir);
  }

  static void deleteTree(Path d) {
    if (!Files.exists(d)) {
      return;
    }
    try (Stream<Path> s = Files.walk(d)) {
      s.sorted(Comparator.reverseOrder())
          .forEach(
              p -> {
                try {
                  Files.deleteIfExists(p);
                } catch (IOException e) {
                  // best effort
                }
              });
    } catch (IOException e) {
      // best effort
    }
  }
}
