package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"log/slog"
	"os"
	"os/signal"
	"runtime/debug"
	"strconv"
	"strings"
	"syscall"
	"time"

	"github.com/mixd-dev/mixd/daemon"
	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/builtin"
)

// version is set at build time with -ldflags "-X main.version=..."; it
// falls back to the module version of the build.
var version = ""

func main() {
	os.Exit(run(os.Args[1:], os.Stdout, os.Stderr))
}

// Exit codes.
const (
	exitOK    = 0
	exitError = 1
	exitUsage = 2
)

func run(args []string, stdout, stderr io.Writer) int {
	if len(args) == 0 {
		usage(stderr)
		return exitUsage
	}
	switch args[0] {
	case "serve":
		return serve(args[1:], stderr)
	case "fitter":
		return fitter(args[1:], stderr)
	case "version":
		fmt.Fprintln(stdout, "mixd", buildVersion())
		return exitOK
	case "help", "-h", "-help", "--help":
		usage(stdout)
		return exitOK
	}
	fmt.Fprintf(stderr, "mixd: unknown command %q\n", args[0])
	usage(stderr)
	return exitUsage
}

func usage(w io.Writer) {
	fmt.Fprint(w, `usage:
  mixd serve [flags]     run the daemon (mixd serve -h lists the flags)
  mixd fitter NAME       run built-in fitter NAME as a plugin process (the daemon does this)
  mixd version           print the version
`)
}

func buildVersion() string {
	if version != "" {
		return version
	}
	if bi, ok := debug.ReadBuildInfo(); ok && bi.Main.Version != "" {
		return bi.Main.Version
	}
	return "(devel)"
}

// fitter runs a built-in fitter in plugin mode. stdout belongs to the
// plugin handshake: nothing else may be written to it.
func fitter(args []string, stderr io.Writer) int {
	if len(args) != 1 {
		fmt.Fprintf(stderr, "mixd fitter: want exactly one fitter name (built-in: %s)\n", strings.Join(builtin.Names(), ", "))
		return exitUsage
	}
	f, ok := builtin.New(args[0])
	if !ok {
		fmt.Fprintf(stderr, "mixd fitter: unknown built-in fitter %q (built-in: %s)\n", args[0], strings.Join(builtin.Names(), ", "))
		return exitUsage
	}
	fitters.Serve(f)
	return exitOK
}

// byteSize is a flag value of bytes: a plain integer, or one with a KiB,
// MiB or GiB suffix.
type byteSize int64

func (b *byteSize) String() string { return strconv.FormatInt(int64(*b), 10) }

func (b *byteSize) Set(s string) error {
	n, err := parseBytes(s)
	if err != nil {
		return err
	}
	*b = byteSize(n)
	return nil
}

func parseBytes(s string) (int64, error) {
	mult := int64(1)
	num := strings.TrimSpace(s)
	for _, u := range []struct {
		suffix string
		mult   int64
	}{{"KiB", 1 << 10}, {"MiB", 1 << 20}, {"GiB", 1 << 30}} {
		if v, ok := strings.CutSuffix(num, u.suffix); ok {
			num, mult = strings.TrimSpace(v), u.mult
			break
		}
	}
	n, err := strconv.ParseInt(num, 10, 64)
	if err != nil || n < 0 || n > (1<<62)/mult {
		return 0, fmt.Errorf("%q is not a byte count (a non-negative integer, optionally with KiB, MiB or GiB)", s)
	}
	return n * mult, nil
}

// serve runs the daemon until SIGINT or SIGTERM; SIGHUP rescans the
// plugin directory and reloads the TLS files and the token file.
func serve(args []string, stderr io.Writer) int {
	fs := flag.NewFlagSet("mixd serve", flag.ContinueOnError)
	fs.SetOutput(stderr)
	var (
		cfg      daemon.Config
		cache    = byteSize(daemon.DefaultCacheBytes)
		msgBytes = byteSize(daemon.DefaultMaxMessageBytes)
		logLevel string
	)
	fs.StringVar(&cfg.Listen, "listen", daemon.DefaultListen, "listen address: host:port, or a Unix socket as unix:/path (or any path containing '/')")
	fs.StringVar(&cfg.DataDir, "data-dir", "./"+daemon.DefaultDataDir, "directory holding the models")
	fs.StringVar(&cfg.PluginDir, "plugin-dir", "", "directory of external fitter executables (empty: built-in fitters only)")
	fs.Var(&cache, "cache-bytes", "byte budget of the in-memory model cache (e.g. 268435456 or 256MiB)")
	fs.IntVar(&cfg.MaxConcurrentFits, "max-concurrent-fits", daemon.DefaultMaxConcurrentFits, "fits that run at once; more wait as QUEUED")
	fs.Int64Var(&cfg.Limits.MaxRows, "max-rows", daemon.DefaultMaxRows, "most rows per Score/Classify request or stream message, and per Sample response")
	fs.Int64Var(&cfg.Limits.MaxDimension, "max-dimension", daemon.DefaultMaxDimension, "most columns (features) of a model or request")
	fs.Int64Var(&cfg.Limits.MaxComponents, "max-components", daemon.DefaultMaxComponents, "most components of a fit or an imported model")
	fs.Int64Var(&cfg.Limits.MaxSampleCount, "max-sample-count", daemon.DefaultMaxSampleCount, "most rows one SampleStream call may draw")
	fs.Int64Var(&cfg.Limits.MaxFitRows, "max-fit-rows", daemon.DefaultMaxFitRows, "most training rows of one fit")
	fs.Int64Var(&cfg.Limits.MaxFitValues, "max-fit-values", daemon.DefaultMaxFitValues, "most training values (rows × columns) of one fit")
	fs.IntVar(&cfg.Limits.MaxActiveJobs, "max-active-jobs", daemon.DefaultMaxActiveJobs, "most fit jobs receiving, queued or running at once")
	fs.IntVar(&cfg.Limits.JobHistory, "job-history", daemon.DefaultJobHistory, "finished fit jobs kept in memory")
	fs.Var(&msgBytes, "max-message-bytes", "largest gRPC message received or sent (e.g. 64MiB)")
	fs.DurationVar(&cfg.ShutdownTimeout, "shutdown-timeout", daemon.DefaultShutdownTimeout, "time running calls get to finish on shutdown")
	fs.StringVar(&logLevel, "log-level", "info", "log level: debug, info, warn or error")
	var extra extraFlags
	addExtraFlags(fs, &cfg, &extra)
	addStoreFlags(fs, &cfg) // storeflags.go
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return exitOK
		}
		return exitUsage
	}
	if err := applyConfigSources(fs, os.LookupEnv); err != nil {
		fmt.Fprintf(stderr, "mixd serve: %v\n", err)
		return exitUsage
	}
	if err := extra.finish(&cfg); err != nil {
		fmt.Fprintf(stderr, "mixd serve: %v\n", err)
		return exitUsage
	}
	if err := checkStoreFlags(&cfg); err != nil {
		fmt.Fprintf(stderr, "mixd serve: %v\n", err)
		return exitUsage
	}
	if fs.NArg() > 0 {
		fmt.Fprintf(stderr, "mixd serve: unexpected argument %q\n", fs.Arg(0))
		return exitUsage
	}
	var level slog.Level
	if err := level.UnmarshalText([]byte(logLevel)); err != nil {
		fmt.Fprintf(stderr, "mixd serve: --log-level: %v\n", err)
		return exitUsage
	}
	for _, c := range []struct {
		flag string
		v    int64
	}{
		{"max-concurrent-fits", int64(cfg.MaxConcurrentFits)}, {"max-rows", cfg.Limits.MaxRows},
		{"max-dimension", cfg.Limits.MaxDimension}, {"max-components", cfg.Limits.MaxComponents},
		{"max-sample-count", cfg.Limits.MaxSampleCount}, {"max-fit-rows", cfg.Limits.MaxFitRows},
		{"max-fit-values", cfg.Limits.MaxFitValues}, {"max-active-jobs", int64(cfg.Limits.MaxActiveJobs)},
		{"job-history", int64(cfg.Limits.JobHistory)}, {"cache-bytes", int64(cache)},
	} {
		if c.v <= 0 {
			fmt.Fprintf(stderr, "mixd serve: --%s is %d, must be positive\n", c.flag, c.v)
			return exitUsage
		}
	}
	if msgBytes > 1<<31-1 {
		fmt.Fprintf(stderr, "mixd serve: --max-message-bytes is %d, at most %d\n", msgBytes, 1<<31-1)
		return exitUsage
	}
	cfg.CacheBytes = int64(cache)
	cfg.Limits.MaxMessageBytes = int(msgBytes)
	cfg.Logger = newLogger(extra.logFormat, stderr, level)
	cfg.Status = stderr
	cfg.BuiltIn = builtin.Names()

	ctx, stop := signal.NotifyContext(context.Background(), syscall.SIGINT, syscall.SIGTERM)
	defer stop()
	hup := make(chan os.Signal, 1)
	signal.Notify(hup, syscall.SIGHUP)
	defer signal.Stop(hup)
	reload := make(chan struct{}, 1)
	go func() {
		for range hup {
			select {
			case reload <- struct{}{}:
			default:
			}
		}
	}()
	cfg.Reload = reload

	start := time.Now()
	if err := daemon.Run(ctx, cfg); err != nil {
		fmt.Fprintf(stderr, "mixd: %v\n", err)
		return exitError
	}
	cfg.Logger.Info("exiting", "uptime", time.Since(start).Round(time.Millisecond))
	return exitOK
}
