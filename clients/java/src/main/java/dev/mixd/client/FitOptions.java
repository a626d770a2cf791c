package dev.mixd.client;

import java.util.LinkedHashMap;
import java.util.List;
import java.util.Map;
import java.util.Objects;
import java.util.OptionalDouble;
import dev.mixd.api.v1.Types;

/**
 * What to fit: the estimation method and its settings. Zero values leave the choice to the daemon
 * or to the fitter (each fitter documents its defaults and options; see {@link
 * MixdClient#listFitters()}).
 *
 * <p>Instances are immutable; each {@code with} method returns a changed copy. The per-row arrays
 * ({@link #withRowWeights row weights}, {@link #withStartLabels start labels}) are kept by
 * reference, not copied.
 *
 * <pre>{@code
 * FitOptions opts = FitOptions.components(3).withSeed(7).withRestarts(4);
 * }</pre>
 */
public final class FitOptions {
  private String fitter = "";
  private int components;
  private int minComponents;
  private int maxComponents;
  private Types.Criterion criterion = Types.Criterion.CRITERION_UNSPECIFIED;
  private Types.Family family = Types.Family.FAMILY_UNSPECIFIED;
  private Types.CovarianceStructure structure =
      Types.CovarianceStructure.COVARIANCE_STRUCTURE_UNSPECIFIED;
  private long seed;
  private int maxIterations;
  private double tolerance;
  private int restarts;
  private Double ridge;
  private List<String> featureNames = List.of();
  private Map<String, String> options = Map.of();
  private Types.Parameters start;
  private double[] rowWeights;
  private int[] startLabels;

  private FitOptions() {}

  private FitOptions copy() {
    FitOptions c = new FitOptions();
    c.fitter = fitter;
    c.components = components;
    c.minComponents = minComponents;
    c.maxComponents = maxComponents;
    c.criterion = criterion;
    c.family = family;
    c.structure = structure;
    c.seed = seed;
    c.maxIterations = maxIterations;
    c.tolerance = tolerance;
    c.restarts = restarts;
    c.ridge = ridge;
    c.featureNames = featureNames;
    c.options = options;
    c.start = start;
    c.rowWeights = rowWeights;
    c.startLabels = startLabels;
    return c;
  }

  /**
   * Returns options that fit {@code k} components with the default fitter ("em") and its default
   * settings.
   *
   * @param k the number of components, at least 1
   * @return the options
   */
  public static FitOptions components(int k) {
    FitOptions o = new FitOptions();
    o.components = k;
    return o;
  }

  /**
   * Returns options that fit every component count in [{@code min}, {@code max}] and keep the best
   * by the {@link #withCriterion criterion} (BIC unless set).
   *
   * @param min the smallest component count, at least 1
   * @param max the largest component count, at least {@code min}
   * @return the options
   */
  public static FitOptions componentRange(int min, int max) {
    FitOptions o = new FitOptions();
    o.minComponents = min;
    o.maxComponents = max;
    return o;
  }

  /**
   * Chooses the estimation method by name, e.g. {@code "em"}.
   *
   * @param name the fitter's name; empty means "em"
   * @return a copy with the fitter set
   */
  public FitOptions withFitter(String name) {
    FitOptions c = copy();
    c.fitter = Objects.requireNonNull(name, "name");
    return c;
  }

  /**
   * Sets the criterion that picks the component count in a range fit.
   *
   * @param criterion the criterion
   * @return a copy with the criterion set
   */
  public FitOptions withCriterion(Types.Criterion criterion) {
    FitOptions c = copy();
    c.criterion = Objects.requireNonNull(criterion, "criterion");
    return c;
  }

  /**
   * Sets the component family (Gaussian when unset).
   *
   * @param family the family
   * @return a copy with the family set
   */
  public FitOptions withFamily(Types.Family family) {
    FitOptions c = copy();
    c.family = Objects.requireNonNull(family, "family");
    return c;
  }

  /**
   * Sets the covariance structure (full when unset).
   *
   * @param structure the structure
   * @return a copy with the structure set
   */
  public FitOptions withCovarianceStructure(Types.CovarianceStructure structure) {
    FitOptions c = copy();
    c.structure = Objects.requireNonNull(structure, "structure");
    return c;
  }

  /**
   * Sets the seed of every random choice of the fit: the same data, settings and seed give the
   * same model.
   *
   * @param seed the seed, read as an unsigned 64-bit integer
   * @return a copy with the seed set
   */
  public FitOptions withSeed(long seed) {
    FitOptions c = copy();
    c.seed = seed;
    return c;
  }

  /**
   * Caps the iterations of one run.
   *
   * @param n the cap; 0 means the fitter's default, -1 evaluates the start without iterating
   * @return a copy with the cap set
   */
  public FitOptions withMaxIterations(int n) {
    FitOptions c = copy();
    c.maxIterations = n;
    return c;
  }

  /**
   * Sets the convergence tolerance.
   *
   * @param tolerance a finite non-negative number; 0 means the fitter's default
   * @return a copy with the tolerance set
   */
  public FitOptions withTolerance(double tolerance) {
    FitOptions c = copy();
    c.tolerance = tolerance;
    return c;
  }

  /**
   * Sets the number of independent starts; the best run is kept.
   *
   * @param n the number of starts; 0 means the fitter's default
   * @return a copy with the count set
   */
  public FitOptions withRestarts(int n) {
    FitOptions c = copy();
    c.restarts = n;
    return c;
  }

  /**
   * Sets the ridge added to covariance diagonals (the fitter's default when never called).
   *
   * @param ridge the ridge, 0 for none
   * @return a copy with the ridge set
   */
  public FitOptions withRidge(double ridge) {
    FitOptions c = copy();
    c.ridge = ridge;
    return c;
  }

  /**
   * Names the columns; the names are stored with the model.
   *
   * @param names one unique non-empty name per column, or none
   * @return a copy with the names set
   */
  public FitOptions withFeatureNames(String... names) {
    FitOptions c = copy();
    c.featureNames = List.of(names);
    return c;
  }

  /**
   * Adds a method-specific option, as documented by the fitter.
   *
   * @param name the option's name
   * @param value its value
   * @return a copy with the option added (replacing an earlier value of the same name)
   */
  public FitOptions withOption(String name, String value) {
    FitOptions c = copy();
    Map<String, String> m = new LinkedHashMap<>(options);
    m.put(Objects.requireNonNull(name, "name"), Objects.requireNonNull(value, "value"));
    c.options = Map.copyOf(m);
    return c;
  }

  /**
   * Starts the fit from these parameters instead of the fitter's own initialisation.
   *
   * @param start the starting parameters (e.g. those of an earlier model)
   * @return a copy with the start set
   */
  public FitOptions withStartParameters(Types.Parameters start) {
    FitOptions c = copy();
    c.start = Objects.requireNonNull(start, "start");
    return c;
  }

  /**
   * Gives every training row a weight.
   *
   * @param weights one finite non-negative weight per row (kept by reference)
   * @return a copy with the weights set
   */
  public FitOptions withRowWeights(double[] weights) {
    FitOptions c = copy();
    c.rowWeights = Objects.requireNonNull(weights, "weights");
    return c;
  }

  /**
   * Gives every training row a starting component.
   *
   * @param labels one component index (from 0) per row (kept by reference)
   * @return a copy with the labels set
   */
  public FitOptions withStartLabels(int[] labels) {
    FitOptions c = copy();
    c.startLabels = Objects.requireNonNull(labels, "labels");
    return c;
  }

  /**
   * Returns the fitter's name ("" for the default).
   *
   * @return the name
   */
  public String fitter() {
    return fitter;
  }

  /**
   * Returns the number of components (0 in a range fit).
   *
   * @return the component count
   */
  public int components() {
    return components;
  }

  /**
   * Returns the lower end of the component range (0 unless a range fit).
   *
   * @return the lower end
   */
  public int minComponents() {
    return minComponents;
  }

  /**
   * Returns the upper end of the component range (0 unless a range fit).
   *
   * @return the upper end
   */
  public int maxComponents() {
    return maxComponents;
  }

  /**
   * Returns the seed.
   *
   * @return the seed, an unsigned 64-bit integer
   */
  public long seed() {
    return seed;
  }

  /**
   * Returns the ridge, when set.
   *
   * @return the ridge, or empty for the fitter's default
   */
  public OptionalDouble ridge() {
    return ridge == null ? OptionalDouble.empty() : OptionalDouble.of(ridge);
  }

  /**
   * Returns the row weights, when set (the array itself).
   *
   * @return the weights, or null
   */
  double[] rowWeights() {
    return rowWeights;
  }

  /**
   * Returns the start labels, when set (the array itself).
   *
   * @return the labels, or null
   */
  int[] startLabels() {
    return startLabels;
  }

  /** Builds the spec message for {@code rows} rows. */
  Types.FitSpec spec(String model, long rows) {
    Types.FitSpec.Builder b =
        Types.FitSpec.newBuilder()
            .setModel(model)
            .setFitter(fitter)
            .setComponents(components)
            .setComponentsMin(minComponents)
            .setComponentsMax(maxComponents)
            .setCriterion(criterion)
            .setFamily(family)
            .setCovarianceStructure(structure)
            .setSeed(seed)
            .setMaxIterations(maxIterations)
            .setTolerance(tolerance)
            .setRestarts(restarts)
            .addAllFeatureNames(featureNames)
            .putAllOptions(options)
            .setExpectedRows(rows);
    if (ridge != null) {
      b.setRidge(ridge);
    }
    if (start != null) {
      b.setStartParameters(start);
    }
    return b.build();
  }

  /**
   * Describes the options, for logs.
   *
   * @return a short description
   */
  @Override
  public String toString() {
    return "FitOptions{fitter="
        + (fitter.isEmpty() ? "default" : fitter)
        + ", components="
        + (maxComponents > 0 ? minComponents + ".." + maxComponents : components)
        + ", seed="
        + Long.toUnsignedString(seed)
        + ", options="
        + options
        + ", rowWeights="
        + (rowWeights == null ? "none" : rowWeights.length)
        + ", startLabels="
        + (startLabels == null ? "none" : startLabels.length)
        + "}";
  }
}
