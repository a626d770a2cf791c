package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"sort"
	"strings"
	"syscall"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	mixdclient "github.com/mixd-dev/mixd/clients/go"
)

// DefaultAddr is the daemon address used when neither --addr nor MIXD_ADDR
// is set; it matches the default of `mixd serve`.
const DefaultAddr = "127.0.0.1:7313"

// Exit codes. They are part of mixctl's interface: scripts may rely on
// them. The same table is in doc.go and in `mixctl help`.
const (
	exitOK          = 0  // success
	exitServer      = 1  // the daemon failed (INTERNAL, UNKNOWN, DATA_LOSS, ...) or output could not be written
	exitUsage       = 2  // bad command line: unknown command or flag, missing or extra argument, bad flag value
	exitNotFound    = 3  // NOT_FOUND: no such model, version or job
	exitInvalid     = 4  // invalid input: INVALID_ARGUMENT or OUT_OF_RANGE from the daemon, or a file mixctl cannot read
	exitUnavailable = 5  // UNAVAILABLE: daemon unreachable or a fitter crashed; retrying may succeed
	exitTimeout     = 6  // DEADLINE_EXCEEDED: --timeout or a daemon deadline passed
	exitCancelled   = 7  // CANCELLED: interrupted (Ctrl-C, SIGTERM) or the fit job was cancelled
	exitConflict    = 8  // FAILED_PRECONDITION, ALREADY_EXISTS or ABORTED: the request conflicts with the current state
	exitLimit       = 9  // RESOURCE_EXHAUSTED: a daemon limit was exceeded
	exitUnsupported = 10 // UNIMPLEMENTED: the daemon or fitter does not support what was asked
	exitUnauthed    = 11 // UNAUTHENTICATED: no token, or one the daemon does not know
	exitDenied      = 12 // PERMISSION_DENIED: the token's class may not do this (a read token fitting)
)

// exitCodesHelp is the exit code table shown by `mixctl help`.
const exitCodesHelp = `Exit codes:
  0   success
  1   the daemon failed (internal error, data loss, ...) or output could not be written
  2   usage error: unknown command or flag, missing or extra argument, bad flag value
  3   not found: no such model, version or fit job
  4   invalid input: the daemon rejected the request (INVALID_ARGUMENT), or a file
      mixctl reads is unreadable, not CSV, or holds a value that is not a finite number
  5   unavailable: the daemon cannot be reached or a fitter process crashed; retry later
  6   timed out (--timeout, or a deadline inside the daemon)
  7   cancelled: interrupted by a signal, or the fit job was cancelled
  8   conflict with the current state (FAILED_PRECONDITION, ALREADY_EXISTS)
  9   a daemon limit was exceeded (RESOURCE_EXHAUSTED)
  10  not supported by the daemon or the chosen fitter (UNIMPLEMENTED)
  11  not authenticated: no token, or a token the daemon does not accept (UNAUTHENTICATED)
  12  permission denied: the token may not do this, e.g. a read token fitting (PERMISSION_DENIED)
`

// usageError is a problem with the command line (exit code 2).
type usageError struct{ msg string }

func (e *usageError) Error() string { return e.msg }

func usagef(format string, args ...any) error {
	return &usageError{msg: fmt.Sprintf(format, args...)}
}

// inputError is a problem with a local input file (exit code 4).
type inputError struct{ err error }

func (e *inputError) Error() string { return e.err.Error() }
func (e *inputError) Unwrap() error { return e.err }

func inputf(format string, args ...any) error {
	return &inputError{err: fmt.Errorf(format, args...)}
}

// runner runs a subcommand with its positional arguments.
type runner func(a *app, pos []string) error

// command is one subcommand. flags defines its flags in fs and returns the
// function that runs it once they are parsed.
type command struct {
	name    string
	args    string // argument synopsis
	summary string
	minArgs int
	maxArgs int // -1: no limit
	flags   func(fs *flag.FlagSet) runner
}

// commands lists the subcommands in the order `mixctl help` shows them.
var commands = []command{
	{"fit", "--model M [flags] FILE.csv", "fit a model to a CSV file whose header names the features", 1, 1, fitCommand},
	{"jobs", "[--format table|json]", "list recent fit jobs, newest first", 0, 0, jobsCommand},
	{"job", "JOB [--format text|json]", "show one fit job", 1, 1, jobCommand},
	{"watch", "JOB [--quiet]", "follow a fit job until it ends", 1, 1, watchCommand},
	{"cancel", "JOB", "cancel a running fit job", 1, 1, cancelCommand},
	{"score", "--model M [flags] FILE.csv", "log-density and training percentile of each row", 1, 1, scoreCommand},
	{"classify", "--model M [flags] FILE.csv", "most probable component of each row", 1, 1, classifyCommand},
	{"sample", "--model M --count N [flags]", "draw synthetic rows from a model", 0, 0, sampleCommand},
	{"predict", "--model M [flags] FILE.csv", "fill the empty cells of a CSV file from the observed ones", 1, 1, predictCommand},
	{"compare", "MODEL[@VERSION] MODEL[@VERSION] [flags]", "compare two models or versions (KL divergence, matched components)", 2, 2, compareCommand},
	{"plot", "--model M (--x F --y F | --history | --selection) [flags]", "draw a model: two features, fit history or selection criteria (SVG or PNG)", 0, 0, plotCommand},
	{"models", "[--format table|json]", "list models (newest version of each)", 0, 0, modelsCommand},
	{"show", "MODEL [--version N] [--format text|json]", "show one model version", 1, 1, showCommand},
	{"versions", "MODEL [--format table|json]", "list the versions of a model, oldest first", 1, 1, versionsCommand},
	{"delete", "MODEL [--version N]", "delete one version, or every version, of a model", 1, 1, deleteCommand},
	{"export", "MODEL [--version N] [--output FILE]", "write a model document (JSON)", 1, 1, exportCommand},
	{"import", "FILE.json [--name ID]", "store a model document as a new version", 1, 1, importCommand},
	{"fitters", "[--format table|json]", "list the fitters the daemon can run", 0, 0, fittersCommand},
	{"help", "[COMMAND]", "show help for mixctl or one command", 0, 1, nil},
}

// app holds what every subcommand needs.
type app struct {
	stdin          io.Reader
	stdout, stderr io.Writer
	getenv         func(string) string
	// stderrIsTerminal reports whether progress can be redrawn in place.
	stderrIsTerminal bool

	addr    string
	timeout time.Duration
	// Credentials (global flags): see credentials.go.
	tokenFile, tlsCA, tlsCert, tlsKey string

	ctx    context.Context
	cancel context.CancelFunc // releases the --timeout context
	client *mixdclient.Client
}

// run is mixctl's main; it returns the exit code.
func run(args []string, stdin io.Reader, stdout, stderr io.Writer, getenv func(string) string) int {
	a := &app{stdin: stdin, stdout: stdout, stderr: stderr, getenv: getenv, stderrIsTerminal: isTerminal(stderr)}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	a.ctx = ctx
	err := a.main(args)
	if a.client != nil {
		_ = a.client.Close()
	}
	if a.cancel != nil {
		a.cancel()
	}
	if err == nil {
		return exitOK
	}
	if ctx.Err() != nil && status.Code(err) != codes.OK {
		fmt.Fprintln(stderr, "mixctl: interrupted")
		return exitCancelled
	}
	code := exitCode(err)
	msg := errorMessage(err)
	if code == exitUnavailable && strings.HasPrefix(mixdclient.StatusOf(err).Message(), "connection error") {
		msg = "cannot reach mixd at " + a.addr + ": " + msg
	}
	fmt.Fprintf(stderr, "mixctl: %s\n", msg)
	if code == exitUsage {
		fmt.Fprintln(stderr, "Run 'mixctl help' for usage.")
	}
	return code
}

// isTerminal reports whether w is a character device (a terminal).
func isTerminal(w io.Writer) bool {
	f, ok := w.(*os.File)
	if !ok {
		return false
	}
	fi, err := f.Stat()
	return err == nil && fi.Mode()&os.ModeCharDevice != 0
}

// exitCode maps an error to mixctl's exit code.
func exitCode(err error) int {
	var ue *usageError
	var ie *inputError
	switch {
	case err == nil:
		return exitOK
	case errors.As(err, &ue):
		return exitUsage
	case errors.As(err, &ie):
		return exitInvalid
	}
	switch status.Code(err) {
	case codes.NotFound:
		return exitNotFound
	case codes.InvalidArgument, codes.OutOfRange:
		return exitInvalid
	case codes.Unavailable:
		return exitUnavailable
	case codes.DeadlineExceeded:
		return exitTimeout
	case codes.Canceled:
		return exitCancelled
	case codes.FailedPrecondition, codes.AlreadyExists, codes.Aborted:
		return exitConflict
	case codes.ResourceExhausted:
		return exitLimit
	case codes.Unimplemented:
		return exitUnsupported
	case codes.Unauthenticated:
		return exitUnauthed
	case codes.PermissionDenied:
		return exitDenied
	}
	return exitServer
}

// errorMessage is what mixctl prints for err: the daemon's own message with
// its code, or the local error.
func errorMessage(err error) string {
	var ue *usageError
	var ie *inputError
	var je *mixdclient.JobError
	switch {
	case errors.As(err, &ue), errors.As(err, &ie):
		return err.Error()
	case errors.As(err, &je):
		return je.Error() + " (" + codeName(codes.Code(je.Job.GetErrorCode())) + ")"
	}
	st := mixdclient.StatusOf(err)
	if st.Code() == codes.Unknown && st.Message() == err.Error() {
		return err.Error() // not from the daemon
	}
	return st.Message() + " (" + codeName(st.Code()) + ")"
}

// codeName spells a gRPC code the way the API documentation does.
func codeName(c codes.Code) string {
	if c == codes.Canceled {
		return "CANCELLED"
	}
	var b strings.Builder
	for i, r := range c.String() {
		if i > 0 && r >= 'A' && r <= 'Z' {
			b.WriteByte('_')
		}
		b.WriteRune(r)
	}
	return strings.ToUpper(b.String())
}

// main parses the global flags and runs a subcommand.
func (a *app) main(args []string) error {
	fs := a.flagSet("mixctl")
	if err := a.parseGlobal(fs, args); err != nil {
		return err
	}
	rest := fs.Args()
	if len(rest) == 0 {
		a.printHelp(a.stderr)
		return usagef("no command given")
	}
	name, rest := rest[0], rest[1:]
	if name == "help" {
		if len(rest) > 1 {
			return usagef("help: unexpected argument %q", rest[1])
		}
		return a.cmdHelp(rest)
	}
	for _, c := range commands {
		if c.name == name {
			fs := a.flagSet(name)
			r := c.flags(fs)
			pos, err := parse(fs, rest, c.minArgs, c.maxArgs)
			if err != nil {
				return err
			}
			return r(a, pos)
		}
	}
	return usagef("unknown command %q", name)
}

// flagSet returns a FlagSet that reports errors as usageErrors and carries
// the global flags, so they may come before or after the command name.
func (a *app) flagSet(name string) *flag.FlagSet {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	addr := a.getenv("MIXD_ADDR")
	if addr == "" {
		addr = DefaultAddr
	}
	if a.addr != "" {
		addr = a.addr
	}
	fs.StringVar(&a.addr, "addr", addr, "daemon address: host:port or unix:/path/to/socket (env MIXD_ADDR)")
	fs.DurationVar(&a.timeout, "timeout", a.timeout, "give up after this long (whole command); 0 means fits and watches run until they end and other calls wait up to 30s")
	tokenFile := a.getenv("MIXD_TOKEN_FILE")
	if a.tokenFile != "" {
		tokenFile = a.tokenFile
	}
	fs.StringVar(&a.tokenFile, "token-file", tokenFile, "file whose first non-empty line is the bearer token to send (env MIXD_TOKEN_FILE)")
	fs.StringVar(&a.tlsCA, "tls-ca", a.tlsCA, "PEM file of the CA that signed the daemon's certificate; connects over TLS")
	fs.StringVar(&a.tlsCert, "tls-cert", a.tlsCert, "PEM client certificate for mutual TLS (with --tls-key); connects over TLS")
	fs.StringVar(&a.tlsKey, "tls-key", a.tlsKey, "PEM private key of --tls-cert")
	return fs
}

// parseGlobal parses flags up to the command name.
func (a *app) parseGlobal(fs *flag.FlagSet, args []string) error {
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return a.cmdHelp(nil)
		}
		return usagef("%v", err)
	}
	return nil
}

// parse parses a subcommand's flags and positional arguments, which may be
// interleaved ("score data.csv --model pumps"); "--" ends the flags.
func parse(fs *flag.FlagSet, args []string, minPos, maxPos int) ([]string, error) {
	var pos []string
	for {
		if err := fs.Parse(args); err != nil {
			if errors.Is(err, flag.ErrHelp) {
				return nil, &usageError{msg: "help requested: run 'mixctl help " + fs.Name() + "'"}
			}
			return nil, usagef("%s: %v", fs.Name(), err)
		}
		rest := fs.Args()
		consumed := len(args) - len(rest)
		if consumed > 0 && args[consumed-1] == "--" {
			pos = append(pos, rest...)
			break
		}
		if len(rest) == 0 {
			break
		}
		pos = append(pos, rest[0])
		args = rest[1:]
	}
	switch {
	case len(pos) < minPos:
		return nil, usagef("%s: missing argument (usage: mixctl %s %s)", fs.Name(), fs.Name(), synopsis(fs.Name()))
	case maxPos >= 0 && len(pos) > maxPos:
		return nil, usagef("%s: unexpected argument %q (usage: mixctl %s %s)", fs.Name(), pos[maxPos], fs.Name(), synopsis(fs.Name()))
	}
	return pos, nil
}

func synopsis(name string) string {
	for _, c := range commands {
		if c.name == name {
			return c.args
		}
	}
	return ""
}

// dial connects to the daemon once and sets up the command's context.
func (a *app) dial() (*mixdclient.Client, error) {
	if a.client != nil {
		return a.client, nil
	}
	opts, err := a.credentials()
	if err != nil {
		return nil, err
	}
	c, err := mixdclient.Dial(a.addr, opts...)
	if err != nil {
		return nil, usagef("--addr: %v", err)
	}
	a.client = c
	if a.timeout > 0 {
		a.ctx, a.cancel = context.WithTimeout(a.ctx, a.timeout)
	}
	return c, nil
}

// globalFlags are the flags every FlagSet carries; `mixctl help COMMAND`
// leaves them out.
var globalFlags = map[string]bool{
	"addr": true, "timeout": true, "token-file": true, "tls-ca": true, "tls-cert": true, "tls-key": true,
}

// flagHelp lists the flags a command defines, other than the global ones.
func flagHelp(fs *flag.FlagSet) string {
	var b strings.Builder
	var names []string
	fs.VisitAll(func(f *flag.Flag) {
		if !globalFlags[f.Name] {
			names = append(names, f.Name)
		}
	})
	sort.Strings(names)
	for _, n := range names {
		f := fs.Lookup(n)
		kind, usage := flag.UnquoteUsage(f)
		fmt.Fprintf(&b, "  --%s", n)
		if kind != "" {
			fmt.Fprintf(&b, " %s", kind)
		}
		fmt.Fprintf(&b, "\n      %s", usage)
		if f.DefValue != "" && f.DefValue != "0" && f.DefValue != "false" && f.DefValue != "[]" {
			fmt.Fprintf(&b, " (default %s)", f.DefValue)
		}
		b.WriteByte('\n')
	}
	return b.String()
}

// printHelp writes the overview.
func (a *app) printHelp(w io.Writer) {
	fmt.Fprintf(w, `mixctl talks to a mixd daemon: fit mixture models to CSV data, score,
classify and sample with them, and manage stored models and fit jobs.

Usage: mixctl [--addr ADDR] [--timeout D] [--token-file F] [--tls-ca F] COMMAND [flags] [args]

Commands:
`)
	for _, c := range commands {
		fmt.Fprintf(w, "  %-9s %s\n", c.name, c.summary)
	}
	fmt.Fprintf(w, `
Global flags (before or after the command):
  --addr ADDR     daemon address, host:port or unix:/path (default $MIXD_ADDR, else %s)
  --timeout D     give up after D for the whole command, e.g. 30s or 10m (default: none
                  for fit and watch; 30s for each other call to the daemon)
  --token-file F  send the bearer token on the first non-empty line of F with every
                  call (default $MIXD_TOKEN_FILE; none when unset)
  --tls-ca F      connect over TLS and trust the daemon's certificate if F (PEM) signed it
  --tls-cert F --tls-key F
                  present this client certificate (PEM) for mutual TLS; also connects
                  over TLS, trusting the system's CAs unless --tls-ca is given

Files: FILE may be "-" for standard input. CSV files need a header row.
Errors are printed as the daemon's message followed by its gRPC code.

%s
Run 'mixctl help COMMAND' for a command's flags.
`, DefaultAddr, exitCodesHelp)
}

// cmdHelp prints the overview or one command's help.
func (a *app) cmdHelp(args []string) error {
	if len(args) == 0 {
		a.printHelp(a.stdout)
		return nil
	}
	for _, c := range commands {
		if c.name != args[0] {
			continue
		}
		fmt.Fprintf(a.stdout, "Usage: mixctl %s %s\n\n%s.\n", c.name, c.args, upperFirst(c.summary))
		if notes := commandNotes[c.name]; notes != "" {
			fmt.Fprintf(a.stdout, "\n%s", notes)
		}
		if c.flags != nil {
			fs := flag.NewFlagSet(c.name, flag.ContinueOnError)
			c.flags(fs)
			if h := flagHelp(fs); h != "" {
				fmt.Fprintf(a.stdout, "\nFlags:\n%s", h)
			}
		}
		return nil
	}
	return usagef("help: unknown command %q", args[0])
}

func upperFirst(s string) string {
	if s == "" {
		return s
	}
	return strings.ToUpper(s[:1]) + s[1:]
}
