package dev.mixd.client;

import java.util.SplittableRandom;

/**
 * Invented pumping-station readings (flow in L/s, motor current in A, vibration in mm/s) from three
 * operating regimes, drawn with a seeded generator. The regime means and spreads are those of the
 * project's demo data (testdata/pumps/README.md); flow and current are correlated (more water
 * moved needs more motor power).
 */
final class Pumps {
  private Pumps() {}

  static final double[] SHARE = {0.30, 0.45, 0.25};
  static final double[][] MEAN = {{18.0, 22.0, 1.55}, {42.0, 37.5, 2.30}, {64.0, 51.5, 3.10}};
  static final double[][] SD = {{2.5, 1.4, 0.18}, {4.0, 2.0, 0.25}, {3.5, 2.2, 0.30}};
  static final double RHO = 0.8;

  /** Draws n readings, row-major, 3 values per row. */
  static double[] flat(long seed, int n) {
    SplittableRandom rng = new SplittableRandom(seed);
    double[] out = new double[3 * n];
    for (int i = 0; i < n; i++) {
      double u = rng.nextDouble();
      int r = u < SHARE[0] ? 0 : u < SHARE[0] + SHARE[1] ? 1 : 2;
      double z1 = rng.nextGaussian();
      double z2 = rng.nextGaussian();
      double z3 = rng.nextGaussian();
      out[3 * i] = MEAN[r][0] + SD[r][0] * z1;
      out[3 * i + 1] = MEAN[r][1] + SD[r][1] * (RHO * z1 + Math.sqrt(1 - RHO * RHO) * z2);
      out[3 * i + 2] = MEAN[r][2] + SD[r][2] * z3;
    }
    return out;
  }

  /** Draws n readings as rows. */
  static double[][] rows(long seed, int n) {
    double[] f = flat(seed, n);
    double[][] out = new double[n][];
    for (int i = 0; i < n; i++) {
      out[i] = new double[] {f[3 * i], f[3 * i + 1], f[3 * i + 2]};
    }
    return out;
  }
}
