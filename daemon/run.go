package daemon

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"net"
	"os"
	"runtime"
	"runtime/debug"
	"strings"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/health"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/reflection"
	"google.golang.org/grpc/status"

	"github.com/mixd-dev/mixd/daemon/fitterhost"
	"github.com/mixd-dev/mixd/daemon/store"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// Serving defaults.
const (
	// DefaultListen is the default listen address: loopback only.
	DefaultListen = "127.0.0.1:7313"
	// DefaultDataDir is the default model directory, relative to the
	// working directory.
	DefaultDataDir = "mixd-data"
	// DefaultShutdownTimeout is how long a shutdown waits for running calls
	// before it stops them.
	DefaultShutdownTimeout = 10 * time.Second
)

// ListeningPrefix starts the line Run prints once it accepts connections:
// "mixd: listening on 127.0.0.1:41234" (TCP) or
// "mixd: listening on unix:/path/to/socket". Tests and scripts parse it.
const ListeningPrefix = "mixd: listening on "

// Config configures Run.
type Config struct {
	// Listen is "host:port" (TCP; port 0 picks a free port) or a Unix
	// socket: "unix:/path", or any address containing '/'. Default
	// DefaultListen.
	Listen string
	// DataDir is the model directory; default DefaultDataDir.
	DataDir string
	// PluginDir holds external fitter executables; empty means none.
	PluginDir string
	// CacheBytes is the model cache budget; 0 means DefaultCacheBytes.
	CacheBytes int64
	// MaxConcurrentFits; 0 means DefaultMaxConcurrentFits.
	MaxConcurrentFits int
	// Limits bound requests; zero fields take their defaults.
	Limits Limits
	// ShutdownTimeout; 0 means DefaultShutdownTimeout.
	ShutdownTimeout time.Duration
	// Logger receives the log; nil means text to stderr at level Info.
	Logger *slog.Logger
	// Status receives the "listening on" line; nil means stderr.
	Status io.Writer
	// Reload, when non-nil, triggers a rescan of the plugin directory on
	// every receive (cmd/mixd sends on SIGHUP).
	Reload <-chan struct{}
	// BuiltIn names the fitters compiled into the executable (cmd/mixd
	// passes builtin.Names()).
	BuiltIn []string
	// Executable and FitterArgs launch built-in fitters: Executable (default
	// os.Executable()) is run with FitterArgs(name) (default
	// ["fitter", name]).
	Executable string
	FitterArgs func(name string) []string

	// Store and Host, when set, are used instead of opening DataDir and
	// starting a fitter host (tests); Run does not close them.
	Store store.Store
	Host  FitterHost

	// StoreURL, when set, selects the PostgreSQL model store at this
	// postgres:// URL instead of DataDir, shared with other daemons
	// (replica.go, storeopen.go).
	StoreURL string
	// Replica configures sharing with other daemons (shared stores only).
	Replica ReplicaOptions

	// Security and observability (serving.go, auth.go, tlsconfig.go,
	// metrics.go, tracing.go). Zero values leave each off.

	// TLS serves the API over TLS or mutual TLS; reloaded on Reload.
	TLS TLSFiles
	// TokenFile is a bearer token file (auth.go); reloaded on Reload.
	TokenFile string
	// DefaultTimeout is the deadline of unary calls that arrive without
	// one; 0 means DefaultCallTimeout, negative means none.
	DefaultTimeout time.Duration
	// MetricsListen, when set, serves Prometheus metrics at /metrics on
	// this TCP address.
	MetricsListen string
	// StatusPage serves a read-only HTML status page at /status on
	// MetricsListen (statuspage.go); it needs MetricsListen.
	StatusPage bool
	// HealthListen, when set, serves grpc.health.v1 alone, in plain text
	// and without tokens, on this TCP address (for probes).
	HealthListen string
	// PluginManifest pins the SHA-256 of external fitters
	// (fitterhost.Config.Manifest).
	PluginManifest string
	// TraceFile, when set, records an OpenTelemetry span per call in this
	// file (JSON, one span per object).
	TraceFile string
	// TraceOTLP, when set, sends an OpenTelemetry span per call to the OTLP
	// collector at this gRPC endpoint: http://HOST:PORT (plain text) or
	// https://HOST:PORT (TLS). It may be combined with TraceFile.
	TraceOTLP string
}

// Run serves the mixd API until ctx is done, then shuts down gracefully:
// health turns NOT_SERVING, running calls get ShutdownTimeout to finish
// before they are stopped, jobs are cancelled, the fitter processes are
// stopped and the store is closed.
func Run(ctx context.Context, cfg Config) (err error) {
	log := cfg.Logger
	if log == nil {
		log = slog.New(slog.NewTextHandler(os.Stderr, nil))
	}
	if cfg.Status == nil {
		cfg.Status = os.Stderr
	}
	if err := cfg.Limits.Validate(); err != nil {
		return err
	}
	lim := cfg.Limits.withDefaults()
	ext, err := newExtras(cfg, log)
	if err != nil {
		return err
	}
	defer ext.close()
	timeout := cfg.ShutdownTimeout
	if timeout <= 0 {
		timeout = DefaultShutdownTimeout
	}

	st := cfg.Store
	if st == nil && cfg.StoreURL != "" {
		if st, err = openSharedStore(ctx, cfg.StoreURL, log); err != nil {
			return err
		}
		defer func() {
			if cerr := st.Close(); cerr != nil && err == nil {
				err = fmt.Errorf("close store: %w", cerr)
			}
		}()
	}
	if st == nil {
		dir := cfg.DataDir
		if dir == "" {
			dir = DefaultDataDir
		}
		ds, err := store.OpenDir(dir, store.WithLogger(log))
		if err != nil {
			return fmt.Errorf("open data directory %s: %w", dir, err)
		}
		st = ds
		defer func() {
			if cerr := st.Close(); cerr != nil && err == nil {
				err = fmt.Errorf("close store: %w", cerr)
			}
		}()
	}
	host := cfg.Host
	if host == nil {
		exe := cfg.Executable
		if exe == "" {
			if exe, err = os.Executable(); err != nil {
				return fmt.Errorf("find the mixd executable for built-in fitters: %w", err)
			}
		}
		args := cfg.FitterArgs
		if args == nil {
			args = func(name string) []string { return []string{"fitter", name} }
		}
		hcfg := fitterhost.Config{
			SelfExecutable: exe,
			SelfArgs:       args,
			BuiltIn:        cfg.BuiltIn,
			PluginDir:      cfg.PluginDir,
			Logger:         log,
			Manifest:       cfg.PluginManifest,
		}
		if ext.metrics != nil {
			hcfg.Hooks = ext.metrics.fitterHooks()
		}
		h, err := fitterhost.New(hcfg)
		if err != nil {
			return fmt.Errorf("start fitter host: %w", err)
		}
		host = h
		defer func() {
			if cerr := h.Close(); cerr != nil {
				log.Warn("closing the fitter host", "error", cerr)
			}
		}()
	}

	srv, err := NewServer(Options{
		Store: st, Host: host, Limits: lim, CacheBytes: cfg.CacheBytes,
		MaxConcurrentFits: cfg.MaxConcurrentFits, Logger: log, Replica: cfg.Replica,
	})
	if err != nil {
		return err
	}
	defer srv.Close()
	if ext.metrics != nil {
		ext.metrics.watchServer(srv)
	}
	if cfg.StatusPage {
		if ext.metrics == nil {
			return fmt.Errorf("status page: it is served on the metrics listener: set --metrics-listen too")
		}
		ext.status = newStatusPage(srv, ext.auth, log)
	}

	lis, addr, err := Listen(cfg.Listen)
	if err != nil {
		return err
	}
	gs := NewGRPCServer(srv, lim, log, ext.serverOptions()...)
	hs := health.NewServer()
	healthpb.RegisterHealthServer(gs, hs)
	hs.SetServingStatus("", healthpb.HealthCheckResponse_SERVING)
	hs.SetServingStatus(mixdv1.MixtureService_ServiceDesc.ServiceName, healthpb.HealthCheckResponse_SERVING)
	reflection.Register(gs)
	if ext.metrics != nil {
		ext.metrics.grpc.InitializeMetrics(gs)
		if err := ext.startMetrics(cfg.MetricsListen, cfg.Status); err != nil {
			lis.Close()
			return err
		}
	}
	if cfg.HealthListen != "" {
		if err := ext.startHealth(cfg.HealthListen, hs, cfg.Status); err != nil {
			lis.Close()
			return err
		}
	}

	serveErr := make(chan error, 1)
	go func() { serveErr <- gs.Serve(lis) }()
	log.Info("serving", "address", addr, "data_dir", cfg.DataDir, "plugin_dir", cfg.PluginDir)
	fmt.Fprintf(cfg.Status, "%s%s\n", ListeningPrefix, addr)

	if cfg.Reload != nil {
		go func() {
			for {
				select {
				case <-ctx.Done():
					return
				case _, ok := <-cfg.Reload:
					if !ok {
						return
					}
					ext.reload()
					problems, err := host.Reload(ctx)
					if err != nil {
						ext.metrics.reloadFailed("fitters")
						log.Error("reload fitters", "error", err)
					}
					for _, p := range problems {
						log.Warn("fitter not loaded", "problem", p)
					}
					log.Info("fitters reloaded", "fitters", len(host.List()))
				}
			}
		}()
	}

	select {
	case <-ctx.Done():
	case err := <-serveErr:
		hs.Shutdown()
		return fmt.Errorf("serve: %w", err)
	}
	log.Info("shutting down", "timeout", timeout)
	hs.Shutdown() // every service NOT_SERVING
	stopped := make(chan struct{})
	go func() {
		gs.GracefulStop()
		close(stopped)
	}()
	select {
	case <-stopped:
	case <-time.After(timeout):
		log.Warn("calls still running after the shutdown timeout; stopping them")
		gs.Stop()
		<-stopped
	}
	srv.Close()
	log.Info("stopped")
	return nil
}

// NewGRPCServer returns a gRPC server with the message limits of lim,
// panic recovery, and srv registered. Interceptors in extra run outside
// (before) the panic recovery.
func NewGRPCServer(srv mixdv1.MixtureServiceServer, lim Limits, log *slog.Logger, extra ...grpc.ServerOption) *grpc.Server {
	lim = lim.withDefaults()
	gs := grpc.NewServer(append(extra,
		// Long-lived goroutines that keep their grown stacks: with a
		// fresh goroutine per call, growing its stack was about an eighth
		// of the daemon's CPU under many concurrent small calls (see
		// DEVELOPERS.md, Benchmarks). Calls beyond the workers get a
		// goroutine of their own as before. (An experimental grpc-go
		// option; without it the server behaves the same, only slower.)
		grpc.NumStreamWorkers(uint32(max(64, 4*runtime.GOMAXPROCS(0)))),
		grpc.MaxRecvMsgSize(lim.MaxMessageBytes),
		grpc.MaxSendMsgSize(lim.MaxMessageBytes),
		grpc.ChainUnaryInterceptor(func(ctx context.Context, req any, info *grpc.UnaryServerInfo, h grpc.UnaryHandler) (resp any, err error) {
			defer recoverCall(log, info.FullMethod, &err)
			return h(ctx, req)
		}),
		grpc.ChainStreamInterceptor(func(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, h grpc.StreamHandler) (err error) {
			defer recoverCall(log, info.FullMethod, &err)
			return h(srv, ss)
		}),
	)...)
	mixdv1.RegisterMixtureServiceServer(gs, srv)
	return gs
}

// recoverCall turns a panic in a handler into INTERNAL and logs it.
func recoverCall(log *slog.Logger, method string, err *error) {
	if r := recover(); r != nil {
		log.Error("panic in call", "method", method, "panic", r, "stack", string(debug.Stack()))
		*err = status.Errorf(codes.Internal, "internal error in %s: %v", method, r)
	}
}

// Listen opens the listener for addr (see Config.Listen) and returns it
// with the address to print: "host:port" or "unix:/path". A stale Unix
// socket file (nobody accepting on it) is removed first; the new socket is
// made accessible to its owner only (0600).
func Listen(addr string) (net.Listener, string, error) {
	if addr == "" {
		addr = DefaultListen
	}
	path, isUnix := strings.CutPrefix(addr, "unix:")
	if !isUnix && strings.Contains(addr, "/") {
		path, isUnix = addr, true
	}
	if !isUnix {
		lis, err := net.Listen("tcp", addr)
		if err != nil {
			return nil, "", fmt.Errorf("listen on %s: %w", addr, err)
		}
		return lis, lis.Addr().String(), nil
	}
	if path == "" {
		return nil, "", fmt.Errorf("listen: %q has an empty socket path", addr)
	}
	if fi, err := os.Lstat(path); err == nil {
		if fi.Mode()&os.ModeSocket == 0 {
			return nil, "", fmt.Errorf("listen on unix:%s: the file exists and is not a socket", path)
		}
		if c, err := net.DialTimeout("unix", path, 500*time.Millisecond); err == nil {
			c.Close()
			return nil, "", fmt.Errorf("listen on unix:%s: another process is accepting connections on it", path)
		}
		if err := os.Remove(path); err != nil {
			return nil, "", fmt.Errorf("remove stale socket %s: %w", path, err)
		}
	} else if !errors.Is(err, os.ErrNotExist) {
		return nil, "", fmt.Errorf("listen on unix:%s: %w", path, err)
	}
	lis, err := net.Listen("unix", path)
	if err != nil {
		return nil, "", fmt.Errorf("listen on unix:%s: %w", path, err)
	}
	if err := os.Chmod(path, 0o600); err != nil {
		lis.Close()
		return nil, "", fmt.Errorf("restrict socket %s to its owner: %w", path, err)
	}
	return lis, "unix:" + path, nil
}
