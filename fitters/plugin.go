package fitters

import (
	"context"
	"errors"
	"fmt"

	"github.com/hashicorp/go-plugin"
	"google.golang.org/grpc"

	fitterv1 "github.com/mixd-dev/mixd/proto/mixd/fitter/v1"
)

// PluginName is the single entry of the go-plugin plugin map: the name under
// which a plugin process serves, and a host dispenses, a Fitter.
const PluginName = "fitter"

// Handshake is the go-plugin handshake shared by the host and every fitter
// plugin. The cookie only tells a program that it was started as a mixd
// fitter plugin (and not by hand); it is not a security measure.
// ProtocolVersion changes only when the fitter protocol changes incompatibly.
var Handshake = plugin.HandshakeConfig{
	ProtocolVersion:  1,
	MagicCookieKey:   "MIXD_FITTER_PLUGIN_COOKIE",
	MagicCookieValue: "6f1c93d0-pumping-station-mixtures",
}

const (
	// MaxMessageBytes is the largest gRPC message either side of the plugin
	// connection accepts or sends (64 MiB). Data travel in chunks of about
	// ChunkBytes, so only a very large result can come near it.
	MaxMessageBytes = 64 << 20
	// ChunkBytes is the target payload size of one data chunk sent to a
	// plugin (2 MiB); a chunk holds at least one row.
	ChunkBytes = 2 << 20
	// ParentPIDEnv names the environment variable in which a host tells a
	// plugin its process id, so a plugin whose host died before it started
	// exits at once instead of running orphaned.
	ParentPIDEnv = "MIXD_FITTER_PARENT_PID"
)

// ErrTransport is wrapped by the errors of a plugin-backed Fitter when the
// connection to the plugin process failed: the process crashed or was killed,
// or it ended a fit without a result. The host treats these as "fitter
// unavailable" and relaunches the process on the next call.
var ErrTransport = errors.New("lost connection to the fitter process")

// PluginSet returns the go-plugin plugin map with its one entry. A plugin
// passes its Fitter; a host passes nil.
func PluginSet(impl Fitter) plugin.PluginSet {
	return plugin.PluginSet{PluginName: &GRPCPlugin{Impl: impl}}
}

// GRPCPlugin implements plugin.GRPCPlugin for a Fitter: the server side serves
// Impl as a fitterv1.FitterServiceServer; the client side returns a Fitter
// that calls the plugin process. It does not speak go-plugin's net/rpc
// protocol.
type GRPCPlugin struct {
	plugin.NetRPCUnsupportedPlugin
	// Impl is the fitter served; nil on the host side.
	Impl Fitter
}

// GRPCServer registers the fitter service for Impl on s.
func (p *GRPCPlugin) GRPCServer(_ *plugin.GRPCBroker, s *grpc.Server) error {
	if p.Impl == nil {
		return fmt.Errorf("fitters: GRPCPlugin.Impl is nil on the plugin side")
	}
	fitterv1.RegisterFitterServiceServer(s, &grpcServer{impl: p.Impl})
	return nil
}

// GRPCClient returns a Fitter that calls the plugin over conn.
func (p *GRPCPlugin) GRPCClient(_ context.Context, _ *plugin.GRPCBroker, conn *grpc.ClientConn) (any, error) {
	return &grpcClient{stub: fitterv1.NewFitterServiceClient(conn)}, nil
}

// GRPCDialOptions returns the dial options a host passes in
// plugin.ClientConfig.GRPCDialOptions: message size limits of MaxMessageBytes.
func GRPCDialOptions() []grpc.DialOption {
	return []grpc.DialOption{grpc.WithDefaultCallOptions(
		grpc.MaxCallRecvMsgSize(MaxMessageBytes),
		grpc.MaxCallSendMsgSize(MaxMessageBytes),
	)}
}

// newGRPCServer builds the plugin's gRPC server with go-plugin's options (TLS)
// plus our message size limits.
func newGRPCServer(opts []grpc.ServerOption) *grpc.Server {
	opts = append(opts, grpc.MaxRecvMsgSize(MaxMessageBytes), grpc.MaxSendMsgSize(MaxMessageBytes))
	return grpc.NewServer(opts...)
}

// Compile-time checks.
var (
	_ plugin.GRPCPlugin = (*GRPCPlugin)(nil)
	_ Fitter            = (*grpcClient)(nil)
)
