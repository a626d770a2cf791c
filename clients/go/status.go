package mixdclient

import (
	"errors"

	"google.golang.org/grpc/status"
)

// StatusOf returns the gRPC status carried by err, unwrapped from the
// context this package adds: its Code is the daemon's code and its Message
// the daemon's own message. An error without a status gives codes.Unknown
// with err's text; a nil error gives OK.
func StatusOf(err error) *status.Status {
	if err == nil {
		return status.New(0, "")
	}
	var se interface{ GRPCStatus() *status.Status }
	if errors.As(err, &se) {
		return se.GRPCStatus()
	}
	return status.Convert(err)
}
