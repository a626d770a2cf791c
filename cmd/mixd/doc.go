/*
Command mixd is the mixd daemon: it fits, stores and serves finite mixture models
over gRPC (service mixd.v1.MixtureService).

Usage:

	mixd serve [flags]   run the daemon until SIGINT or SIGTERM
	mixd fitter NAME     run the built-in fitter NAME as a plugin process
	mixd version         print the version

# mixd serve

Flags (each also accepted with a single dash):

	--listen ADDR              127.0.0.1:7313. TCP "host:port" (port 0 picks a free
	                           port) or a Unix socket: "unix:/path/mixd.sock", or any
	                           address containing '/'. A stale socket file is removed;
	                           the socket is created with mode 0600.
	--data-dir DIR             ./mixd-data. Directory of the model store (created when
	                           missing); not used with --store.
	--store URL                "". A postgres:// URL: keep models and fit jobs in
	                           PostgreSQL, shared by several replicas (README.md,
	                           "Running several replicas"). Prefer MIXD_STORE.
	--replica-id NAME          "" (host name and a random suffix). This replica's
	                           name in the shared fit-job table; unique per process.
	--replica-timeout D        15s. With --store: a replica whose heartbeat is older
	                           than this is presumed dead; its unfinished fit jobs
	                           are marked FAILED (UNAVAILABLE).
	--replica-recheck D        3s. With --store: while database notifications are
	                           down, cached models older than this are confirmed
	                           with the database before use.
	--plugin-dir DIR           "" (built-in fitters only). Directory of external fitter
	                           executables; rescanned on SIGHUP and by ReloadFitters.
	--cache-bytes N            268435456 (256 MiB). Byte budget of the model cache;
	                           accepts KiB, MiB and GiB suffixes.
	--max-concurrent-fits N    2. Fits that run at once; further jobs wait as QUEUED.
	--max-rows N               1000000. Rows per Score/Classify/Predict request or
	                           stream message, per Sample response, and drawn
	                           rows (rows × draws) per Predict response.
	--max-dimension N          1024. Columns of a model or a request.
	--max-components N         256. Components of a fit (or range) or imported model.
	--max-sample-count N       100000000. Rows one SampleStream call may draw, and
	                           draws per direction of one CompareModels call.
	--max-fit-rows N           10000000. Training rows of one fit.
	--max-fit-values N         67108864. Training values (rows × columns) of one fit
	                           (512 MiB of float64; 1 000 000 × 32 fits).
	--max-active-jobs N        16. Fit jobs receiving, queued or running at once.
	--job-history N            1000. Finished fit jobs kept in memory.
	--max-message-bytes N      67108864 (64 MiB). Largest gRPC message received or
	                           sent; larger responses are refused with
	                           RESOURCE_EXHAUSTED naming the streaming call to use.
	--shutdown-timeout D       10s. Time running calls get to finish on shutdown.
	--log-level L              info. debug, info, warn or error.
	--log-format F             text. text or json (log/slog); every call's lines
	                           carry its request_id (also returned in the response
	                           header x-request-id).
	--max-fit-memory N         4294967296 (4 GiB). Estimated peak memory of one fit
	                           (daemon.EstimateFitBytes), checked as rows arrive.
	--default-timeout D        2m. Deadline of unary calls that arrive without one;
	                           0s for none. Streaming calls get none.
	--tls-cert FILE            "". PEM certificate chain: serve TLS (with --tls-key).
	--tls-key FILE             "". PEM private key of --tls-cert.
	--tls-client-ca FILE       "". PEM CA certificates: require client certificates
	                           signed by them (mutual TLS).
	--token-file FILE          "". Bearer tokens, lines of "read|full TOKEN [LABEL]";
	                           missing or unknown token: UNAUTHENTICATED; read token
	                           on a method that changes the store: PERMISSION_DENIED.
	--plugin-manifest FILE     "". Lines of "FILE sha256:HEX" pinning every executable
	                           of --plugin-dir; others are refused and not listed.
	--metrics-listen ADDR      "". Prometheus metrics at /metrics on this host:port.
	--status-page              false. Read-only HTML page at /status on the metrics
	                           listener: models, fits, failures, pictures; needs a
	                           read or full token in the Authorization header when
	                           tokens are on (Bearer, or Basic with it as password).
	--health-listen ADDR       "". grpc.health.v1 alone, plain text, no tokens, on
	                           this host:port (for probes).
	--trace-file FILE          "". An OpenTelemetry span per call, as JSON lines.
	--trace-otlp URL           "". An OpenTelemetry span per call, sent to the OTLP/gRPC
	                           collector at http://HOST:PORT (plain text) or
	                           https://HOST:PORT (TLS).
	--config FILE              "". JSON object of settings keyed by flag name.

Every setting may also come from the environment, as MIXD_ followed by the
flag name in capitals with '_' for '-' (MIXD_MAX_ROWS), or from the config
file. Precedence: flag, then environment, then config file, then default.
A bad setting in any of them exits with status 2 and a message naming it.

Once it accepts connections, serve writes exactly one line of this form to
stderr (tests and scripts parse it; its wording is stable):

	mixd: listening on 127.0.0.1:41234
	mixd: listening on unix:/run/mixd/mixd.sock

With --metrics-listen or --health-listen it first writes
"mixd: metrics on ADDR" or "mixd: health on ADDR".

Everything else on stderr is the log (log/slog text format). Nothing is
written to stdout.

The daemon serves grpc.health.v1.Health ("" and "mixd.v1.MixtureService"
are SERVING) and server reflection, so grpcurl works against it.

Signals: SIGINT and SIGTERM shut down gracefully: health turns NOT_SERVING,
running calls get --shutdown-timeout to finish and are then stopped, running
fit jobs are cancelled (they end FAILED with UNAVAILABLE), the fitter
processes are stopped and the store is closed. SIGHUP rescans --plugin-dir and
rereads the TLS files, the token file and the plugin manifest; a file that
fails to load keeps what was in force (logged).

Built-in fitters run as child processes of the daemon's own executable,
started as "mixd fitter NAME"; plugin mode speaks only gRPC (stdout carries
the plugin handshake) and must not be started by hand.

Exit status: 0 after a clean shutdown (or for version and help), 1 when the
daemon cannot start or fails while serving, 2 for a usage error.

# Error codes

Every RPC fails with one canonical gRPC code and a message naming the
field, row or limit:

	INVALID_ARGUMENT     malformed request: shape, non-finite value (row and
	                     column named), bad name, enum or setting, unknown
	                     fitter, bad page token, invalid model document
	RESOURCE_EXHAUSTED   a configured limit (the message names the flag),
	                     a full fit queue (--max-active-jobs; the status
	                     carries a google.rpc.RetryInfo retry delay)
	UNAUTHENTICATED      --token-file is set and the call has no bearer token,
	                     or one not in the file
	PERMISSION_DENIED    a read token called Fit, CreateFitJob, CancelFitJob,
	                     DeleteModel, ImportModel or ReloadFitters
	NOT_FOUND            model, version or fit job does not exist
	FAILED_PRECONDITION  the fitter cannot fit this data (e.g. fewer distinct
	                     rows than components); cancelling a job that ended
	UNIMPLEMENTED        the fitter does not support the family, structure or
	                     option asked for
	UNAVAILABLE          the fitter process crashed or was killed, the daemon
	                     is shutting down, or the PostgreSQL store cannot be
	                     reached (--store): retryable
	DATA_LOSS            a stored model is corrupt or no longer validates; it is
	                     never served (a damaged file is moved to quarantine/
	                     in the data directory)
	CANCELLED            the caller or CancelFitJob cancelled the fit
	DEADLINE_EXCEEDED    the call's deadline passed
	INTERNAL             anything else (for example a fitter returned invalid
	                     parameters), with the message

ALREADY_EXISTS is not used: a fit or import of an existing model makes a new
version. Errors reported by fitter plugins are translated into these codes,
never passed through unchanged.
*/
package main
