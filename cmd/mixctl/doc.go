// Command mixctl is the command-line client of the mixd daemon: it fits
// mixture models to CSV files, scores, classifies and samples with them,
// and manages stored models and fit jobs.
//
// Usage:
//
//	mixctl [--addr ADDR] [--timeout D] [--token-file F] [--tls-ca F] COMMAND [flags] [args]
//
// The global flags may also follow the command. --addr is host:port or
// unix:/path/to/socket (default: $MIXD_ADDR, else 127.0.0.1:7313).
// --timeout bounds the whole command; without it fits and watches run until
// they end and every other call to the daemon waits at most 30 seconds.
//
// Credentials, for a daemon started with --token-file or TLS:
//
//	--token-file F            send the bearer token on the first non-empty line of F
//	                          with every call (default: $MIXD_TOKEN_FILE)
//	--tls-ca F                connect over TLS, trusting the daemon's certificate if
//	                          the CA in F (PEM) signed it
//	--tls-cert F --tls-key F  client certificate and key (PEM) for mutual TLS; also
//	                          connects over TLS (system CAs unless --tls-ca is given)
//
// A read token may score, classify, sample, predict, compare and read
// models; fit, delete, import and cancel need a full token (exit code 12
// otherwise). Without a token, or with one the daemon does not know, a
// daemon that requires tokens answers every call with exit code 11. TLS
// needs a host:port address; the token also travels over plain-text
// connections, which are meant for 127.0.0.1 and Unix sockets.
//
// Commands:
//
//	fit --model M [flags] FILE.csv     fit a model; the CSV header names the features
//	    --fitter NAME                  estimation method (see `mixctl fitters`; default em)
//	    --components K                 number of components
//	    --components-range MIN:MAX     fit every K in the range, keep the best by --criterion
//	    --criterion bic|aic            how the range picks K (default bic)
//	    --structure full|diagonal|spherical|tied
//	    --family gaussian|student_t
//	    --seed N  --max-iterations N  --tolerance X  --restarts N  --ridge X
//	    --option key=value             fitter-specific setting (repeatable)
//	    --columns a,b,c                use only these CSV columns
//	    --detach                       start a fit job, print its name, return
//	    --quiet                        no progress on standard error
//	    --format text|json             how to print the stored model
//	jobs [--format table|json]         recent fit jobs, newest first
//	job JOB [--format text|json]       one fit job ("fitJobs/ID" or "ID")
//	watch JOB [--quiet]                follow a job; prints the model when it succeeds
//	cancel JOB                         cancel a running job
//	score --model M [flags] FILE.csv   columns row, log_density, percentile (Student-t
//	                                   models add outlier_statistic, outlier)
//	    --outlier-level L              level of the outlier rule (default: the model's)
//	    --outliers                     only rows flagged as outliers (Student-t models)
//	    --version N  --format csv|jsonl  --with-input  --columns a,b,c
//	    --components                   add component_K_log_density columns
//	    --below P                      only rows whose percentile is below P
//	classify --model M [flags] FILE.csv  columns row, component, max_posterior, confident
//	    --version N  --format csv|jsonl  --with-input  --columns a,b,c
//	    --min-posterior X              confident=false below this posterior
//	    --posteriors                   add posterior_K columns
//	sample --model M --count N [--seed S] [--version N] [--format csv|jsonl]
//	predict --model M [flags] FILE.csv  fill empty cells with their conditional mean
//	    --std                          add FEATURE_sd columns (conditional standard deviations)
//	    --draws N  --seed S            N completed rows per row instead (multiple imputation)
//	    --version N  --format csv|jsonl  --columns a,b,c
//	compare MODEL[@VERSION] MODEL[@VERSION] [--samples N] [--seed S] [--format text|json]
//	                                   KL divergence both ways with standard errors,
//	                                   components matched by Bhattacharyya distance
//	plot --model M --x F --y F [--data FILE.csv] [--output FILE.svg|FILE.png]
//	                                   rows coloured by most probable component, 1-, 2-, 3-sigma
//	                                   ellipses and shaded log-density over two features
//	    --below P                      mark rows below the P-th training log-density percentile
//	    --history | --selection        objective per iteration, or BIC/AIC against K
//	models [--format table|json]       newest version of every model
//	show MODEL [--version N] [--format text|json]
//	versions MODEL [--format table|json]
//	delete MODEL [--version N]         without --version: every version
//	export MODEL [--version N] [--output FILE]   the model document (JSON)
//	import FILE.json [--name ID]       store a document as a new version
//	fitters [--format table|json]      available fitters and their options
//	help [COMMAND]
//
// FILE may be "-" for standard input. Row numbers in the output of score,
// classify and predict count data rows from 1 (the header is not a row).
// Component indices count from 0.
//
// An empty CSV cell is an unobserved value: score and classify evaluate such
// a row under the marginal mixture of its observed features (its percentile
// is NaN, as a marginal density is not comparable with the training rows'),
// predict fills it, and fit rejects it. "NaN" or any other word is an error,
// not a missing value.
//
// The percentile of a row is the share, in percent, of the model's own
// training rows whose log-density is lower than the row's. It says how rare
// the row is compared with the training data; it is not a diagnosis, and
// safety decisions about equipment belong to the operator's own procedures.
//
// Fit progress goes to standard error: one line redrawn in place when
// standard error is a terminal, one line per event otherwise, none with
// --quiet. Errors print the daemon's message followed by its gRPC code.
//
// Exit codes (scripts may rely on them):
//
//	0   success
//	1   the daemon failed (internal error, data loss, ...) or output could not be written
//	2   usage error: unknown command or flag, missing or extra argument, bad flag value
//	3   not found: no such model, version or fit job
//	4   invalid input: the daemon rejected the request (INVALID_ARGUMENT), or a file
//	    mixctl reads is unreadable, not CSV, or holds a value that is not a finite number
//	5   unavailable: the daemon cannot be reached or a fitter process crashed; retry later
//	6   timed out (--timeout, or a deadline inside the daemon)
//	7   cancelled: interrupted by a signal, or the fit job was cancelled
//	8   conflict with the current state (FAILED_PRECONDITION, ALREADY_EXISTS)
//	9   a daemon limit was exceeded (RESOURCE_EXHAUSTED)
//	10  not supported by the daemon or the chosen fitter (UNIMPLEMENTED)
//	11  not authenticated: no token, or a token the daemon does not accept (UNAUTHENTICATED)
//	12  permission denied: the token may not do this, e.g. a read token fitting (PERMISSION_DENIED)
package main
