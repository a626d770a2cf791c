package dev.mixd.client;

import java.util.Arrays;
import java.util.Objects;

/**
 * A dense row-major matrix of doubles: {@code rows × cols} values, row after row, in one flat
 * array. Results of the client hold their per-row outputs this way; {@link #toArray()} gives the
 * familiar {@code double[][]}.
 *
 * <p>A {@code Matrix} does not copy the array it is built on, and {@link #values()} returns that
 * array itself: this keeps large batches free of extra copies. Treat it as read-only unless you
 * own it.
 */
public final class Matrix {
  private static final double[] NONE = new double[0];

  private final int rows;
  private final int cols;
  private final double[] values;

  /**
   * Wraps a flat row-major array.
   *
   * @param rows number of rows, at least 0
   * @param cols number of columns, at least 0
   * @param values {@code rows * cols} values, row after row (not copied)
   * @throws IllegalArgumentException if the shape is negative or does not match the array length
   */
  public Matrix(int rows, int cols, double[] values) {
    Objects.requireNonNull(values, "values");
    if (rows < 0 || cols < 0) {
      throw new IllegalArgumentException("negative matrix shape " + rows + "×" + cols);
    }
    if ((long) rows * cols != values.length) {
      throw new IllegalArgumentException(
          "matrix shape "
              + rows
              + "×"
              + cols
              + " needs "
              + (long) rows * cols
              + " values, the array has "
              + values.length);
    }
    this.rows = rows;
    this.cols = cols;
    this.values = values;
  }

  /**
   * Returns the empty matrix (0 rows, 0 columns).
   *
   * @return the empty matrix
   */
  public static Matrix empty() {
    return new Matrix(0, 0, NONE);
  }

  /**
   * Copies equally long rows into a new matrix.
   *
   * @param rows the rows; every row must have as many values as row 0
   * @return the matrix
   * @throws InvalidArgumentException naming the first row whose length differs from row 0's
   */
  public static Matrix fromRows(double[][] rows) {
    Rows r = Rows.of(rows, "rows");
    double[] flat = new double[Math.multiplyExact(r.rows(), r.cols())];
    for (int i = 0; i < rows.length; i++) {
      System.arraycopy(rows[i], 0, flat, i * r.cols(), r.cols());
    }
    return new Matrix(r.rows(), r.cols(), flat);
  }

  /**
   * Returns the number of rows.
   *
   * @return the row count
   */
  public int rows() {
    return rows;
  }

  /**
   * Returns the number of columns.
   *
   * @return the column count
   */
  public int cols() {
    return cols;
  }

  /**
   * Returns the backing array (not a copy): {@code rows * cols} values, row after row.
   *
   * @return the values
   */
  public double[] values() {
    return values;
  }

  /**
   * Returns one value.
   *
   * @param row row index, from 0
   * @param col column index, from 0
   * @return the value at ({@code row}, {@code col})
   * @throws IndexOutOfBoundsException if either index is out of range
   */
  public double get(int row, int col) {
    Objects.checkIndex(row, rows);
    Objects.checkIndex(col, cols);
    return values[row * cols + col];
  }

  /**
   * Returns a copy of one row.
   *
   * @param row row index, from 0
   * @return the row's {@code cols} values
   * @throws IndexOutOfBoundsException if the index is out of range
   */
  public double[] row(int row) {
    Objects.checkIndex(row, rows);
    return Arrays.copyOfRange(values, row * cols, (row + 1) * cols);
  }

  /**
   * Copies the matrix into an array of rows.
   *
   * @return a new {@code double[rows][cols]}
   */
  public double[][] toArray() {
    double[][] out = new double[rows][];
    for (int i = 0; i < rows; i++) {
      out[i] = Arrays.copyOfRange(values, i * cols, (i + 1) * cols);
    }
    return out;
  }

  /**
   * Returns the shape, e.g. {@code Matrix[1000×3]}.
   *
   * @return a short description
   */
  @Override
  public String toString() {
    return "Matrix[" + rows + "×" + cols + "]";
  }
}
