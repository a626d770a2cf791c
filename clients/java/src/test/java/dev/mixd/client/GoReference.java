package dev.mixd.client;

import java.io.BufferedReader;
import java.io.IOException;
import java.io.StringReader;
import java.nio.ByteBuffer;
import java.nio.ByteOrder;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.ArrayList;
import java.util.HashMap;
import java.util.List;
import java.util.Map;

/**
 * The Go in-process evaluation of a model, by the helper program src/test/go/evalref (run with
 * {@code go run} from the repository root). It builds the model with the daemon's own packages
 * (modeldoc.Decode, pbconv.ParamsFromProto, mixture.New) from the exported model document, so the
 * client's answers can be compared with what Go computes without any gRPC in between.
 */
final class GoReference {
  private final Map<String, Matrix> sections;

  private GoReference(Map<String, Matrix> sections) {
    this.sections = sections;
  }

  /**
   * Evaluates rows (flat, row-major, cols per row) under the model document, and draws
   * sampleCount rows with sampleSeed when sampleCount > 0.
   */
  static GoReference evaluate(
      byte[] document, double[] rows, int cols, String outputs, int sampleCount, long sampleSeed)
      throws IOException, InterruptedException {
    return evaluate(document, rows, cols, outputs, sampleCount, sampleSeed, new Extra());
  }

  /** The inputs of the masked outputs ("marginal", "predict") and of the comparison. */
  static final class Extra {
    /** Observation mask of the rows, row-major; null means every value is observed. */
    boolean[] mask;
    /** Predict: draws per row and their seed. */
    int draws;

    long drawsSeed;
    /** A second model document to compare the first with (mixture.Compare); null for none. */
    byte[] other;

    int compareSamples;
    long compareSeed;
  }

  /** As {@link #evaluate(byte[], double[], int, String, int, long)}, with the extra inputs. */
  static GoReference evaluate(
      byte[] document,
      double[] rows,
      int cols,
      String outputs,
      int sampleCount,
      long sampleSeed,
      Extra extra)
      throws IOException, InterruptedException {
    Path dir = Files.createTempDirectory(Daemon.workDir(), "evalref");
    try {
      Path doc = dir.resolve("model.json");
      Files.write(doc, document);
      List<String> cmd = new ArrayList<>();
      cmd.add("go");
      cmd.add("run");
      cmd.add("./clients/java/src/test/go/evalref");
      cmd.add("-model");
      cmd.add(doc.toString());
      if (rows != null) {
        Path bin = dir.resolve("rows.bin");
        ByteBuffer b = ByteBuffer.allocate(rows.length * 8).order(ByteOrder.LITTLE_ENDIAN);
        b.asDoubleBuffer().put(rows);
        Files.write(bin, b.array());
        cmd.add("-rows");
        cmd.add(bin.toString());
        cmd.add("-cols");
        cmd.add(Integer.toString(cols));
        cmd.add("-outputs");
        cmd.add(outputs);
      }
      if (extra.mask != null) {
        Path mask = dir.resolve("mask.bin");
        byte[] b = new byte[extra.mask.length];
        for (int i = 0; i < b.length; i++) {
          b[i] = extra.mask[i] ? (byte) 1 : (byte) 0;
        }
        Files.write(mask, b);
        cmd.add("-mask");
        cmd.add(mask.toString());
      }
      if (extra.draws > 0) {
        cmd.add("-draws");
        cmd.add(Integer.toString(extra.draws));
        cmd.add("-draws-seed");
        cmd.add(Long.toUnsignedString(extra.drawsSeed));
      }
      if (extra.other != null) {
        Path other = dir.resolve("other.json");
        Files.write(other, extra.other);
        cmd.add("-other");
        cmd.add(other.toString());
        cmd.add("-compare-samples");
        cmd.add(Integer.toString(extra.compareSamples));
        cmd.add("-compare-seed");
        cmd.add(Long.toUnsignedString(extra.compareSeed));
      }
      if (sampleCount > 0) {
        cmd.add("-sample-count");
        cmd.add(Integer.toString(sampleCount));
        cmd.add("-sample-seed");
        cmd.add(Long.toUnsignedString(sampleSeed));
      }
      String out = Daemon.run(Daemon.repoRoot(), cmd, 600);
      return new GoReference(parse(out));
    } finally {
      Daemon.deleteTree(dir);
    }
  }

  private static Map<String, Matrix> parse(String out) throws IOException {
    Map<String, Matrix> m = new HashMap<>();
    BufferedReader r = new BufferedReader(new StringReader(out));
    String header;
    while ((header = r.readLine()) != null) {
      String[] h = header.split(" ");
      if (h.length != 3) {
        throw new IOException("bad section header: " + header);
      }
      int rows = Integer.parseInt(h[1]);
      int cols = Integer.parseInt(h[2]);
      double[] v = new double[rows * cols];
      for (int i = 0; i < rows; i++) {
        String line = r.readLine();
        if (line == null) {
          throw new IOException(h[0] + ": ended after " + i + " of " + rows + " rows");
        }
        int pos = 0;
        for (int j = 0; j < cols; j++) {
          int end = line.indexOf(' ', pos);
          if (end < 0) {
            end = line.length();
          }
          v[i * cols + j] = parseGoFloat(line.substring(pos, end));
          pos = end + 1;
        }
      }
      m.put(h[0], new Matrix(rows, cols, v));
    }
    return m;
  }

  /** Parses Go's strconv 'g' output, which spells infinities "+Inf" and "-Inf". */
  static double parseGoFloat(String s) {
    switch (s) {
      case "+Inf":
        return Double.POSITIVE_INFINITY;
      case "-Inf":
        return Double.NEGATIVE_INFINITY;
      case "NaN":
        return Double.NaN;
      default:
        return Double.parseDouble(s);
    }
  }

  /** Whether the helper printed a section. */
  boolean has(String name) {
    return sections.containsKey(name);
  }

  /** A section of the output; fails when the helper did not print it. */
  Matrix get(String name) {
    Matrix v = sections.get(name);
    if (v == null) {
      throw new IllegalStateException("evalref printed no section " + name);
    }
    return v;
  }

  /** A rows×1 section as an int array. */
  int[] ints(String name) {
    double[] v = get(name).values();
    int[] out = new int[v.length];
    for (int i = 0; i < v.length; i++) {
      out[i] = (int) v[i];
    }
    return out;
  }
}
