package dev.mixd.client;

import com.google.protobuf.ByteString;
import com.google.protobuf.UnsafeByteOperations;
import java.util.Objects;

/**
 * Which values of a batch of rows are observed, as the caller gave them (a {@code boolean[][]} of
 * the rows' shape or a flat row-major {@code boolean[]}), encoded chunk by chunk into the {@code
 * observed_mask} bytes of a request: one byte per value, 1 for observed and 0 for unobserved.
 */
abstract class Observed {
  private Observed() {}

  /** Writes the flags of rows [lo, hi) of {@code cols} columns into out, from offset 0. */
  abstract void put(int lo, int hi, int cols, byte[] out);

  /**
   * Checks that there is one flag per value of {@code rows}.
   *
   * @throws InvalidArgumentException naming the field and the shapes
   */
  abstract void check(Rows rows);

  /** The mask bytes of rows [lo, hi); empty for {@code m == null} (every value observed). */
  static ByteString bytes(Observed m, Rows rows, int lo, int hi) {
    if (m == null) {
      return ByteString.EMPTY;
    }
    int cols = rows.cols();
    byte[] out = new byte[Math.multiplyExact(hi - lo, cols)];
    m.put(lo, hi, cols, out);
    return UnsafeByteOperations.unsafeWrap(out);
  }

  /** Request bytes per row that a mask adds. */
  static int width(Observed m, Rows rows) {
    return m == null ? 0 : rows.cols();
  }

  /** Wraps flags of the rows' shape (not copied). */
  static Observed of(boolean[][] flags, String field) {
    Objects.requireNonNull(flags, field);
    return new Observed() {
      @Override
      void check(Rows rows) {
        if (flags.length != rows.rows()) {
          throw new InvalidArgumentException(
              "",
              field + " has " + flags.length + " rows, the batch has " + rows.rows()
                  + "; want one flag per value",
              null);
        }
        for (int i = 0; i < flags.length; i++) {
          if (flags[i] == null) {
            throw new InvalidArgumentException("", field + "[" + i + "] is null", null);
          }
          if (flags[i].length != rows.cols()) {
            throw new InvalidArgumentException(
                "",
                field + "[" + i + "] has " + flags[i].length + " flags, the rows have "
                    + rows.cols() + " columns",
                null);
          }
        }
      }

      @Override
      void put(int lo, int hi, int cols, byte[] out) {
        int p = 0;
        for (int i = lo; i < hi; i++) {
          for (boolean b : flags[i]) {
            out[p++] = b ? (byte) 1 : (byte) 0;
          }
        }
      }
    };
  }

  /** Wraps flat row-major flags, one per value of the rows (not copied). */
  static Observed of(boolean[] flags, String field) {
    Objects.requireNonNull(flags, field);
    return new Observed() {
      @Override
      void check(Rows rows) {
        long want = (long) rows.rows() * rows.cols();
        if (flags.length != want) {
          throw new InvalidArgumentException(
              "",
              field + " has " + flags.length + " flags; want one per value, " + rows.rows() + "×"
                  + rows.cols() + " = " + want,
              null);
        }
      }

      @Override
      void put(int lo, int hi, int cols, byte[] out) {
        int base = lo * cols;
        for (int p = 0; p < out.length; p++) {
          out[p] = flags[base + p] ? (byte) 1 : (byte) 0;
        }
      }
    };
  }
}
