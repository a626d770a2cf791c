package dev.mixd.client;

import static org.junit.jupiter.api.Assertions.assertEquals;
import static org.junit.jupiter.api.Assertions.fail;

/** Element-wise comparisons with a message naming the first differing index. */
final class Check {
  private Check() {}

  /**
   * Asserts |actual − expected| ≤ tol · max(1, |expected|) element by element (an absolute
   * tolerance for values up to 1, relative above).
   */
  static void close(double[] expected, double[] actual, double tol, String what) {
    assertEquals(expected.length, actual.length, what + ": length");
    for (int i = 0; i < expected.length; i++) {
      double e = expected[i];
      double a = actual[i];
      if (Double.compare(e, a) == 0) {
        continue;
      }
      double bound = tol * Math.max(1, Math.abs(e));
      if (!(Math.abs(a - e) <= bound)) {
        fail(what + "[" + i + "]: expected " + e + ", got " + a + " (tolerance " + bound + ")");
      }
    }
  }

  /** Asserts equal int arrays, naming the first difference. */
  static void same(int[] expected, int[] actual, String what) {
    assertEquals(expected.length, actual.length, what + ": length");
    for (int i = 0; i < expected.length; i++) {
      if (expected[i] != actual[i]) {
        fail(what + "[" + i + "]: expected " + expected[i] + ", got " + actual[i]);
      }
    }
  }

  /** Flattens rows. */
  static double[] flat(double[][] rows) {
    int cols = rows.length == 0 ? 0 : rows[0].length;
    double[] out = new double[rows.length * cols];
    for (int i = 0; i < rows.length; i++) {
      System.arraycopy(rows[i], 0, out, i * cols, cols);
    }
    return out;
  }
}
