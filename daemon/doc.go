// Package daemon is the serving side of mixd: the gRPC MixtureService
// (Server), fit jobs, the model cache, request validation, the mapping of
// failures to gRPC codes, and Run, which listens, serves health and
// reflection, and shuts down gracefully. It evaluates models itself
// (fitters/mixture) and leaves fitting to the fitter host
// (daemon/fitterhost), which runs fitters as plugin processes.
//
// # Fits
//
// Fit and CreateFitJob receive a FitSpec and then chunks of rows. The spec
// is checked before any row is accepted (model name, counts, enums,
// options, start parameters, and that the fitter exists and supports the
// family and structure); each chunk is checked as it arrives (shape,
// finite values, the same columns as the first chunk, row weights and
// start labels on every chunk or on none, limits). A job is created as
// soon as the spec is accepted (state RECEIVING), waits for one of
// MaxConcurrentFits slots (QUEUED), runs (RUNNING) and ends SUCCEEDED,
// FAILED or CANCELLED. A Fit call streams the job, state changes, progress
// (at most ten events a second, the latest always sent before the final
// state) and the stored model; when the call ends first, the fit is
// cancelled. A CreateFitJob job runs on whether or not anybody watches.
// Jobs live in this process's memory: every active job and the
// JobHistory most recent finished ones. With a store shared by several
// daemons (PostgreSQL), jobs are also written to the store's job table, so
// that every daemon sees and can cancel them (replica.go).
//
// A successful fit computes the log-density of every training row under
// the fitted model and stores its quantiles at QuantileLevels with the
// model (FitReport.training_quantiles); then the model is written to the
// store, put in the cache, and only then reported.
//
// # Percentiles
//
// Score turns a row's log-density p into a percentile by interpolating
// linearly between the stored training quantiles: a percentile of 0.1
// means that about 0.1% of the training rows had a lower log-density than
// this row. Rows below the lowest training log-density get 0, rows above
// the highest get 100. Models without training quantiles (imported without
// a fit report) return no percentiles.
//
// A low percentile says only that the row is rare under the fitted model
// compared with the data the model was fitted to. It is not a probability
// that anything is wrong: a model fitted to faulty data calls faults
// normal, a regime missing from the training data looks rare however
// healthy it is, and the lowest levels rest on few training rows. Whether
// a rare reading from a pumping station (or any equipment) needs action is
// for the operator's own procedures to decide.
//
// # Errors
//
// See errors.go for the table of gRPC codes. A rejected request changes
// nothing stored.
//
// # Around the API
//
// Run adds, each off unless configured: TLS and mutual TLS from files
// (tlsconfig.go), bearer tokens of class read or full (auth.go), a request
// id and call log for every call and a default deadline for unary calls
// (interceptors.go), Prometheus metrics on a separate listener
// (metrics.go), a health-only listener for probes, and OpenTelemetry spans
// written to a file (tracing.go); serving.go puts them together. SIGHUP
// (Config.Reload) rereads the TLS files and the token file. The fit queue
// (jobstats.go) refuses a job beyond Limits.MaxActiveJobs with a retry
// hint, and a fit whose estimated memory (EstimateFitBytes) exceeds
// Limits.MaxFitMemory is refused as its rows arrive.
package daemon
