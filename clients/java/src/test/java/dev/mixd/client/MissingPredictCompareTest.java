package dev.mixd.client;

import static org.junit.jupiter.api.Assertions.assertArrayEquals;
import static org.junit.jupiter.api.Assertions.assertEquals;
import static org.junit.jupiter.api.Assertions.assertFalse;
import static org.junit.jupiter.api.Assertions.assertTrue;

import java.nio.charset.StandardCharsets;
import java.util.List;
import java.util.SplittableRandom;
import dev.mixd.api.v1.Types;
import org.junit.jupiter.api.AfterAll;
import org.junit.jupiter.api.BeforeAll;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.TestInstance;
import org.junit.jupiter.api.extension.ExtendWith;

/**
 * Rows with unobserved features (Score and Classify with a mask), conditional prediction and model
 * comparison against a real daemon, every value checked against the Go in-process evaluation of
 * the exported model documents (src/test/go/evalref: fitters/mixture's Marginal, Conditional and
 * Compare, the daemon's own code without gRPC in between) to 1e-12. The mathematics itself is
 * checked against scipy, numpy and closed forms by the Python client's suite and by
 * fitters/mixture's tests.
 */
@ExtendWith(SharedDaemon.class)
@TestInstance(TestInstance.Lifecycle.PER_CLASS)
class MissingPredictCompareTest {
  static final double TOL = 1e-12;
  static final String GAUSS = "mpc-pumps";
  static final String STUDENT = "mpc-student";
  static final int DRAWS = 7;
  static final long DRAWS_SEED = 11;
  static final int COMPARE_SAMPLES = 4000;
  static final long COMPARE_SEED = 3;

  /** A two-component Student-t model of the pump readings, as a model document. */
  static final String STUDENT_DOC =
      "{\"format\":\"mixd-model\",\"format_version\":1,\"name\":\"mpc-student\",\"dimension\":3,"
          + "\"family\":\"student_t\",\"covariance_structure\":\"full\",\"components\":["
          + "{\"weight\":0.4,\"mean\":[18,22,1.55],\"covariance\":[[6.25,2.8,0],[2.8,1.96,0],"
          + "[0,0,0.0324]],\"degrees_of_freedom\":5},"
          + "{\"weight\":0.6,\"mean\":[42,37.5,2.3],\"covariance\":[[16,6.4,0.1],[6.4,4,0.05],"
          + "[0.1,0.05,0.0625]],\"degrees_of_freedom\":12}]}";

  MixdClient client;
  Daemon daemon;
  Types.Model v1;
  Types.Model v2;
  Types.Model student;
  double[][] rows;
  boolean[][] mask;
  boolean[] flatMask;
  GoReference goGauss;
  GoReference goStudent;

  @BeforeAll
  void setUp(Daemon daemon) throws Exception {
    this.daemon = daemon;
    client = MixdClient.connect(daemon.address());
    v1 = client.fit(GAUSS, Pumps.rows(31, 1500), FitOptions.components(3).withSeed(5));
    v2 = client.fit(GAUSS, Pumps.rows(32, 1500), FitOptions.components(3).withSeed(5));
    student = client.importModel(STUDENT_DOC.getBytes(StandardCharsets.UTF_8), STUDENT);

    // Fresh readings with random masks; rows 0, 1 and 2 have every feature, none, and only the
    // flow observed. Unobserved values are 0, as the API asks.
    rows = Pumps.rows(33, 400);
    mask = new boolean[rows.length][3];
    SplittableRandom rng = new SplittableRandom(34);
    for (int i = 0; i < rows.length; i++) {
      for (int j = 0; j < 3; j++) {
        mask[i][j] = i == 0 || (i != 1 && (i == 2 ? j == 0 : rng.nextDouble() < 0.6));
        if (!mask[i][j]) {
          rows[i][j] = 0;
        }
      }
    }
    flatMask = new boolean[3 * rows.length];
    for (int i = 0; i < rows.length; i++) {
      System.arraycopy(mask[i], 0, flatMask, 3 * i, 3);
    }

    GoReference.Extra g = new GoReference.Extra();
    g.mask = flatMask;
    g.draws = DRAWS;
    g.drawsSeed = DRAWS_SEED;
    g.other = client.exportModel(GAUSS, v2.getVersion());
    g.compareSamples = COMPARE_SAMPLES;
    g.compareSeed = COMPARE_SEED;
    goGauss =
        GoReference.evaluate(
            client.exportModel(GAUSS, v1.getVersion()),
            Check.flat(rows),
            3,
            "marginal,predict",
            0,
            0,
            g);
    GoReference.Extra t = new GoReference.Extra();
    t.mask = flatMask;
    t.draws = DRAWS;
    t.drawsSeed = DRAWS_SEED;
    goStudent =
        GoReference.evaluate(
            client.exportModel(STUDENT, student.getVersion()),
            Check.flat(rows),
            3,
            "marginal,predict",
            0,
            0,
            t);
  }

  @AfterAll
  void close() {
    client.close();
  }

  private void checkScoreAndClassify(MixdClient c, String model, long version, GoReference go) {
    ScoreResult s =
        c.score(
            model,
            rows,
            ScoreOptions.defaults()
                .withVersion(version)
                .withObserved(mask)
                .withComponentLogDensities(true));
    assertEquals(version, s.version());
    Check.close(go.get("marginal_log_densities").values(), s.logDensities(), TOL, "log-density");
    Check.close(
        go.get("marginal_component_log_densities").values(),
        s.componentLogDensities().orElseThrow().values(),
        TOL,
        "component log-density");
    ClassifyResult k =
        c.classify(
            model,
            rows,
            ClassifyOptions.defaults().withVersion(version).withObserved(mask).withPosteriors(true));
    Check.same(go.ints("marginal_components"), k.components(), "component");
    Check.close(go.get("marginal_max_posteriors").values(), k.maxPosteriors(), TOL, "max posterior");
    Check.close(
        go.get("marginal_posteriors").values(),
        k.posteriors().orElseThrow().values(),
        TOL,
        "posterior");
  }

  @Test
  void maskedScoreAndClassifyEqualGo() {
    checkScoreAndClassify(client, GAUSS, v1.getVersion(), goGauss);
    checkScoreAndClassify(client, STUDENT, student.getVersion(), goStudent);
    // A row with nothing observed has log-density 0 (the API's convention).
    assertEquals(0.0, goGauss.get("marginal_log_densities").get(1, 0));

    // Percentiles: NaN where a feature is unobserved, the full rows' percentiles otherwise.
    ScoreResult s =
        client.score(
            GAUSS, rows, ScoreOptions.defaults().withVersion(v1.getVersion()).withObserved(mask));
    for (int i = 0; i < rows.length; i++) {
      boolean full = mask[i][0] && mask[i][1] && mask[i][2];
      assertEquals(full, !Double.isNaN(s.percentiles()[i]), "percentile of row " + i);
    }
    ScoreResult full =
        client.score(
            GAUSS, new double[][] {rows[0]}, ScoreOptions.defaults().withVersion(v1.getVersion()));
    assertEquals(full.percentiles()[0], s.percentiles()[0]);

    // An imported model without training quantiles has no percentiles: NaN for every row.
    ScoreResult none = client.score(STUDENT, rows, ScoreOptions.defaults().withObserved(mask));
    for (double v : none.percentiles()) {
      assertTrue(Double.isNaN(v), "percentile of the imported model " + v);
    }

    // The flat forms give the same answers.
    ScoreResult flat =
        client.score(
            GAUSS,
            Check.flat(rows),
            3,
            ScoreOptions.defaults().withVersion(v1.getVersion()).withObserved(flatMask));
    assertArrayEquals(s.logDensities(), flat.logDensities());
  }

  @Test
  void maskedStreamsCarryTheMaskWithEveryChunk() {
    Counting counter = new Counting();
    try (MixdClient small =
        MixdClient.builder(client.address()).chunkBytes(1024).intercept(counter).build()) {
      checkScoreAndClassify(small, GAUSS, v1.getVersion(), goGauss);
      ClassifyResult flat =
          small.classify(
              GAUSS,
              Check.flat(rows),
              3,
              ClassifyOptions.defaults()
                  .withVersion(v1.getVersion())
                  .withObserved(flatMask)
                  .withMinPosterior(0.9));
      Check.same(goGauss.ints("marginal_components"), flat.components(), "flat component");
    }
    // 1024-byte chunks of 3 doubles + 3 mask bytes (or of the wider response): many messages.
    assertTrue(counter.sent("mixd.v1.MixtureService/ScoreStream") > 10);
    assertTrue(counter.sent("mixd.v1.MixtureService/ClassifyStream") > 20);
    assertEquals(0, counter.sent("mixd.v1.MixtureService/Score"));
  }

  private void checkPredict(PredictResult p, GoReference go, boolean studentT) {
    Check.close(go.get("predict_means").values(), p.means().values(), TOL, "means");
    Check.close(go.get("predict_log_densities").values(), p.logDensities(), TOL, "log-density");
    Check.close(
        go.get("predict_standard_deviations").values(),
        p.standardDeviations().orElseThrow().values(),
        TOL,
        "standard deviations");
    Check.close(
        go.get("predict_covariances").values(),
        p.covariances().orElseThrow().values(),
        TOL,
        "covariances");
    Check.close(
        go.get("predict_posteriors").values(),
        p.posteriors().orElseThrow().values(),
        TOL,
        "posteriors");
    Check.close(
        go.get("predict_component_means").values(),
        p.componentMeans().orElseThrow().values(),
        TOL,
        "component means");
    Check.close(
        go.get("predict_component_scales").values(),
        p.componentScales().orElseThrow().values(),
        TOL,
        "component scales");
    assertEquals(studentT, p.componentDegreesOfFreedom().isPresent());
    if (studentT) {
      Check.close(
          go.get("predict_component_degrees_of_freedom").values(),
          p.componentDegreesOfFreedom().orElseThrow().values(),
          TOL,
          "component degrees of freedom");
    }
    Matrix draws = p.draws().orElseThrow();
    assertEquals(rows.length * DRAWS, draws.rows());
    Check.close(go.get("predict_draws").values(), draws.values(), TOL, "draws");
    // Observed values are copied into the means and every draw.
    for (int i = 0; i < rows.length; i++) {
      for (int j = 0; j < 3; j++) {
        if (mask[i][j]) {
          assertEquals(rows[i][j], p.means().get(i, j));
          for (int a = 0; a < DRAWS; a++) {
            assertEquals(rows[i][j], draws.get(i * DRAWS + a, j));
          }
        }
      }
    }
  }

  private static PredictOptions everything(long version) {
    return PredictOptions.defaults()
        .withVersion(version)
        .withStandardDeviations(true)
        .withCovariances(true)
        .withComponents(true)
        .withComponentScales(true)
        .withDraws(DRAWS, DRAWS_SEED);
  }

  @Test
  void predictEqualsGo() {
    PredictResult g = client.predict(GAUSS, rows, mask, everything(v1.getVersion()));
    assertEquals("models/" + GAUSS, g.model());
    assertEquals(v1.getVersion(), g.version());
    checkPredict(g, goGauss, false);
    checkPredict(client.predict(STUDENT, rows, mask, everything(0)), goStudent, true);
    PredictResult flat =
        client.predict(GAUSS, Check.flat(rows), 3, flatMask, everything(v1.getVersion()));
    assertArrayEquals(g.means().values(), flat.means().values());
    // Only the means by default; nothing observed-everywhere means nothing to predict.
    PredictResult plain = client.predict(GAUSS, rows, null, PredictOptions.defaults());
    assertArrayEquals(Check.flat(rows), plain.means().values());
    assertFalse(plain.draws().isPresent() || plain.posteriors().isPresent());
  }

  @Test
  void predictSplitsLargeBatchesWithTheSameDraws() throws Exception {
    PredictResult one = client.predict(GAUSS, rows, mask, everything(v1.getVersion()));
    Counting counter = new Counting();
    try (MixdClient small =
        MixdClient.builder(client.address()).chunkBytes(4096).intercept(counter).build()) {
      // Newest version resolved once by GetModel, then the batch in several requests.
      PredictResult split =
          small
              .predictAsync(GAUSS, rows, mask, everything(v1.getVersion()))
              .get(120, java.util.concurrent.TimeUnit.SECONDS);
      assertArrayEquals(one.draws().orElseThrow().values(), split.draws().orElseThrow().values());
      assertArrayEquals(one.covariances().orElseThrow().values(), split.covariances().orElseThrow().values());
      PredictResult newest = small.predict(GAUSS, rows, mask, PredictOptions.defaults().withDraws(3, 1));
      assertEquals(v2.getVersion(), newest.version());
    }
    // Sized by the response. First call, per row: 3 + 1 + 7·3 + 3 + 9 + 2·3 + 3·3 + 3·9 = 79
    // doubles, 632 bytes: 6 rows per 4096-byte request, 67 requests for 400 rows. Second call:
    // 3 + 1 + 3·3 = 13 doubles, 104 bytes: 39 rows per request, 11 requests.
    assertEquals(67 + 11, counter.sent("mixd.v1.MixtureService/Predict"));
    assertEquals(2, counter.sent("mixd.v1.MixtureService/GetModel"));
  }

  @Test
  void compareEqualsGo() {
    CompareResult r =
        client.compareModels(
            GAUSS,
            v1.getVersion(),
            null,
            v2.getVersion(),
            CompareOptions.defaults().withSamples(COMPARE_SAMPLES).withSeed(COMPARE_SEED));
    assertEquals("models/" + GAUSS, r.model());
    assertEquals("models/" + GAUSS, r.otherModel());
    assertEquals(v1.getVersion(), r.version());
    assertEquals(v2.getVersion(), r.otherVersion());
    assertEquals(COMPARE_SAMPLES, r.samples());
    assertEquals("bhattacharyya", r.componentDistance());
    double[] kl = goGauss.get("compare_kl").values();
    Check.close(
        kl,
        new double[] {
          r.klForward(), r.klForwardStandardError(), r.klBackward(), r.klBackwardStandardError()
        },
        TOL,
        "KL and standard errors");
    Matrix want = goGauss.get("compare_matches");
    List<ComponentMatch> matches = r.matches();
    assertEquals(want.rows(), matches.size());
    for (int i = 0; i < matches.size(); i++) {
      ComponentMatch m = matches.get(i);
      assertEquals((int) want.get(i, 0), m.component());
      assertEquals((int) want.get(i, 1), m.otherComponent());
      Check.close(
          want.row(i),
          new double[] {m.component(), m.otherComponent(), m.distance(), m.weight(), m.otherWeight()},
          TOL,
          "match " + i);
    }
    Check.same(goGauss.ints("compare_unmatched"), r.unmatchedComponents(), "unmatched");
    Check.same(goGauss.ints("compare_unmatched_other"), r.unmatchedOtherComponents(), "unmatched other");

    // A model version against itself: zero within its error.
    CompareResult self =
        client.compareModels(
            GAUSS, v1.getVersion(), GAUSS, v1.getVersion(), CompareOptions.defaults().withSeed(9));
    assertEquals(20000, self.samples());
    assertTrue(Math.abs(self.klForward()) <= 3 * self.klForwardStandardError(), "self KL");
    assertTrue(Math.abs(self.klBackward()) <= 3 * self.klBackwardStandardError(), "self KL back");
  }
}
