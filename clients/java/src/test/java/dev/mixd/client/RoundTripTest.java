package dev.mixd.client;

import static org.junit.jupiter.api.Assertions.assertArrayEquals;
import static org.junit.jupiter.api.Assertions.assertEquals;
import static org.junit.jupiter.api.Assertions.assertFalse;
import static org.junit.jupiter.api.Assertions.assertThrows;
import static org.junit.jupiter.api.Assertions.assertTrue;

import java.util.ArrayList;
import java.util.Collections;
import java.util.List;
import java.util.concurrent.TimeUnit;
import dev.mixd.api.v1.Types;
import org.junit.jupiter.api.AfterAll;
import org.junit.jupiter.api.BeforeAll;
import org.junit.jupiter.api.Test;
import org.junit.jupiter.api.TestInstance;
import org.junit.jupiter.api.extension.ExtendWith;

/**
 * Fit → score → classify → sample against a real daemon, with every value checked against the Go
 * in-process evaluation of the same model (src/test/go/evalref, which uses the daemon's own
 * fitters/mixture package on the exported model document) to 1e-12.
 */
@ExtendWith(SharedDaemon.class)
@TestInstance(TestInstance.Lifecycle.PER_CLASS)
class RoundTripTest {
  /** Tolerance of the comparison with Go, as the issue asks (same code, so usually exact). */
  static final double TOL = 1e-12;

  static final String MODEL = "roundtrip-pumps";

  MixdClient client;
  Types.Model fitted;
  List<Types.FitProgress> progress = Collections.synchronizedList(new ArrayList<>());
  List<Types.FitJob> jobs = Collections.synchronizedList(new ArrayList<>());
  double[][] test;
  GoReference go;

  @BeforeAll
  void fitAndEvaluateInGo(Daemon daemon) throws Exception {
    client = MixdClient.connect(daemon.address());
    double[][] train = Pumps.rows(11, 2000);
    fitted =
        client.fit(
            MODEL,
            train,
            FitOptions.components(3)
                .withSeed(7)
                .withRestarts(2)
                .withFeatureNames("flow_lps", "motor_current_a", "vibration_mm_s"),
            new FitListener() {
              @Override
              public void onProgress(Types.FitProgress p) {
                progress.add(p);
              }

              @Override
              public void onJob(Types.FitJob job) {
                jobs.add(job);
              }
            });
    // Test rows: fresh readings plus a few far from every regime (a fault-like reading, very
    // far rows whose posteriors are decided by the tails).
    List<double[]> rows = new ArrayList<>(List.of(Pumps.rows(99, 500)));
    rows.add(new double[] {12.0, 58.0, 6.5});
    rows.add(new double[] {30.0, 30.0, 2.0});
    rows.add(new double[] {-40.0, 120.0, 15.0});
    test = rows.toArray(new double[0][]);
    byte[] doc = client.exportModel(MODEL, fitted.getVersion());
    go = GoReference.evaluate(doc, Check.flat(test), 3, "score,classify", 10_000, 5);
  }

  @AfterAll
  void close() {
    client.close();
  }

  @Test
  void fitReportsJobProgressAndModel() {
    assertEquals("models/" + MODEL, fitted.getName());
    assertTrue(fitted.getVersion() >= 1);
    Types.Parameters p = fitted.getParameters();
    assertEquals(3, p.getDimension());
    assertEquals(3, p.getComponentsCount());
    assertEquals(List.of("flow_lps", "motor_current_a", "vibration_mm_s"), p.getFeatureNamesList());
    assertEquals(2000, fitted.getReport().getTrainingRows());
    assertEquals("em", fitted.getReport().getFitter());
    assertFalse(jobs.isEmpty(), "no job event");
    assertTrue(jobs.get(0).getName().startsWith("fitJobs/"), jobs.get(0).getName());
    assertFalse(progress.isEmpty(), "no progress event");
    // The daemon sends at most ten progress events a second, the latest each time, so events
    // may skip iterations; within one run the iteration grows and EM never decreases the
    // log-likelihood (common practice: the ascent property of EM).
    for (int i = 1; i < progress.size(); i++) {
      Types.FitProgress a = progress.get(i - 1);
      Types.FitProgress b = progress.get(i);
      if (a.getRestart() == b.getRestart() && a.getComponents() == b.getComponents()) {
        assertTrue(b.getIteration() > a.getIteration(), "iterations in order: " + a + b);
        assertTrue(
            b.getObjective() >= a.getObjective() - 1e-6 * Math.abs(a.getObjective()),
            "log-likelihood fell from " + a.getObjective() + " to " + b.getObjective());
      }
    }
    double w = 0;
    for (Types.Component c : p.getComponentsList()) {
      w += c.getWeight();
    }
    assertEquals(1.0, w, 1e-9, "weights sum to 1");
  }

  @Test
  void scoreEqualsGo() {
    ScoreResult s =
        client.score(MODEL, test, ScoreOptions.defaults().withComponentLogDensities(true));
    assertEquals("models/" + MODEL, s.model());
    assertEquals(fitted.getVersion(), s.version());
    Check.close(go.get("log_densities").values(), s.logDensities(), TOL, "log-density");
    Matrix comp = s.componentLogDensities().orElseThrow();
    assertEquals(test.length, comp.rows());
    assertEquals(3, comp.cols());
    Check.close(
        go.get("component_log_densities").values(), comp.values(), TOL, "component log-density");
    double sum = 0;
    for (double v : go.get("log_densities").values()) {
      sum += v;
    }
    assertEquals(sum, s.logLikelihood(), 1e-9 * Math.abs(sum), "log-likelihood");
    // Percentiles lie in [0, 100] and rise with the log-density (they are a monotone map of it
    // through the training quantiles).
    Integer[] order = new Integer[test.length];
    for (int i = 0; i < order.length; i++) {
      order[i] = i;
    }
    java.util.Arrays.sort(order, (a, b) -> Double.compare(s.logDensities()[a], s.logDensities()[b]));
    double prev = -1;
    for (int i : order) {
      double pc = s.percentiles()[i];
      assertTrue(pc >= 0 && pc <= 100, "percentile " + pc);
      assertTrue(pc >= prev, "percentile falls as log-density rises at row " + i);
      prev = pc;
    }
    // The fault-like reading is rarer than every healthy test reading but the far outliers.
    assertTrue(s.percentiles()[500] < 1.0, "fault-like reading percentile " + s.percentiles()[500]);
  }

  @Test
  void classifyEqualsGo() {
    ClassifyResult c =
        client.classify(
            MODEL, test, ClassifyOptions.defaults().withPosteriors(true).withMinPosterior(0.9));
    Check.same(go.ints("components"), c.components(), "component");
    Check.close(go.get("max_posteriors").values(), c.maxPosteriors(), TOL, "max posterior");
    Matrix post = c.posteriors().orElseThrow();
    assertEquals(3, post.cols());
    Check.close(go.get("posteriors").values(), post.values(), TOL, "posterior");
    for (int i = 0; i < test.length; i++) {
      assertEquals(c.maxPosteriors()[i] >= 0.9, c.confident()[i], "confident[" + i + "]");
    }
  }

  @Test
  void sampleEqualsGoForOneMessageAndForTheStream() {
    SampleOptions opts = SampleOptions.defaults().withSeed(5);
    Matrix want = go.get("sample_rows");
    int[] wantLabels = go.ints("sample_components");
    // 300 rows travel in one Sample call; 10 000 in SampleStream chunks. Both continue one
    // stream of draws, so the 300 are the first 300 of the 10 000.
    SampleResult small = client.sample(MODEL, 300, opts);
    assertEquals(300, small.rows().rows());
    assertEquals(3, small.rows().cols());
    Check.close(
        java.util.Arrays.copyOf(want.values(), 900), small.rows().values(), TOL, "sample rows");
    Check.same(java.util.Arrays.copyOf(wantLabels, 300), small.components(), "sample labels");
    SampleResult big = client.sample(MODEL, 10_000, opts);
    Check.close(want.values(), big.rows().values(), TOL, "streamed sample rows");
    Check.same(wantLabels, big.components(), "streamed sample labels");
    assertEquals(fitted.getVersion(), big.version());
  }

  @Test
  void chunkedStreamsFlatArraysAndFuturesGiveTheSameAnswers() throws Exception {
    ScoreOptions so = ScoreOptions.defaults().withComponentLogDensities(true);
    ClassifyOptions co = ClassifyOptions.defaults().withPosteriors(true);
    ScoreResult one = client.score(MODEL, test, so);
    ClassifyResult oneC = client.classify(MODEL, test, co);
    // A client with 4 KiB chunks sends these 503 rows over ScoreStream/ClassifyStream in many
    // chunks (sized by the response width K+2 = 5 columns: 102 rows per chunk).
    Counting counter = new Counting();
    try (MixdClient small =
        MixdClient.builder(client.address()).chunkBytes(4096).intercept(counter).build()) {
      ScoreResult chunked = small.score(MODEL, Check.flat(test), 3, so);
      assertArrayEquals(one.logDensities(), chunked.logDensities());
      assertArrayEquals(one.percentiles(), chunked.percentiles());
      assertArrayEquals(
          one.componentLogDensities().orElseThrow().values(),
          chunked.componentLogDensities().orElseThrow().values());
      assertEquals(one.logLikelihood(), chunked.logLikelihood(), 1e-9 * Math.abs(one.logLikelihood()));
      ClassifyResult chunkedC = small.classifyAsync(MODEL, test, co).get(60, TimeUnit.SECONDS);
      assertArrayEquals(oneC.components(), chunkedC.components());
      assertArrayEquals(oneC.maxPosteriors(), chunkedC.maxPosteriors());
      assertArrayEquals(
          oneC.posteriors().orElseThrow().values(), chunkedC.posteriors().orElseThrow().values());
    }
    assertEquals(5, counter.sent("mixd.v1.MixtureService/ScoreStream"));
    assertEquals(5, counter.sent("mixd.v1.MixtureService/ClassifyStream"));
    assertEquals(0, counter.sent("mixd.v1.MixtureService/Score"));
    ScoreResult async = client.scoreAsync(MODEL, test, so).get(60, TimeUnit.SECONDS);
    assertArrayEquals(one.logDensities(), async.logDensities());
  }

  @Test
  void modelManagement() {
    assertEquals(fitted, client.getModel(MODEL, 0));
    assertEquals(fitted, client.getModel("models/" + MODEL, fitted.getVersion()));
    byte[] doc = client.exportModel(MODEL, 0);
    Types.Model copy = client.importModel(doc, "roundtrip-copy");
    assertEquals("models/roundtrip-copy", copy.getName());
    assertEquals(1, copy.getVersion());
    assertEquals(fitted.getParameters(), copy.getParameters());
    Types.Model copy2 = client.importModel(doc, "roundtrip-copy");
    assertEquals(2, copy2.getVersion());
    List<String> names = new ArrayList<>();
    for (Types.Model m : client.listModels()) {
      names.add(m.getName());
    }
    assertTrue(names.contains("models/" + MODEL), names.toString());
    assertTrue(names.contains("models/roundtrip-copy"), names.toString());
    List<Types.Model> versions = client.listVersions("roundtrip-copy");
    assertEquals(List.of(1L, 2L), List.of(versions.get(0).getVersion(), versions.get(1).getVersion()));
    assertEquals(1, client.deleteModel("roundtrip-copy", 1));
    assertThrows(NotFoundException.class, () -> client.getModel("roundtrip-copy", 1));
    assertEquals(2, client.getModel("roundtrip-copy", 0).getVersion());
    assertEquals(1, client.deleteModel("roundtrip-copy", 0));
    assertThrows(NotFoundException.class, () -> client.getModel("roundtrip-copy", 0));
  }

  @Test
  void startLabelsAndRowWeightsReachTheFitter() {
    // With start labels and no iterations (max iterations -1) the em fitter returns its start:
    // per label, the weighted share of the rows and their weighted mean (common practice: the
    // M-step of a hard assignment), computed here independently.
    double[][] rows = Pumps.rows(61, 600);
    int[] labels = new int[rows.length];
    double[] w = new double[rows.length];
    double[] sumW = new double[2];
    double[][] sumX = new double[2][3];
    for (int i = 0; i < rows.length; i++) {
      labels[i] = rows[i][0] < 30 ? 0 : 1;
      w[i] = i % 2 == 0 ? 1.0 : 3.0;
      sumW[labels[i]] += w[i];
      for (int j = 0; j < 3; j++) {
        sumX[labels[i]][j] += w[i] * rows[i][j];
      }
    }
    Types.Model m =
        client.fit(
            "roundtrip-labels",
            rows,
            FitOptions.components(2)
                .withStartLabels(labels)
                .withRowWeights(w)
                .withMaxIterations(-1)
                .withRidge(0));
    double total = sumW[0] + sumW[1];
    for (int k = 0; k < 2; k++) {
      Types.Component c = m.getParameters().getComponents(k);
      assertEquals(sumW[k] / total, c.getWeight(), 1e-12, "weight " + k);
      for (int j = 0; j < 3; j++) {
        double want = sumX[k][j] / sumW[k];
        assertEquals(want, c.getMean(j), 1e-9 * Math.abs(want), "mean " + k + "," + j);
      }
    }
  }

  @Test
  void startParametersRangeStructureAndCriterionReachTheFitter() {
    // A given start with no iterations comes back unchanged.
    Types.Model same =
        client.fit(
            "roundtrip-start",
            Pumps.rows(62, 400),
            FitOptions.components(3)
                .withStartParameters(fitted.getParameters())
                .withMaxIterations(-1));
    assertEquals(fitted.getParameters().getComponentsList(), same.getParameters().getComponentsList());
    // A range fit with a diagonal structure keeps the K of lowest BIC.
    Types.Model range =
        client.fit(
            "roundtrip-range",
            Pumps.rows(63, 900),
            FitOptions.componentRange(1, 3)
                .withCriterion(Types.Criterion.CRITERION_BIC)
                .withCovarianceStructure(Types.CovarianceStructure.COVARIANCE_STRUCTURE_DIAGONAL)
                .withSeed(4));
    Types.Parameters p = range.getParameters();
    assertEquals(Types.CovarianceStructure.COVARIANCE_STRUCTURE_DIAGONAL, p.getCovarianceStructure());
    for (Types.Component c : p.getComponentsList()) {
      for (int i = 0; i < 3; i++) {
        for (int j = 0; j < 3; j++) {
          if (i != j) {
            assertEquals(0.0, c.getCovariance(3 * i + j), "off-diagonal");
          }
        }
      }
    }
    List<Types.SelectionRow> sel = range.getReport().getSelectionList();
    assertEquals(3, sel.size(), sel.toString());
    Types.SelectionRow best = sel.get(0);
    for (Types.SelectionRow r : sel) {
      if (r.getBic() < best.getBic()) {
        best = r;
      }
    }
    assertEquals(best.getComponents(), p.getComponentsCount());
  }

  @Test
  void emptyBatches() {
    ScoreResult s = client.score(MODEL, new double[0][]);
    assertEquals(0, s.logDensities().length);
    assertEquals(0, s.percentiles().length);
    assertEquals(0.0, s.logLikelihood());
    ClassifyResult c = client.classify(MODEL, new double[0], 3, ClassifyOptions.defaults());
    assertEquals(0, c.components().length);
    SampleResult none = client.sample(MODEL, 0, SampleOptions.defaults());
    assertEquals(0, none.rows().rows());
    assertEquals(0, none.components().length);
  }

  @Test
  void listFittersIncludesEm() {
    List<String> names = new ArrayList<>();
    for (Types.FitterInfo f : client.listFitters()) {
      names.add(f.getName());
    }
    assertTrue(names.contains("em"), names.toString());
  }

  @Test
  void startFitWatchAndGetJob() {
    double[] train = Pumps.flat(12, 1500);
    Types.FitJob job =
        client.startFit("roundtrip-job", train, 3, FitOptions.components(2).withSeed(3));
    assertTrue(job.getName().startsWith("fitJobs/"), job.getName());
    assertEquals(1500, job.getRows());
    List<Types.FitJob> states = Collections.synchronizedList(new ArrayList<>());
    Types.Model m =
        client.watchJob(
            job.getName(),
            new FitListener() {
              @Override
              public void onProgress(Types.FitProgress p) {}

              @Override
              public void onJob(Types.FitJob j) {
                states.add(j);
              }
            });
    assertEquals("models/roundtrip-job", m.getName());
    FitJobStatus st = client.getJob(job.getName());
    assertEquals(Types.FitJobState.FIT_JOB_STATE_SUCCEEDED, st.job().getState());
    assertEquals(m.getVersion(), st.job().getModelVersion());
    assertEquals(m, st.model().orElseThrow());
    assertFalse(states.isEmpty());
    assertTrue(
        client.listJobs().stream().anyMatch(j -> j.getName().equals(job.getName())),
        "listJobs has the job");
  }
}
