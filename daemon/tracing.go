package daemon

import (
	"context"
	"fmt"
	"os"
	"time"

	"go.opentelemetry.io/contrib/instrumentation/google.golang.org/grpc/otelgrpc"
	"go.opentelemetry.io/otel/attribute"
	"go.opentelemetry.io/otel/exporters/stdout/stdouttrace"
	metricnoop "go.opentelemetry.io/otel/metric/noop"
	"go.opentelemetry.io/otel/propagation"
	"go.opentelemetry.io/otel/sdk/resource"
	sdktrace "go.opentelemetry.io/otel/sdk/trace"
	"google.golang.org/grpc"
)

// tracing records an OpenTelemetry span for every call (otelgrpc) and
// writes finished spans, one JSON object per span, to a file (mixd serve
// --trace-file). A caller's W3C trace context ("traceparent" metadata) is
// honoured, so the daemon's spans join the caller's trace. Nothing is
// global: the tracer provider belongs to the daemon. Exporting to a
// collector (OTLP) is not built in; a collector can tail the file.
type tracing struct {
	file *os.File
	tp   *sdktrace.TracerProvider
}

// newTracing opens (appends to) path and starts the tracer provider.
func newTracing(path string) (*tracing, error) {
	f, err := os.OpenFile(path, os.O_WRONLY|os.O_CREATE|os.O_APPEND, 0o600)
	if err != nil {
		return nil, fmt.Errorf("trace file: %w", err)
	}
	exp, err := stdouttrace.New(stdouttrace.WithWriter(f))
	if err != nil {
		f.Close()
		return nil, fmt.Errorf("trace exporter: %w", err)
	}
	res := resource.NewSchemaless(attribute.String("service.name", "mixd"))
	tp := sdktrace.NewTracerProvider(sdktrace.WithBatcher(exp, sdktrace.WithBatchTimeout(time.Second)), sdktrace.WithResource(res))
	return &tracing{file: f, tp: tp}, nil
}

// serverOption instruments a gRPC server.
func (t *tracing) serverOption() grpc.ServerOption {
	return grpc.StatsHandler(otelgrpc.NewServerHandler(
		otelgrpc.WithTracerProvider(t.tp),
		otelgrpc.WithMeterProvider(metricnoop.NewMeterProvider()),
		otelgrpc.WithPropagators(propagation.TraceContext{}),
	))
}

// close flushes the spans and closes the file.
func (t *tracing) close() error {
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
	defer cancel()
	err := t.tp.Shutdown(ctx)
	if cerr := t.file.Close(); err == nil {
		err = cerr
	}
	return err
}
