/**
 * Java client of the mixd daemon, which fits, stores and serves finite mixture models (Gaussian and
 * Student-t) over gRPC.
 *
 * <p>Start with {@link dev.mixd.client.MixdClient}. Results are plain arrays ({@link
 * dev.mixd.client.ScoreResult}, {@link dev.mixd.client.ClassifyResult}, {@link
 * dev.mixd.client.SampleResult}, {@link dev.mixd.client.PredictResult}, {@link
 * dev.mixd.client.CompareResult}); models, jobs and fitters are the generated protocol messages of
 * package {@code dev.mixd.api.v1} ({@code Types.Model}, {@code Types.FitJob}, {@code Types.FitterInfo}).
 * Failures are {@link dev.mixd.client.MixdException}s carrying the gRPC status code and the
 * daemon's message.
 */
package dev.mixd.client;
