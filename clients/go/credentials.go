package mixdclient

import (
	"context"
	"crypto/tls"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials"
)

// WithBearerToken sends token with every call as "authorization: Bearer
// TOKEN" metadata, for a daemon started with --token-file. The token is
// also sent over plain-text connections (meant for Unix sockets and
// 127.0.0.1); combine it with WithTLS on other networks.
func WithBearerToken(token string) Option {
	return WithDialOptions(grpc.WithPerRPCCredentials(bearerToken(token)))
}

// WithTLS connects over TLS with cfg (set RootCAs to trust the daemon's
// CA and Certificates to present a client certificate for mutual TLS).
func WithTLS(cfg *tls.Config) Option {
	return WithDialOptions(grpc.WithTransportCredentials(credentials.NewTLS(cfg)))
}

// bearerToken is per-call credentials carrying a bearer token.
type bearerToken string

// GetRequestMetadata implements credentials.PerRPCCredentials.
func (t bearerToken) GetRequestMetadata(context.Context, ...string) (map[string]string, error) {
	return map[string]string{"authorization": "Bearer " + string(t)}, nil
}

// RequireTransportSecurity implements credentials.PerRPCCredentials: the
// token may travel over a Unix socket or loopback without TLS.
func (bearerToken) RequireTransportSecurity() bool { return false }
