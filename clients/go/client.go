// Package mixdclient is the Go client of the mixd daemon.
//
// It wraps the generated gRPC stubs of package mixdv1 with calls that take
// and return plain Go values: matrices travel as little-endian float64 bytes,
// batches larger than one gRPC message are split into chunks and sent over
// the streaming RPCs automatically, pages of lists are followed, and unary
// calls get a default deadline when the caller's context has none.
//
// Errors returned by the daemon keep their gRPC status through the context
// this package adds: status.Code(err) gives the daemon's code, and
// StatusOf(err).Message() the daemon's own message.
package mixdclient

import (
	"context"
	"errors"
	"fmt"
	"strings"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// DefaultTimeout is the deadline given to unary calls (and to the unary
// steps of list calls that follow pages) when the caller's context has none.
// Fits, watches and streamed batches get no default deadline.
const DefaultTimeout = 30 * time.Second

// DefaultChunkBytes is the largest payload, in bytes of matrix data, that
// one request message carries. It keeps every message below gRPC's default
// 4 MiB receive limit with room for the message's other fields.
const DefaultChunkBytes = 4<<20 - 64<<10

// DefaultMaxReceiveBytes is the largest response message the client accepts.
// Responses can be wider than requests (per-component outputs), so the
// limit is well above the request chunk size.
const DefaultMaxReceiveBytes = 1 << 30

// Client is a connection to one mixd daemon. It is safe for concurrent use.
type Client struct {
	conn       *grpc.ClientConn
	svc        mixdv1.MixtureServiceClient
	timeout    time.Duration
	chunkBytes int
}

type config struct {
	timeout         time.Duration
	chunkBytes      int
	maxReceiveBytes int
	dialOptions     []grpc.DialOption
}

// Option configures a Client made by Dial.
type Option func(*config)

// WithTimeout sets the deadline of unary calls made with a context that has
// none. Zero or negative disables the default deadline.
func WithTimeout(d time.Duration) Option {
	return func(c *config) { c.timeout = d }
}

// WithChunkBytes sets the largest amount of matrix data, in bytes, sent in
// one request message. Values below 1024 are raised to 1024.
func WithChunkBytes(n int) Option {
	return func(c *config) { c.chunkBytes = max(n, 1024) }
}

// WithMaxReceiveBytes sets the largest response message the client accepts.
func WithMaxReceiveBytes(n int) Option {
	return func(c *config) { c.maxReceiveBytes = n }
}

// WithDialOptions adds gRPC dial options, for example transport credentials
// (the default is a plain-text connection, meant for 127.0.0.1 and Unix
// sockets).
func WithDialOptions(opts ...grpc.DialOption) Option {
	return func(c *config) { c.dialOptions = append(c.dialOptions, opts...) }
}

// Dial connects to the daemon at target: "host:port" for TCP, or
// "unix:/path/to/socket" for a Unix socket. The connection is made lazily;
// an unreachable daemon shows up as an UNAVAILABLE error on the first call.
func Dial(target string, opts ...Option) (*Client, error) {
	cfg := config{
		timeout:         DefaultTimeout,
		chunkBytes:      DefaultChunkBytes,
		maxReceiveBytes: DefaultMaxReceiveBytes,
	}
	for _, o := range opts {
		o(&cfg)
	}
	t, err := normalizeTarget(target)
	if err != nil {
		return nil, err
	}
	dopts := []grpc.DialOption{
		grpc.WithTransportCredentials(insecure.NewCredentials()),
		grpc.WithDefaultCallOptions(grpc.MaxCallRecvMsgSize(cfg.maxReceiveBytes)),
	}
	dopts = append(dopts, cfg.dialOptions...)
	conn, err := grpc.NewClient(t, dopts...)
	if err != nil {
		return nil, fmt.Errorf("mixdclient: dial %q: %w", target, err)
	}
	return &Client{
		conn:       conn,
		svc:        mixdv1.NewMixtureServiceClient(conn),
		timeout:    cfg.timeout,
		chunkBytes: cfg.chunkBytes,
	}, nil
}

// normalizeTarget turns the addresses mixd prints and accepts into gRPC
// targets: "unix:/p" and "unix:///p" stay as they are, a bare "host:port"
// is resolved without DNS lookups of IP literals.
func normalizeTarget(target string) (string, error) {
	target = strings.TrimSpace(target)
	switch {
	case target == "":
		return "", errors.New("mixdclient: empty address (want host:port or unix:/path)")
	case strings.HasPrefix(target, "unix:"):
		if strings.TrimPrefix(target, "unix:") == "" {
			return "", fmt.Errorf("mixdclient: address %q has no socket path", target)
		}
		return target, nil
	case strings.Contains(target, "://"):
		return target, nil
	}
	return "passthrough:///" + target, nil
}

// Close closes the connection. Calls in flight fail with CANCELED.
func (c *Client) Close() error {
	if err := c.conn.Close(); err != nil {
		return fmt.Errorf("mixdclient: close: %w", err)
	}
	return nil
}

// Service returns the generated stub, for calls this package does not wrap.
func (c *Client) Service() mixdv1.MixtureServiceClient { return c.svc }

// unaryContext gives ctx the client's default deadline when it has none.
func (c *Client) unaryContext(ctx context.Context) (context.Context, context.CancelFunc) {
	if _, ok := ctx.Deadline(); ok || c.timeout <= 0 {
		return context.WithCancel(ctx)
	}
	return context.WithTimeout(ctx, c.timeout)
}

// rowsPerChunk is how many rows of width bytesPerRow fit in one message.
func (c *Client) rowsPerChunk(bytesPerRow int) int {
	if bytesPerRow <= 0 {
		return 1 << 20
	}
	return max(1, c.chunkBytes/bytesPerRow)
}
