package dev.mixd.client.example;

import dev.mixd.client.CompareOptions;
import dev.mixd.client.CompareResult;
import dev.mixd.client.Matrix;
import dev.mixd.client.MixdClient;
import dev.mixd.client.PredictOptions;
import dev.mixd.client.PredictResult;
import dev.mixd.client.ScoreOptions;

/** Scores a reading with a missing field, predicts that field, and compares two model versions. */
public final class PumpGaps {
  public static void main(String[] args) {
    String address = args.length > 0 ? args[0] : "127.0.0.1:7313";
    // The vibration sensor was down: flow and current observed, vibration not (0 holds its place;
    // NaN is never accepted as a value).
    double[][] reading = {{41.0, 37.0, 0.0}};
    boolean[][] seen = {{true, true, false}};

    try (MixdClient client = MixdClient.connect(address)) {
      // Missing field: the log-density of flow and current alone (the marginal of the model).
      ScoreOptions marginal = ScoreOptions.defaults().withObserved(seen);
      double ld = client.score("pump-station", reading, marginal).logDensities()[0];
      System.out.printf("log-density of flow and current: %.4f%n", ld);

      // Prediction: vibration given flow and current, its spread, and three draws of it.
      PredictOptions opts = PredictOptions.defaults().withStandardDeviations(true).withDraws(3, 1);
      PredictResult p = client.predict("pump-station", reading, seen, opts);
      Matrix draws = p.draws().orElseThrow(); // row 0's draws are rows 0, 1, 2
      System.out.printf(
          "vibration: %.4f ± %.4f mm/s, draws %.4f %.4f %.4f%n",
          p.means().get(0, 2),
          p.standardDeviations().orElseThrow().get(0, 2),
          draws.get(0, 2),
          draws.get(1, 2),
          draws.get(2, 2));

      // Drift: version 1 of the model against its newest version.
      CompareResult d =
          client.compareModels("pump-station", 1, "", 0, CompareOptions.defaults().withSeed(1));
      System.out.printf(
          "KL(v1 || v%d) = %.4f ± %.4f nats%n",
          d.otherVersion(), d.klForward(), d.klForwardStandardError());
    }
  }
}
