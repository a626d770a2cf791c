package dev.mixd.client;

import com.google.protobuf.ByteString;
import com.google.protobuf.UnsafeByteOperations;
import java.nio.ByteBuffer;
import java.nio.ByteOrder;
import java.nio.DoubleBuffer;
import java.util.Objects;
import dev.mixd.api.v1.Types;

/**
 * Input rows of a call, held as the caller gave them (a {@code double[][]} or a flat array with a
 * column count) and encoded chunk by chunk into the little-endian byte field of {@link
 * Types.Matrix}, so that no full-size intermediate copy is made.
 */
abstract class Rows {
  private final int rows;
  private final int cols;

  private Rows(int rows, int cols) {
    this.rows = rows;
    this.cols = cols;
  }

  /** Number of rows. */
  final int rows() {
    return rows;
  }

  /** Number of columns. */
  final int cols() {
    return cols;
  }

  /** Writes rows [lo, hi) into {@code out}, row-major. */
  abstract void put(int lo, int hi, DoubleBuffer out);

  /** Encodes rows [lo, hi) as a matrix message using the little-endian byte field. */
  final Types.Matrix encode(int lo, int hi) {
    return Types.Matrix.newBuilder()
        .setRows(hi - lo)
        .setCols(cols)
        .setLittleEndian(encodeBytes(lo, hi))
        .build();
  }

  /** Encodes rows [lo, hi) as little-endian float64 bytes, wrapped without a further copy. */
  final ByteString encodeBytes(int lo, int hi) {
    int n = Math.multiplyExact(Math.multiplyExact(hi - lo, cols), Double.BYTES);
    if (n == 0) {
      return ByteString.EMPTY;
    }
    ByteBuffer buf = ByteBuffer.allocate(n).order(ByteOrder.LITTLE_ENDIAN);
    put(lo, hi, buf.asDoubleBuffer());
    return UnsafeByteOperations.unsafeWrap(buf);
  }

  /**
   * Checks and wraps an array of rows.
   *
   * @throws InvalidArgumentException naming the first null row or row whose length differs
   */
  static Rows of(double[][] data, String field) {
    Objects.requireNonNull(data, field);
    int cols = 0;
    for (int i = 0; i < data.length; i++) {
      if (data[i] == null) {
        throw new InvalidArgumentException("", field + "[" + i + "] is null", null);
      }
      if (i == 0) {
        cols = data[0].length;
      } else if (data[i].length != cols) {
        throw new InvalidArgumentException(
            "",
            field + "[" + i + "] has " + data[i].length + " values, " + field + "[0] has " + cols,
            null);
      }
    }
    return new Rows(data.length, cols) {
      @Override
      void put(int lo, int hi, DoubleBuffer out) {
        for (int i = lo; i < hi; i++) {
          out.put(data[i]);
        }
      }
    };
  }

  /**
   * Checks and wraps a flat row-major array.
   *
   * @throws InvalidArgumentException if the length is not a whole number of rows
   */
  static Rows of(double[] values, int cols, String field) {
    Objects.requireNonNull(values, field);
    if (cols < 0 || (cols == 0 && values.length > 0)) {
      throw new InvalidArgumentException(
          "", field + ": column count " + cols + " for " + values.length + " values", null);
    }
    if (cols > 0 && values.length % cols != 0) {
      throw new InvalidArgumentException(
          "",
          field
              + ": "
              + values.length
              + " values are not a whole number of rows of "
              + cols
              + " columns",
          null);
    }
    int rows = cols == 0 ? 0 : values.length / cols;
    return new Rows(rows, cols) {
      @Override
      void put(int lo, int hi, DoubleBuffer out) {
        out.put(values, lo * cols, (hi - lo) * cols);
      }
    };
  }

  /** Wraps a matrix. */
  static Rows of(Matrix m) {
    Objects.requireNonNull(m, "matrix");
    double[] values = m.values();
    int cols = m.cols();
    return new Rows(m.rows(), cols) {
      @Override
      void put(int lo, int hi, DoubleBuffer out) {
        out.put(values, lo * cols, (hi - lo) * cols);
      }
    };
  }
}
