package dev.mixd.client;

import com.google.protobuf.ByteString;
import java.nio.ByteOrder;
import java.util.List;
import dev.mixd.api.v1.Types;

/**
 * Decoding of the matrices and labels the daemon returns, in either encoding, straight into the
 * caller's result arrays. A response that does not match what was asked for (wrong shape, wrong
 * payload length) is a {@link ResponseException}: a fault of the daemon or of the connection.
 */
final class Wire {
  private Wire() {}

  /** A response the client cannot use; reported to the caller as {@code INTERNAL}. */
  static final class ResponseException extends RuntimeException {
    private static final long serialVersionUID = 1L;

    ResponseException(String message) {
      super(message);
    }
  }

  /** Checks the shape and payload of {@code m} and returns its column count. */
  private static int check(Types.Matrix m, String field, int rows) {
    long r = m.getRows();
    long c = m.getCols();
    if (r != rows || c < 0 || c > Integer.MAX_VALUE) {
      throw new ResponseException(field + " has shape " + r + "×" + c + ", want " + rows + " rows");
    }
    long n = r * c;
    ByteString le = m.getLittleEndian();
    if (!le.isEmpty() && m.getValuesCount() > 0) {
      throw new ResponseException(field + " carries both values and little_endian");
    }
    if (!le.isEmpty()) {
      if (le.size() != n * Double.BYTES) {
        throw new ResponseException(
            field + " has " + le.size() + " bytes, shape " + r + "×" + c + " needs " + 8 * n);
      }
    } else if (m.getValuesCount() != n) {
      throw new ResponseException(
          field + " has " + m.getValuesCount() + " values, shape " + r + "×" + c + " needs " + n);
    }
    return (int) c;
  }

  /** Copies the values of a checked matrix into dst at offset off. */
  private static void copy(Types.Matrix m, double[] dst, int off, int n) {
    ByteString le = m.getLittleEndian();
    if (!le.isEmpty()) {
      le.asReadOnlyByteBuffer().order(ByteOrder.LITTLE_ENDIAN).asDoubleBuffer().get(dst, off, n);
      return;
    }
    List<Double> vals = m.getValuesList();
    for (int i = 0; i < n; i++) {
      dst[off + i] = vals.get(i);
    }
  }

  /** Decodes a rows×1 matrix into dst[off, off+rows). */
  static void column(Types.Matrix m, String field, int rows, double[] dst, int off) {
    if (rows == 0 && m.getRows() == 0) {
      return;
    }
    int c = check(m, field, rows);
    if (c != 1) {
      throw new ResponseException(field + " has " + c + " columns, want 1");
    }
    copy(m, dst, off, rows);
  }

  /**
   * Decodes a matrix of {@code rows} rows and returns its column count; {@code sink} provides the
   * destination array for that column count and the offset to write at.
   */
  static int block(Types.Matrix m, String field, int rows, Sink sink) {
    if (rows == 0 && m.getRows() == 0) {
      return (int) Math.max(0, Math.min(Integer.MAX_VALUE, m.getCols()));
    }
    int c = check(m, field, rows);
    double[] dst = sink.target(c);
    copy(m, dst, sink.offset(c), Math.multiplyExact(rows, c));
    return c;
  }

  /** Where {@link #block} writes. */
  interface Sink {
    /** The array for a block of c columns. */
    double[] target(int c);

    /** The offset in that array. */
    int offset(int c);
  }

  /** Decodes {@code rows} labels into dst[off, off+rows). */
  static void labels(Types.Labels l, String field, int rows, int[] dst, int off) {
    ByteString le = l.getLittleEndian();
    if (!le.isEmpty() && l.getValuesCount() > 0) {
      throw new ResponseException(field + " carries both values and little_endian");
    }
    if (!le.isEmpty()) {
      if (le.size() != (long) rows * Integer.BYTES) {
        throw new ResponseException(field + " has " + le.size() + " bytes for " + rows + " rows");
      }
      le.asReadOnlyByteBuffer().order(ByteOrder.LITTLE_ENDIAN).asIntBuffer().get(dst, off, rows);
      return;
    }
    if (l.getValuesCount() != rows) {
      throw new ResponseException(
          field + " has " + l.getValuesCount() + " labels for " + rows + " rows");
    }
    for (int i = 0; i < rows; i++) {
      dst[off + i] = l.getValues(i);
    }
  }

  /** Copies {@code rows} booleans into dst[off, off+rows). */
  static void flags(List<Boolean> src, String field, int rows, boolean[] dst, int off) {
    if (src.size() != rows) {
      throw new ResponseException(field + " has " + src.size() + " values for " + rows + " rows");
    }
    for (int i = 0; i < rows; i++) {
      dst[off + i] = src.get(i);
    }
  }
}
