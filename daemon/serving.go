package daemon

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"net"
	"net/http"
	"os"
	"strings"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/health"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
)

// Status lines Run prints (to Config.Status) before ListeningPrefix when
// the extra listeners are on; tests and scripts parse them.
const (
	// MetricsPrefix starts the line naming the metrics address:
	// "mixd: metrics on 127.0.0.1:9313".
	MetricsPrefix = "mixd: metrics on "
	// HealthPrefix starts the line naming the health-only address:
	// "mixd: health on 0.0.0.0:7314".
	HealthPrefix = "mixd: health on "
)

// extras are the parts of serving around the API itself: TLS, bearer
// tokens, call interceptors, metrics, tracing and the extra listeners.
type extras struct {
	log     *slog.Logger
	tls     *tlsReloader   // nil: plain text
	auth    *authenticator // nil: no tokens
	metrics *Metrics       // nil: off
	status  *statusPage    // nil: off (statuspage.go)
	tracing *tracing       // nil: off
	timeout time.Duration

	metricsSrv *http.Server
	healthSrv  *grpc.Server
	done       []chan struct{}
}

// newExtras loads the TLS files and token file of cfg and makes the
// metrics. It fails on a configuration that cannot work.
func newExtras(cfg Config, log *slog.Logger) (*extras, error) {
	x := &extras{log: log, timeout: cfg.DefaultTimeout}
	if x.timeout == 0 {
		x.timeout = DefaultCallTimeout
	}
	if cfg.TLS.Enabled() {
		r, err := newTLSReloader(cfg.TLS)
		if err != nil {
			return nil, err
		}
		x.tls = r
	}
	if cfg.TokenFile != "" {
		a, err := newAuthenticator(cfg.TokenFile)
		if err != nil {
			return nil, err
		}
		x.auth = a
		if fi, err := os.Stat(cfg.TokenFile); err == nil && fi.Mode().Perm()&0o077 != 0 {
			log.Warn("the token file can be read by other users; restrict it to the daemon's user (chmod 600)", "path", cfg.TokenFile, "mode", fi.Mode().Perm().String())
		}
		if x.tls == nil && !isUnixAddress(cfg.Listen) && !isLoopback(cfg.Listen) {
			log.Warn("bearer tokens travel in plain text: serve TLS (--tls-cert, --tls-key) when listening beyond loopback", "listen", cfg.Listen)
		}
	}
	if cfg.MetricsListen != "" {
		x.metrics = NewMetrics()
	}
	if cfg.TraceFile != "" || cfg.TraceOTLP != "" {
		t, err := newTracing(cfg.TraceFile, cfg.TraceOTLP)
		if err != nil {
			return nil, err
		}
		x.tracing = t
	}
	return x, nil
}

// serverOptions are the gRPC server options of the API server.
func (x *extras) serverOptions() []grpc.ServerOption {
	ci := &callInterceptors{log: x.log, auth: x.auth, metrics: x.metrics, timeout: x.timeout}
	opts := []grpc.ServerOption{
		grpc.ChainUnaryInterceptor(ci.unary()...),
		grpc.ChainStreamInterceptor(ci.stream()...),
	}
	if x.tls != nil {
		opts = append(opts, grpc.Creds(credentials.NewTLS(x.tls.serverConfig())))
	}
	if x.tracing != nil {
		opts = append(opts, x.tracing.serverOption())
	}
	return opts
}

// reload reads the TLS files and the token file again (SIGHUP). A file
// that fails keeps the configuration in force; the failure is logged.
func (x *extras) reload() {
	if x.tls != nil {
		if err := x.tls.reload(); err != nil {
			x.metrics.reloadFailed("tls")
			x.log.Error("TLS reload failed; the certificates in force stay", "error", err)
		} else {
			x.log.Info("TLS certificates reloaded", "cert", x.tls.files.CertFile)
		}
	}
	if x.auth != nil {
		if err := x.auth.reload(); err != nil {
			x.metrics.reloadFailed("tokens")
			x.log.Error("token file reload failed; the tokens in force stay", "error", err)
		} else {
			x.log.Info("token file reloaded", "tokens", x.auth.tokens.Load().Len())
		}
	}
}

// startMetrics serves /metrics on addr and prints its address to status.
func (x *extras) startMetrics(addr string, status io.Writer) error {
	lis, err := net.Listen("tcp", addr)
	if err != nil {
		return fmt.Errorf("metrics: listen on %s: %w", addr, err)
	}
	mux := http.NewServeMux()
	mux.Handle("/metrics", x.metrics.Handler())
	if x.status != nil {
		mux.Handle(StatusPath, x.status)
	}
	x.metricsSrv = &http.Server{Handler: mux, ReadHeaderTimeout: 10 * time.Second}
	done := make(chan struct{})
	x.done = append(x.done, done)
	go func() {
		defer close(done)
		if err := x.metricsSrv.Serve(lis); err != nil && !errors.Is(err, http.ErrServerClosed) {
			x.log.Error("metrics listener stopped", "error", err)
		}
	}()
	fmt.Fprintf(status, "%s%s\n", MetricsPrefix, lis.Addr())
	x.log.Info("serving metrics", "address", lis.Addr().String())
	return nil
}

// startHealth serves only grpc.health.v1 (from hs), in plain text and
// without tokens, on the TCP address addr, for probes that cannot reach a
// Unix socket or speak TLS.
func (x *extras) startHealth(addr string, hs *health.Server, status io.Writer) error {
	if isUnixAddress(addr) {
		return fmt.Errorf("health listener: %q is not a TCP host:port", addr)
	}
	lis, err := net.Listen("tcp", addr)
	if err != nil {
		return fmt.Errorf("health listener: listen on %s: %w", addr, err)
	}
	x.healthSrv = grpc.NewServer()
	healthpb.RegisterHealthServer(x.healthSrv, hs)
	done := make(chan struct{})
	x.done = append(x.done, done)
	go func() {
		defer close(done)
		if err := x.healthSrv.Serve(lis); err != nil {
			x.log.Error("health listener stopped", "error", err)
		}
	}()
	fmt.Fprintf(status, "%s%s\n", HealthPrefix, lis.Addr())
	x.log.Info("serving health checks", "address", lis.Addr().String())
	return nil
}

// close stops the extra listeners and flushes traces.
func (x *extras) close() {
	if x.metricsSrv != nil {
		ctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
		_ = x.metricsSrv.Shutdown(ctx)
		cancel()
	}
	if x.healthSrv != nil {
		x.healthSrv.Stop()
	}
	for _, d := range x.done {
		<-d
	}
	if x.tracing != nil {
		if err := x.tracing.close(); err != nil {
			x.log.Warn("flushing traces", "error", err)
		}
	}
}

// isUnixAddress reports whether a listen address names a Unix socket
// (see Config.Listen).
func isUnixAddress(addr string) bool {
	return strings.HasPrefix(addr, "unix:") || strings.Contains(addr, "/")
}

// isLoopback reports whether a TCP listen address is a loopback address
// (or empty, meaning the default, 127.0.0.1).
func isLoopback(addr string) bool {
	if addr == "" {
		return true
	}
	host, _, err := net.SplitHostPort(addr)
	if err != nil {
		return false
	}
	if host == "localhost" {
		return true
	}
	ip := net.ParseIP(host)
	return ip != nil && ip.IsLoopback()
}
