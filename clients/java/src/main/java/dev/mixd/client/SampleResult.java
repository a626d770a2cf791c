package dev.mixd.client;

/** Rows drawn from a model, with the component each was drawn from. */
public final class SampleResult {
  private final String model;
  private final long version;
  private final Matrix rows;
  private final int[] components;

  SampleResult(String model, long version, Matrix rows, int[] components) {
    this.model = model;
    this.version = version;
    this.rows = rows;
    this.components = components;
  }

  /**
   * Returns the model sampled, {@code "models/{id}"}.
   *
   * @return the model's resource name
   */
  public String model() {
    return model;
  }

  /**
   * Returns the version sampled.
   *
   * @return the version
   */
  public long version() {
    return version;
  }

  /**
   * Returns the drawn rows, count × dimension.
   *
   * @return the rows
   */
  public Matrix rows() {
    return rows;
  }

  /**
   * Returns the component each row was drawn from, from 0.
   *
   * @return one index per row
   */
  public int[] components() {
    return components;
  }
}
