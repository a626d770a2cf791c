package dev.mixd.client;

import static org.junit.jupiter.api.Assertions.assertArrayEquals;
import static org.junit.jupiter.api.Assertions.assertEquals;
import static org.junit.jupiter.api.Assertions.assertThrows;
import static org.junit.jupiter.api.Assertions.assertTrue;

import com.google.protobuf.ByteString;
import io.grpc.Status;
import dev.mixd.api.v1.Types;
import org.junit.jupiter.api.Test;

/** The byte layout of matrices and labels, and the checks on shapes. */
class WireTest {
  // IEEE 754 binary64 bit patterns (common practice): 1.0 = 0x3FF0000000000000,
  // -2.5 = 0xC004000000000000; little-endian puts the low byte first.
  static final byte[] ONE_MINUS_TWO_POINT_FIVE = {
    0, 0, 0, 0, 0, 0, (byte) 0xF0, 0x3F, 0, 0, 0, 0, 0, 0, 0x04, (byte) 0xC0
  };

  @Test
  void rowsEncodeAsLittleEndianFloat64() {
    Types.Matrix m = Rows.of(new double[][] {{1.0}, {-2.5}}, "rows").encode(0, 2);
    assertEquals(2, m.getRows());
    assertEquals(1, m.getCols());
    assertEquals(0, m.getValuesCount());
    assertArrayEquals(ONE_MINUS_TWO_POINT_FIVE, m.getLittleEndian().toByteArray());
    Types.Matrix flat = Rows.of(new double[] {9, 9, 1.0, -2.5, 9, 9}, 2, "values").encode(1, 2);
    assertEquals(1, flat.getRows());
    assertEquals(2, flat.getCols());
    assertArrayEquals(ONE_MINUS_TWO_POINT_FIVE, flat.getLittleEndian().toByteArray());
    assertTrue(Rows.of(new double[0][], "rows").encode(0, 0).getLittleEndian().isEmpty());
  }

  @Test
  void chunksCoverTheRowsInOrder() {
    double[][] rows = new double[10][];
    for (int i = 0; i < 10; i++) {
      rows[i] = new double[] {i, -i};
    }
    Rows r = Rows.of(rows, "rows");
    for (int lo = 0; lo < 10; lo += 3) {
      int hi = Math.min(10, lo + 3);
      double[] chunk = new double[(hi - lo) * 2];
      Wire.block(
          r.encode(lo, hi),
          "rows",
          hi - lo,
          new Wire.Sink() {
            @Override
            public double[] target(int c) {
              return chunk;
            }

            @Override
            public int offset(int c) {
              return 0;
            }
          });
      for (int i = lo; i < hi; i++) {
        assertEquals(i, chunk[(i - lo) * 2]);
        assertEquals(-i, chunk[(i - lo) * 2 + 1]);
      }
    }
  }

  @Test
  void responsesDecodeFromEitherEncoding() {
    double[] dst = new double[3];
    Types.Matrix le =
        Types.Matrix.newBuilder()
            .setRows(2)
            .setCols(1)
            .setLittleEndian(ByteString.copyFrom(ONE_MINUS_TWO_POINT_FIVE))
            .build();
    Wire.column(le, "x", 2, dst, 1);
    assertArrayEquals(new double[] {0, 1.0, -2.5}, dst);
    Types.Matrix packed =
        Types.Matrix.newBuilder().setRows(2).setCols(1).addValues(4).addValues(5).build();
    Wire.column(packed, "x", 2, dst, 0);
    assertArrayEquals(new double[] {4, 5, -2.5}, dst);
    int[] labels = new int[2];
    // int32 little-endian (common practice): 7 = 07 00 00 00, -1 = FF FF FF FF.
    Wire.labels(
        Types.Labels.newBuilder()
            .setLittleEndian(ByteString.copyFrom(new byte[] {7, 0, 0, 0, -1, -1, -1, -1}))
            .build(),
        "l",
        2,
        labels,
        0);
    assertArrayEquals(new int[] {7, -1}, labels);
  }

  @Test
  void malformedResponsesAreRejected() {
    double[] dst = new double[4];
    Types.Matrix shortBytes =
        Types.Matrix.newBuilder()
            .setRows(2)
            .setCols(1)
            .setLittleEndian(ByteString.copyFrom(new byte[15]))
            .build();
    Wire.ResponseException e =
        assertThrows(Wire.ResponseException.class, () -> Wire.column(shortBytes, "ld", 2, dst, 0));
    assertTrue(e.getMessage().contains("15 bytes"), e.getMessage());
    Types.Matrix wrongRows = Types.Matrix.newBuilder().setRows(3).setCols(1).addValues(1).build();
    assertThrows(Wire.ResponseException.class, () -> Wire.column(wrongRows, "ld", 2, dst, 0));
    Types.Matrix both =
        Types.Matrix.newBuilder()
            .setRows(1)
            .setCols(1)
            .addValues(1)
            .setLittleEndian(ByteString.copyFrom(new byte[8]))
            .build();
    assertThrows(Wire.ResponseException.class, () -> Wire.column(both, "ld", 1, dst, 0));
    assertThrows(
        Wire.ResponseException.class,
        () -> Wire.labels(Types.Labels.newBuilder().addValues(1).build(), "l", 2, new int[2], 0));
  }

  @Test
  void raggedAndMisshapenInputIsInvalidArgument() {
    InvalidArgumentException e =
        assertThrows(
            InvalidArgumentException.class,
            () -> Rows.of(new double[][] {{1, 2}, {3, 4}, {5}}, "rows"));
    assertEquals(Status.Code.INVALID_ARGUMENT, e.code());
    assertEquals("rows[2] has 1 values, rows[0] has 2", e.statusMessage());
    assertThrows(
        InvalidArgumentException.class, () -> Rows.of(new double[][] {{1}, null}, "rows"));
    assertThrows(InvalidArgumentException.class, () -> Rows.of(new double[5], 2, "values"));
    assertThrows(InvalidArgumentException.class, () -> Rows.of(new double[5], 0, "values"));
  }

  @Test
  void matrixAccessors() {
    Matrix m = Matrix.fromRows(new double[][] {{1, 2, 3}, {4, 5, 6}});
    assertEquals(2, m.rows());
    assertEquals(3, m.cols());
    assertEquals(6, m.get(1, 2));
    assertArrayEquals(new double[] {4, 5, 6}, m.row(1));
    assertArrayEquals(new double[] {1, 2, 3}, m.toArray()[0]);
    assertThrows(IndexOutOfBoundsException.class, () -> m.get(2, 0));
    assertThrows(IllegalArgumentException.class, () -> new Matrix(2, 2, new double[3]));
    assertEquals(0, Matrix.empty().rows());
  }

  @Test
  void exceptionsMapCodesToClasses() {
    assertEquals(
        NotFoundException.class,
        MixdException.from("op", Status.NOT_FOUND.withDescription("x").asRuntimeException())
            .getClass());
    MixdException e =
        MixdException.from("op", Status.DATA_LOSS.withDescription("gone").asRuntimeException());
    assertEquals(MixdException.class, e.getClass());
    assertEquals("op: DATA_LOSS: gone", e.getMessage());
    assertEquals("gone", e.statusMessage());
    assertEquals(
        UnavailableException.class, MixdException.of(Status.Code.UNAVAILABLE, "", "", null).getClass());
    assertEquals(
        Status.Code.INTERNAL, MixdException.from("op", new IllegalStateException("bug")).code());
  }
}
