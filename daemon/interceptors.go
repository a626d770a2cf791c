package daemon

import (
	"context"
	"crypto/rand"
	"encoding/hex"
	"log/slog"
	"regexp"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/peer"
	"google.golang.org/grpc/status"
)

// RequestIDHeader is the metadata key of a call's request id. The daemon
// returns it in the response header of every call; a caller may send its
// own (1 to 64 letters, digits, '.', '_', ':' or '-'), which is then used
// instead of a new random one. Every log line about the call carries it as
// request_id.
const RequestIDHeader = "x-request-id"

// DefaultCallTimeout is the deadline the daemon gives a unary call that
// arrives without one. Streaming calls (Fit, CreateFitJob, WatchFitJob and
// the Score, Classify and Sample streams) get none: they last as long as
// their caller keeps them open.
const DefaultCallTimeout = 2 * time.Minute

var requestIDRE = regexp.MustCompile(`^[A-Za-z0-9._:-]{1,64}$`)

// loggerKey carries a call's logger in its context.
type loggerKey struct{}

// LoggerFrom returns the logger of the call ctx belongs to (it carries the
// request id and the method), or fallback outside a call.
func LoggerFrom(ctx context.Context, fallback *slog.Logger) *slog.Logger {
	if l, ok := ctx.Value(loggerKey{}).(*slog.Logger); ok {
		return l
	}
	return fallback
}

// RequestID returns the request id of the call ctx belongs to, or "".
func RequestID(ctx context.Context) string {
	id, _ := ctx.Value(requestIDKey{}).(string)
	return id
}

type requestIDKey struct{}

// callState is shared by a call's interceptors: the inner ones record what
// the outer call log reports.
type callState struct {
	token string // label of the bearer token, when tokens are in use
}

type callStateKey struct{}

// callInterceptors are the interceptors every call passes, outermost
// first: request id and call log, metrics (when on), bearer tokens (when
// configured), the default deadline (unary calls only).
type callInterceptors struct {
	log     *slog.Logger
	auth    *authenticator // nil: no tokens
	metrics *Metrics       // nil: no metrics
	timeout time.Duration  // <= 0: no default deadline
}

func (c *callInterceptors) unary() []grpc.UnaryServerInterceptor {
	out := []grpc.UnaryServerInterceptor{c.unaryRequestID}
	if c.metrics != nil {
		out = append(out, c.metrics.grpc.UnaryServerInterceptor())
	}
	if c.auth != nil {
		out = append(out, func(ctx context.Context, req any, info *grpc.UnaryServerInfo, h grpc.UnaryHandler) (any, error) {
			ctx, err := c.auth.check(ctx, info.FullMethod)
			if err != nil {
				return nil, err
			}
			return h(ctx, req)
		})
	}
	if c.timeout > 0 {
		out = append(out, func(ctx context.Context, req any, _ *grpc.UnaryServerInfo, h grpc.UnaryHandler) (any, error) {
			if _, ok := ctx.Deadline(); !ok {
				var cancel context.CancelFunc
				ctx, cancel = context.WithTimeout(ctx, c.timeout)
				defer cancel()
			}
			return h(ctx, req)
		})
	}
	return out
}

func (c *callInterceptors) stream() []grpc.StreamServerInterceptor {
	out := []grpc.StreamServerInterceptor{c.streamRequestID}
	if c.metrics != nil {
		out = append(out, c.metrics.grpc.StreamServerInterceptor())
	}
	if c.auth != nil {
		out = append(out, func(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, h grpc.StreamHandler) error {
			ctx, err := c.auth.check(ss.Context(), info.FullMethod)
			if err != nil {
				return err
			}
			return h(srv, &ctxStream{ServerStream: ss, ctx: ctx})
		})
	}
	return out
}

// ctxStream is a ServerStream with another context.
type ctxStream struct {
	grpc.ServerStream
	ctx context.Context
}

func (s *ctxStream) Context() context.Context { return s.ctx }

// begin assigns the call's request id and logger.
func (c *callInterceptors) begin(ctx context.Context, method string) (context.Context, string, *slog.Logger) {
	id := ""
	// ValueFromIncomingContext reads the one key without copying the
	// call's whole metadata (FromIncomingContext copies it).
	if v := metadata.ValueFromIncomingContext(ctx, RequestIDHeader); len(v) == 1 && requestIDRE.MatchString(v[0]) {
		id = v[0]
	}
	if id == "" {
		var b [8]byte
		_, _ = rand.Read(b[:]) // crypto/rand.Read does not fail
		id = hex.EncodeToString(b[:])
	}
	l := c.log.With("request_id", id, "method", method)
	ctx = context.WithValue(ctx, requestIDKey{}, id)
	ctx = context.WithValue(ctx, loggerKey{}, l)
	ctx = context.WithValue(ctx, callStateKey{}, &callState{})
	return ctx, id, l
}

// end logs the call's outcome: successful calls at level Debug, refused
// credentials at Warn, server faults (INTERNAL, UNKNOWN, DATA_LOSS) at
// Error, other failures at Info.
func (c *callInterceptors) end(ctx context.Context, l *slog.Logger, start time.Time, err error) {
	code := status.Code(err)
	level := slog.LevelInfo
	switch code {
	case codes.OK:
		level = slog.LevelDebug
	case codes.Unauthenticated, codes.PermissionDenied:
		level = slog.LevelWarn
	case codes.Internal, codes.Unknown, codes.DataLoss:
		level = slog.LevelError
	}
	if !l.Enabled(ctx, level) {
		return
	}
	attrs := []slog.Attr{slog.String("code", code.String()), slog.Duration("duration", time.Since(start))}
	if p, ok := peer.FromContext(ctx); ok && p.Addr != nil {
		attrs = append(attrs, slog.String("peer", p.Addr.String()))
	}
	if cs, ok := ctx.Value(callStateKey{}).(*callState); ok && cs.token != "" {
		t := cs.token
		attrs = append(attrs, slog.String("token", t))
	}
	if err != nil {
		attrs = append(attrs, slog.String("error", status.Convert(err).Message()))
	}
	l.LogAttrs(ctx, level, "call", attrs...)
}

func (c *callInterceptors) unaryRequestID(ctx context.Context, req any, info *grpc.UnaryServerInfo, h grpc.UnaryHandler) (any, error) {
	start := time.Now()
	ctx, id, l := c.begin(ctx, info.FullMethod)
	_ = grpc.SetHeader(ctx, metadata.Pairs(RequestIDHeader, id))
	resp, err := h(ctx, req)
	c.end(ctx, l, start, err)
	return resp, err
}

func (c *callInterceptors) streamRequestID(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, h grpc.StreamHandler) error {
	start := time.Now()
	ctx, id, l := c.begin(ss.Context(), info.FullMethod)
	_ = ss.SetHeader(metadata.Pairs(RequestIDHeader, id))
	err := h(srv, &ctxStream{ServerStream: ss, ctx: ctx})
	c.end(ctx, l, start, err)
	return err
}
