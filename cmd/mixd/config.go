package main

import (
	"bytes"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"log/slog"
	"os"
	"sort"
	"strings"

	"github.com/mixd-dev/mixd/daemon"
)

// Configuration sources of `mixd serve`, highest precedence first:
//
//  1. command-line flags;
//  2. environment variables: MIXD_ followed by the flag name in upper case
//     with '-' as '_' (--max-rows is MIXD_MAX_ROWS);
//  3. the config file named by --config (or MIXD_CONFIG): one JSON object
//     whose keys are flag names without the dashes and whose values are
//     strings, numbers or booleans, written as on the command line
//     ({"listen": "unix:/run/mixd/mixd.sock", "max-rows": 100000,
//     "cache-bytes": "1GiB"});
//  4. the defaults.
//
// An unknown key in the file, a value that does not parse, or a file that
// is not one JSON object is an error naming the file or variable and the
// setting; mixd then exits with status 2 before it opens anything.
// Environment variables starting with MIXD_ that name no flag are ignored
// (mixd's own child processes and tests use a few).

// configFlag names the flag that names the config file.
const configFlag = "config"

// envName is the environment variable of a flag.
func envName(flagName string) string {
	return "MIXD_" + strings.ToUpper(strings.ReplaceAll(flagName, "-", "_"))
}

// applyConfigSources sets every flag of fs that the command line did not set
// from the environment (lookupEnv) or, failing that, from the config file.
func applyConfigSources(fs *flag.FlagSet, lookupEnv func(string) (string, bool)) error {
	onCommandLine := map[string]bool{}
	fs.Visit(func(f *flag.Flag) { onCommandLine[f.Name] = true })

	var path string
	if f := fs.Lookup(configFlag); f != nil {
		path = f.Value.String()
		if !onCommandLine[configFlag] {
			if v, ok := lookupEnv(envName(configFlag)); ok {
				path = v
			}
		}
	}
	file := map[string]string{}
	if path != "" {
		var err error
		if file, err = readConfigFile(path, fs); err != nil {
			return err
		}
	}
	var errs []error
	fs.VisitAll(func(f *flag.Flag) {
		if onCommandLine[f.Name] || f.Name == configFlag {
			return
		}
		if v, ok := lookupEnv(envName(f.Name)); ok {
			if err := fs.Set(f.Name, v); err != nil {
				errs = append(errs, fmt.Errorf("environment variable %s=%q: %v", envName(f.Name), v, err))
			}
			return
		}
		if v, ok := file[f.Name]; ok {
			if err := fs.Set(f.Name, v); err != nil {
				errs = append(errs, fmt.Errorf("config file %s: %q: %q: %v", path, f.Name, v, err))
			}
		}
	})
	return errors.Join(errs...)
}

// readConfigFile reads a JSON config file into flag values, refusing keys
// that name no flag of fs.
func readConfigFile(path string, fs *flag.FlagSet) (map[string]string, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("config file: %w", err)
	}
	return parseConfig(b, path, fs)
}

// parseConfig parses a config file's contents (see above).
func parseConfig(b []byte, path string, fs *flag.FlagSet) (map[string]string, error) {
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.UseNumber()
	var raw map[string]any
	if err := dec.Decode(&raw); err != nil {
		return nil, fmt.Errorf("config file %s: not a JSON object: %v", path, err)
	}
	if raw == nil {
		return nil, fmt.Errorf("config file %s: not a JSON object", path)
	}
	if _, err := dec.Token(); !errors.Is(err, io.EOF) {
		return nil, fmt.Errorf("config file %s: text after the JSON object", path)
	}
	out := make(map[string]string, len(raw))
	keys := make([]string, 0, len(raw))
	for k := range raw {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		if k == configFlag || fs.Lookup(k) == nil {
			return nil, fmt.Errorf("config file %s: unknown setting %q (the settings are the flag names of mixd serve, without dashes; see mixd serve -h)", path, k)
		}
		switch v := raw[k].(type) {
		case string:
			out[k] = v
		case json.Number:
			out[k] = v.String()
		case bool:
			out[k] = fmt.Sprint(v)
		default:
			return nil, fmt.Errorf("config file %s: %q: want a string, number or boolean", path, k)
		}
	}
	return out, nil
}

// extraFlags are the serve flags of security, observability and
// configuration (the rest are in main.go).
type extraFlags struct {
	config    string
	logFormat string
	fitMemory byteSize
}

// addExtraFlags registers them on fs, writing into cfg and x.
func addExtraFlags(fs *flag.FlagSet, cfg *daemon.Config, x *extraFlags) {
	x.fitMemory = byteSize(daemon.DefaultMaxFitMemory)
	fs.StringVar(&x.config, configFlag, "", "JSON config file of serve settings (keys are flag names); flags and MIXD_* environment variables override it")
	fs.StringVar(&x.logFormat, "log-format", "text", "log format: text or json")
	fs.StringVar(&cfg.TLS.CertFile, "tls-cert", "", "PEM certificate chain: serve TLS (needs --tls-key); reloaded on SIGHUP")
	fs.StringVar(&cfg.TLS.KeyFile, "tls-key", "", "PEM private key of --tls-cert")
	fs.StringVar(&cfg.TLS.ClientCAFile, "tls-client-ca", "", "PEM CA certificates: require client certificates they sign (mutual TLS)")
	fs.StringVar(&cfg.TokenFile, "token-file", "", "bearer token file (lines of: read|full TOKEN [LABEL]); reloaded on SIGHUP")
	fs.DurationVar(&cfg.DefaultTimeout, "default-timeout", daemon.DefaultCallTimeout, "deadline of unary calls that arrive without one (0s: none)")
	fs.StringVar(&cfg.MetricsListen, "metrics-listen", "", "serve Prometheus metrics at /metrics on this host:port (off when empty)")
	fs.BoolVar(&cfg.StatusPage, "status-page", false, "serve a read-only HTML status page at /status on --metrics-listen (behind --token-file tokens when set)")
	fs.StringVar(&cfg.HealthListen, "health-listen", "", "serve only gRPC health checks, plain text and without tokens, on this host:port (for probes)")
	fs.StringVar(&cfg.PluginManifest, "plugin-manifest", "", "manifest pinning the SHA-256 of every executable in --plugin-dir (lines of: FILE sha256:HEX)")
	fs.StringVar(&cfg.TraceFile, "trace-file", "", "write an OpenTelemetry span per call to this file as JSON (off when empty)")
	fs.StringVar(&cfg.TraceOTLP, "trace-otlp", "", "send an OpenTelemetry span per call to the OTLP/gRPC collector at this URL: http://HOST:PORT (plain text) or https://HOST:PORT (TLS) (off when empty)")
	fs.Var(&x.fitMemory, "max-fit-memory", "largest estimated memory of one fit (e.g. 4GiB)")
}

// finish checks the extra flags and completes cfg. A zero default timeout
// means none.
func (x *extraFlags) finish(cfg *daemon.Config) error {
	if cfg.DefaultTimeout < 0 {
		return fmt.Errorf("--default-timeout is %v, must not be negative", cfg.DefaultTimeout)
	}
	if cfg.DefaultTimeout == 0 {
		cfg.DefaultTimeout = -1 // daemon.Config: negative means none
	}
	if x.fitMemory <= 0 {
		return fmt.Errorf("--max-fit-memory is %d, must be positive", x.fitMemory)
	}
	cfg.Limits.MaxFitMemory = int64(x.fitMemory)
	if err := cfg.TLS.Validate(); err != nil {
		return err
	}
	if cfg.TraceOTLP != "" {
		if err := daemon.CheckOTLPEndpoint(cfg.TraceOTLP); err != nil {
			return err
		}
	}
	if cfg.PluginManifest != "" && cfg.PluginDir == "" {
		return errors.New("--plugin-manifest pins executables of --plugin-dir; set --plugin-dir too")
	}
	switch x.logFormat {
	case "text", "json":
	default:
		return fmt.Errorf("--log-format is %q, want text or json", x.logFormat)
	}
	return nil
}

// newLogger returns the daemon's logger in the chosen format.
func newLogger(format string, w io.Writer, level slog.Level) *slog.Logger {
	opts := &slog.HandlerOptions{Level: level}
	if format == "json" {
		return slog.New(slog.NewJSONHandler(w, opts))
	}
	return slog.New(slog.NewTextHandler(w, opts))
}
