package fitters

import (
	"context"
	"fmt"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
)

// GRPCCode returns the gRPC status code for a fitter error code.
func GRPCCode(c Code) codes.Code {
	switch c {
	case InvalidArgument:
		return codes.InvalidArgument
	case FailedPrecondition:
		return codes.FailedPrecondition
	case Canceled:
		return codes.Canceled
	case DeadlineExceeded:
		return codes.DeadlineExceeded
	case Unimplemented:
		return codes.Unimplemented
	}
	return codes.Internal
}

// toStatus turns a fitter error into a gRPC status error with the matching
// code and the error's message.
func toStatus(err error) error {
	return status.Error(GRPCCode(CodeOf(err)), err.Error())
}

// fromStatus turns an error of a call to a plugin back into a fitter error.
// When ctx is done the context's error wins. Codes a fitter sends become an
// *Error with the same Code and message; Unavailable (the process or its
// connection went away) wraps ErrTransport; anything else is Internal.
func fromStatus(ctx context.Context, err error) error {
	if cerr := ContextError(ctx); cerr != nil {
		return cerr
	}
	st, ok := status.FromError(err)
	if !ok {
		return &Error{Code: Internal, Msg: "fitter call failed", Err: err}
	}
	switch st.Code() {
	case codes.InvalidArgument:
		return &Error{Code: InvalidArgument, Msg: st.Message()}
	case codes.FailedPrecondition:
		return &Error{Code: FailedPrecondition, Msg: st.Message()}
	case codes.Canceled:
		return &Error{Code: Canceled, Msg: st.Message()}
	case codes.DeadlineExceeded:
		return &Error{Code: DeadlineExceeded, Msg: st.Message()}
	case codes.Unimplemented:
		return &Error{Code: Unimplemented, Msg: st.Message()}
	case codes.Internal:
		return &Error{Code: Internal, Msg: st.Message()}
	case codes.Unavailable:
		return fmt.Errorf("%w: %s", ErrTransport, st.Message())
	}
	return &Error{Code: Internal, Msg: fmt.Sprintf("fitter call failed with %s: %s", st.Code(), st.Message())}
}
