package dev.mixd.client;

/** One pair of matched components of two models, from {@link CompareResult#matches()}. */
public final class ComponentMatch {
  private final int component;
  private final int otherComponent;
  private final double distance;
  private final double weight;
  private final double otherWeight;

  ComponentMatch(
      int component, int otherComponent, double distance, double weight, double otherWeight) {
    this.component = component;
    this.otherComponent = otherComponent;
    this.distance = distance;
    this.weight = weight;
    this.otherWeight = otherWeight;
  }

  /**
   * Returns the component's index in the first model, from 0.
   *
   * @return the index
   */
  public int component() {
    return component;
  }

  /**
   * Returns the partner's index in the other model, from 0.
   *
   * @return the index
   */
  public int otherComponent() {
    return otherComponent;
  }

  /**
   * Returns the distance between the two components (see {@link
   * CompareResult#componentDistance()}).
   *
   * @return the distance
   */
  public double distance() {
    return distance;
  }

  /**
   * Returns the component's weight in the first model.
   *
   * @return the weight
   */
  public double weight() {
    return weight;
  }

  /**
   * Returns the partner's weight in the other model.
   *
   * @return the weight
   */
  public double otherWeight() {
    return otherWeight;
  }

  /**
   * Returns a short description, e.g. {@code 0↔2 (distance 0.013)}.
   *
   * @return the description
   */
  @Override
  public String toString() {
    return component + "↔" + otherComponent + " (distance " + distance + ")";
  }
}
