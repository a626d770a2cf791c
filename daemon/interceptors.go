package daemon

import (
	"context"
	"crypto/rand"
	"encoding/hex"
	"log/slog"
	"regexp"
	"sync"
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

// callInfoKey carries a call's *callInfo in its context.
type callInfoKey struct{}

// callInfo is what the outermost interceptor knows about a call: its
// request id, its method and the state the inner interceptors record for
// the call log. One context value holds all of it, and the call's logger
// is built only when something logs: a successful call at the default
// level logs nothing, and building a logger with attributes costs about as
// much as classifying one row.
type callInfo struct {
	id, method string
	base       *slog.Logger
	state      callState

	once sync.Once
	log  *slog.Logger
}

// logger returns the call's logger: the base logger with request_id and
// method.
func (ci *callInfo) logger() *slog.Logger {
	ci.once.Do(func() { ci.log = ci.base.With("request_id", ci.id, "method", ci.method) })
	return ci.log
}

func callInfoFrom(ctx context.Context) *callInfo {
	ci, _ := ctx.Value(callInfoKey{}).(*callInfo)
	return ci
}

// LoggerFrom returns the logger of the call ctx belongs to (it carries the
// request id and the method), or fallback outside a call.
func LoggerFrom(ctx context.Context, fallback *slog.Logger) *slog.Logger {
	if ci := callInfoFrom(ctx); ci != nil {
		return ci.logger()
	}
	return fallback
}

// RequestID returns the request id of the call ctx belongs to, or "".
func RequestID(ctx context.Context) string {
	if ci := callInfoFrom(ctx); ci != nil {
		return ci.id
	}
	return ""
}

// callState is shared by a call's interceptors: the inner ones record what
// the outer call log reports.
type callState struct {
	token string // label of the bearer token, when tokens are in use
}

// callStateFrom returns the call state of the call ctx belongs to, or nil.
func callStateFrom(ctx context.Context) *callState {
	if ci := callInfoFrom(ctx); ci != nil {
		return &ci.state
	}
	return nil
}

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

// begin assigns the call's request id and records it, with the method,
// in the returned context.
func (c *callInterceptors) begin(ctx context.Context, method string) (context.Context, *callInfo) {
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
	ci := &callInfo{id: id, method: method, base: c.log}
	return context.WithValue(ctx, callInfoKey{}, ci), ci
}

// end logs the call's outcome: successful calls at level Debug, refused
// credentials at Warn, server faults (INTERNAL, UNKNOWN, DATA_LOSS) at
// Error, other failures at Info.
func (c *callInterceptors) end(ctx context.Context, ci *callInfo, start time.Time, err error) {
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
	if !c.log.Enabled(ctx, level) { // the call's logger has the same handler
		return
	}
	attrs := []slog.Attr{slog.String("code", code.String()), slog.Duration("duration", time.Since(start))}
	if p, ok := peer.FromContext(ctx); ok && p.Addr != nil {
		attrs = append(attrs, slog.String("peer", p.Addr.String()))
	}
	if t := ci.state.token; t != "" {
		attrs = append(attrs, slog.String("token", t))
	}
	if err != nil {
		attrs = append(attrs, slog.String("error", status.Convert(err).Message()))
	}
	ci.logger().LogAttrs(ctx, level, "call", attrs...)
}

func (c *callInterceptors) unaryRequestID(ctx context.Context, req any, info *grpc.UnaryServerInfo, h grpc.UnaryHandler) (any, error) {
	start := time.Now()
	ctx, ci := c.begin(ctx, info.FullMethod)
	_ = grpc.SetHeader(ctx, metadata.MD{RequestIDHeader: {ci.id}})
	resp, err := h(ctx, req)
	c.end(ctx, ci, start, err)
	return resp, err
}

func (c *callInterceptors) streamRequestID(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, h grpc.StreamHandler) error {
	start := time.Now()
	ctx, ci := c.begin(ss.Context(), info.FullMethod)
	_ = ss.SetHeader(metadata.MD{RequestIDHeader: {ci.id}})
	err := h(srv, &ctxStream{ServerStream: ss, ctx: ctx})
	c.end(ctx, ci, start, err)
	return err
}
