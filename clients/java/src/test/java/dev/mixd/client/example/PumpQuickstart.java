package dev.mixd.client.example;

import dev.mixd.client.ClassifyResult;
import dev.mixd.client.FitOptions;
import dev.mixd.client.MixdClient;
import dev.mixd.client.ScoreResult;
import java.util.SplittableRandom;
import dev.mixd.api.v1.Types;

/** Fits a model of pumping-station readings and scores two new readings. */
public final class PumpQuickstart {
  public static void main(String[] args) {
    String address = args.length > 0 ? args[0] : "127.0.0.1:7313";

    // Invented readings: flow (L/s), motor current (A), vibration (mm/s), in three regimes.
    double[][] mean = {{18.0, 22.0, 1.55}, {42.0, 37.5, 2.30}, {64.0, 51.5, 3.10}};
    double[][] spread = {{2.5, 1.4, 0.18}, {4.0, 2.0, 0.25}, {3.5, 2.2, 0.30}};
    SplittableRandom rng = new SplittableRandom(7);
    double[][] rows = new double[3000][3];
    for (double[] row : rows) {
      int regime = rng.nextInt(3);
      for (int j = 0; j < 3; j++) {
        row[j] = mean[regime][j] + spread[regime][j] * rng.nextGaussian();
      }
    }

    try (MixdClient client = MixdClient.connect(address)) {
      Types.Model model =
          client.fit(
              "pump-station",
              rows,
              FitOptions.components(3).withSeed(7),
              p -> System.out.printf("iteration %d: %.1f%n", p.getIteration(), p.getObjective()));
      System.out.printf("stored %s version %d%n", model.getName(), model.getVersion());

      double[][] readings = {{41.0, 37.0, 2.2}, {12.0, 58.0, 6.5}};
      ScoreResult scores = client.score("pump-station", readings);
      ClassifyResult regimes = client.classify("pump-station", readings);
      for (int i = 0; i < readings.length; i++) {
        System.out.printf(
            "reading %d: log-density %.2f, percentile %.3f, component %d%n",
            i, scores.logDensities()[i], scores.percentiles()[i], regimes.components()[i]);
      }
    }
  }
}
