package daemon

import (
	"context"
	"errors"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"github.com/mixd-dev/mixd/daemon/fitterhost"
	"github.com/mixd-dev/mixd/daemon/store"
	"github.com/mixd-dev/mixd/fitters"
)

// Error mapping. Every failure leaves an RPC with exactly one canonical
// code; the table is repeated in cmd/mixd/doc.go.
//
//	request validation (shape, values, names, enums)   INVALID_ARGUMENT
//	a configured limit exceeded (Limits, job slots)    RESOURCE_EXHAUSTED
//	store.ErrNotFound, unknown fit job                 NOT_FOUND
//	store.ErrInvalid (e.g. a bad page token)           INVALID_ARGUMENT
//	store.ErrCorrupt, stored model that fails to build DATA_LOSS
//	store.ErrClosed (shutting down)                    UNAVAILABLE
//	store.ErrUnavailable (database unreachable)        UNAVAILABLE
//	store.ErrJobEnded (shared job already ended)       FAILED_PRECONDITION
//	fitterhost.ErrUnknownFitter                        INVALID_ARGUMENT (the spec names a fitter that is not there)
//	fitterhost.ErrUnavailable, fitters.ErrTransport    UNAVAILABLE (the fitter process crashed or went away; retryable)
//	fitter error codes (fitters.CodeOf)                the matching code: INVALID_ARGUMENT, FAILED_PRECONDITION,
//	                                                   CANCELLED, DEADLINE_EXCEEDED, UNIMPLEMENTED, INTERNAL
//	context.Canceled / DeadlineExceeded                CANCELLED / DEADLINE_EXCEEDED
//	fitter lacks the family or structure asked for     UNIMPLEMENTED
//	cancelling a job that already ended                FAILED_PRECONDITION
//	daemon shutting down while a job runs              UNAVAILABLE
//	anything else                                      INTERNAL, with the message
//
// Errors a plugin reports are translated by the plugin glue into fitters
// errors and then by classify into these codes; a gRPC status from a
// plugin is never passed through unchanged.

// classify returns the code and message an error maps to.
func classify(err error) (codes.Code, string) {
	if err == nil {
		return codes.OK, ""
	}
	var fe *fitters.Error
	var se interface{ GRPCStatus() *status.Status }
	switch {
	case errors.Is(err, store.ErrNotFound):
		return codes.NotFound, err.Error()
	case errors.Is(err, store.ErrCorrupt), errors.Is(err, errUnservable):
		return codes.DataLoss, err.Error()
	case errors.Is(err, store.ErrUnavailable):
		return codes.Unavailable, err.Error() + " (the model store cannot be reached; retryable)"
	case errors.Is(err, store.ErrJobEnded):
		return codes.FailedPrecondition, err.Error()
	case errors.Is(err, store.ErrClosed):
		return codes.Unavailable, err.Error() + " (the daemon is shutting down; retryable)"
	case errors.Is(err, store.ErrInvalid):
		return codes.InvalidArgument, err.Error()
	case errors.Is(err, fitterhost.ErrUnknownFitter):
		return codes.InvalidArgument, err.Error()
	case errors.Is(err, fitterhost.ErrUnavailable), errors.Is(err, fitters.ErrTransport):
		return codes.Unavailable, err.Error() + " (retryable)"
	case errors.As(err, &fe):
		return fitters.GRPCCode(fe.Code), err.Error()
	case errors.Is(err, context.Canceled):
		return codes.Canceled, err.Error()
	case errors.Is(err, context.DeadlineExceeded):
		return codes.DeadlineExceeded, err.Error()
	case errors.As(err, &se):
		// Our own validation errors are status errors made in this
		// package and returned directly; any other status (for example
		// from a library) keeps only a safe subset of codes.
		st := se.GRPCStatus()
		switch st.Code() {
		case codes.InvalidArgument, codes.NotFound, codes.ResourceExhausted, codes.FailedPrecondition,
			codes.Unimplemented, codes.Canceled, codes.DeadlineExceeded, codes.DataLoss:
			return st.Code(), st.Message()
		case codes.Unavailable:
			return codes.Unavailable, st.Message() + " (retryable)"
		}
		return codes.Internal, st.Message()
	}
	return codes.Internal, err.Error()
}

// toStatus converts err into a gRPC status error (see classify). A status
// error made by this package's validation passes unchanged.
func toStatus(err error) error {
	if err == nil {
		return nil
	}
	if st, ok := status.FromError(err); ok && isOwnStatus(err) {
		return st.Err()
	}
	c, msg := classify(err)
	return status.Error(c, msg)
}

// isOwnStatus reports whether err is a bare status error (made with
// status.Error here) rather than an error that wraps one.
func isOwnStatus(err error) bool {
	_, ok := err.(interface{ GRPCStatus() *status.Status })
	return ok
}
