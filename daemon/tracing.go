package daemon

import (
	"context"
	"fmt"
	"net/url"
	"os"
	"time"

	"go.opentelemetry.io/contrib/instrumentation/google.golang.org/grpc/otelgrpc"
	"go.opentelemetry.io/otel/attribute"
	"go.opentelemetry.io/otel/exporters/otlp/otlptrace/otlptracegrpc"
	"go.opentelemetry.io/otel/exporters/stdout/stdouttrace"
	metricnoop "go.opentelemetry.io/otel/metric/noop"
	"go.opentelemetry.io/otel/propagation"
	"go.opentelemetry.io/otel/sdk/resource"
	sdktrace "go.opentelemetry.io/otel/sdk/trace"
	"google.golang.org/grpc"
)

// tracing records an OpenTelemetry span for every call (otelgrpc) and
// exports finished spans to a file, one JSON object per span (mixd serve
// --trace-file), to an OTLP collector over gRPC (--trace-otlp), or both. A
// caller's W3C trace context ("traceparent" metadata) is honoured, so the
// daemon's spans join the caller's trace. Nothing is global: the tracer
// provider belongs to the daemon.
type tracing struct {
	file *os.File // nil without --trace-file
	tp   *sdktrace.TracerProvider
}

// newTracing starts the tracer provider with an exporter for each of path
// (a file appended to) and otlpURL (a collector's OTLP/gRPC endpoint,
// http://HOST:PORT for plain text or https://HOST:PORT for TLS with the
// system's roots) that is set. The OTLP exporter connects lazily: a
// collector that is down costs dropped spans (reported on standard error
// by the OpenTelemetry SDK), never a failed call.
func newTracing(path, otlpURL string) (*tracing, error) {
	t := &tracing{}
	res := resource.NewSchemaless(attribute.String("service.name", "mixd"))
	opts := []sdktrace.TracerProviderOption{sdktrace.WithResource(res)}
	if path != "" {
		f, err := os.OpenFile(path, os.O_WRONLY|os.O_CREATE|os.O_APPEND, 0o600)
		if err != nil {
			return nil, fmt.Errorf("trace file: %w", err)
		}
		exp, err := stdouttrace.New(stdouttrace.WithWriter(f))
		if err != nil {
			f.Close()
			return nil, fmt.Errorf("trace exporter: %w", err)
		}
		t.file = f
		opts = append(opts, sdktrace.WithBatcher(exp, sdktrace.WithBatchTimeout(time.Second)))
	}
	if otlpURL != "" {
		if err := CheckOTLPEndpoint(otlpURL); err != nil {
			t.closeFile()
			return nil, err
		}
		exp, err := otlptracegrpc.New(context.Background(), otlptracegrpc.WithEndpointURL(otlpURL))
		if err != nil {
			t.closeFile()
			return nil, fmt.Errorf("trace exporter (OTLP %s): %w", otlpURL, err)
		}
		opts = append(opts, sdktrace.WithBatcher(exp, sdktrace.WithBatchTimeout(time.Second)))
	}
	t.tp = sdktrace.NewTracerProvider(opts...)
	return t, nil
}

// CheckOTLPEndpoint checks a --trace-otlp value: an http:// or https://
// URL with a host and port and nothing else (the OTLP/gRPC exporter takes
// the scheme to choose plain text or TLS, and has no use for a path).
func CheckOTLPEndpoint(s string) error {
	u, err := url.Parse(s)
	switch {
	case err != nil || (u.Scheme != "http" && u.Scheme != "https"):
		return fmt.Errorf("--trace-otlp %q: want http://HOST:PORT (plain text) or https://HOST:PORT (TLS)", s)
	case u.Hostname() == "" || u.Port() == "":
		return fmt.Errorf("--trace-otlp %q: give the collector's host and port, e.g. http://127.0.0.1:4317", s)
	case u.User != nil || (u.Path != "" && u.Path != "/") || u.RawQuery != "" || u.Fragment != "":
		return fmt.Errorf("--trace-otlp %q: only a scheme, host and port are allowed", s)
	}
	return nil
}

func (t *tracing) closeFile() {
	if t.file != nil {
		t.file.Close()
	}
}

// serverOption instruments a gRPC server.
func (t *tracing) serverOption() grpc.ServerOption {
	return grpc.StatsHandler(otelgrpc.NewServerHandler(
		otelgrpc.WithTracerProvider(t.tp),
		otelgrpc.WithMeterProvider(metricnoop.NewMeterProvider()),
		otelgrpc.WithPropagators(propagation.TraceContext{}),
	))
}

// close flushes the spans (to the collector for at most 5 seconds) and
// closes the file.
func (t *tracing) close() error {
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
	defer cancel()
	err := t.tp.Shutdown(ctx)
	if t.file != nil {
		if cerr := t.file.Close(); err == nil {
			err = cerr
		}
	}
	return err
}
