package fitters

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"

	"github.com/mixd-dev/mixd/fitters/internal/wire"
	"github.com/mixd-dev/mixd/fitters/reclaim"
	fitterv1 "github.com/mixd-dev/mixd/proto/mixd/fitter/v1"
)

// grpcClient is the host-side Fitter that calls a plugin process.
type grpcClient struct {
	stub fitterv1.FitterServiceClient
}

// Describe implements Fitter.
func (c *grpcClient) Describe(ctx context.Context) (Info, error) {
	resp, err := c.stub.Describe(ctx, &fitterv1.DescribeRequest{})
	if err != nil {
		return Info{}, fromStatus(ctx, err)
	}
	info, err := infoFromDescribe(resp)
	if err != nil {
		return Info{}, &Error{Code: Internal, Msg: "fitter sent an invalid description", Err: err}
	}
	return info, nil
}

// Fit implements Fitter: it sends the settings, then the data in chunks of
// about ChunkBytes, then reads progress events (calling progress for each, in
// order, on the calling goroutine) until the result arrives.
func (c *grpcClient) Fit(ctx context.Context, data Data, s Settings, progress func(Progress)) (*Result, error) {
	if err := checkData(data, s.Labels); err != nil {
		return nil, err
	}
	pbs, err := settingsToProto(s)
	if err != nil {
		return nil, &Error{Code: InvalidArgument, Msg: err.Error()}
	}
	pbs.Rows, pbs.Cols, pbs.HasWeights = int64(data.Rows), int32(data.Cols), data.Weights != nil

	// Ending the call's context releases the stream on every return path.
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	stream, err := c.stub.Fit(ctx)
	if err != nil {
		return nil, fromStatus(ctx, err)
	}
	// A Send error of io.EOF means the plugin ended the call (for example it
	// rejected the settings); its status then comes from Recv below.
	if err := sendFit(stream.Send, pbs, data, s.Labels); err != nil && !errors.Is(err, io.EOF) {
		return nil, fromStatus(ctx, err)
	} else if err == nil {
		if err := stream.CloseSend(); err != nil {
			return nil, fromStatus(ctx, err)
		}
	}
	for {
		msg, err := stream.Recv()
		if errors.Is(err, io.EOF) {
			return nil, fmt.Errorf("%w: the fitter ended the fit without sending a result", ErrTransport)
		}
		if err != nil {
			return nil, fromStatus(ctx, err)
		}
		switch m := msg.GetMessage().(type) {
		case *fitterv1.FitResponse_Progress:
			if progress != nil {
				progress(progressFromProto(m.Progress))
			}
		case *fitterv1.FitResponse_Result:
			res, err := resultFromProto(m.Result)
			if err != nil {
				return nil, &Error{Code: Internal, Msg: "fitter sent an invalid result", Err: err}
			}
			return res, nil
		default:
			return nil, &Error{Code: Internal, Msg: fmt.Sprintf("fitter sent an unexpected message %T", m)}
		}
	}
}

// checkData verifies that data and labels are consistent with their shape.
func checkData(d Data, labels []int) error {
	bad := func(format string, args ...any) error { return Errorf(InvalidArgument, format, args...) }
	if d.Rows < 0 || d.Cols < 0 {
		return bad("data: rows (%d) and cols (%d) must not be negative", d.Rows, d.Cols)
	}
	if d.Cols > math.MaxInt32 {
		return bad("data.cols: %d exceeds the 32-bit limit", d.Cols)
	}
	if d.Cols > 0 && d.Rows > math.MaxInt/d.Cols {
		return bad("data: rows × cols = %d × %d overflows", d.Rows, d.Cols)
	}
	if len(d.Values) != d.Rows*d.Cols {
		return bad("data.values: has %d values, want rows × cols = %d × %d = %d", len(d.Values), d.Rows, d.Cols, d.Rows*d.Cols)
	}
	if d.Weights != nil && len(d.Weights) != d.Rows {
		return bad("data.weights: has %d values, want one per row (%d)", len(d.Weights), d.Rows)
	}
	if labels != nil {
		if len(labels) != d.Rows {
			return bad("settings.labels: has %d labels, want one per row (%d)", len(labels), d.Rows)
		}
		for i, l := range labels {
			if l < math.MinInt32 || l > math.MaxInt32 {
				return bad("settings.labels[%d]: %d is outside the 32-bit range", i, l)
			}
		}
	}
	return nil
}

// chunkRows returns how many rows go in one chunk of about ChunkBytes.
func chunkRows(cols int, weights, labels bool) int {
	perRow := 8 * cols
	if weights {
		perRow += 8
	}
	if labels {
		perRow += 4
	}
	return max(1, ChunkBytes/max(perRow, 1))
}

// sendFit sends the settings and then the rows of d in chunks. Every chunk
// gets fresh buffers: gRPC does not allow a message to change after Send.
func sendFit(send func(*fitterv1.FitRequest) error, pbs *fitterv1.Settings, d Data, labels []int) error {
	if err := send(&fitterv1.FitRequest{Message: &fitterv1.FitRequest_Settings{Settings: pbs}}); err != nil {
		return err
	}
	per := chunkRows(d.Cols, d.Weights != nil, labels != nil)
	// Each chunk is garbage once sent: collect every reclaim.DefaultBytes
	// so the daemon does not hold a second copy of the rows in garbage.
	garbage := reclaim.New(reclaim.DefaultBytes)
	l32 := make([]int32, 0, min(per, d.Rows))
	for lo := 0; lo < d.Rows; lo += per {
		hi := min(lo+per, d.Rows)
		chunk := &fitterv1.DataChunk{Rows: int64(hi - lo)}
		chunk.Values = wire.AppendFloat64s(make([]byte, 0, 8*(hi-lo)*d.Cols), d.Values[lo*d.Cols:hi*d.Cols])
		if d.Weights != nil {
			chunk.Weights = wire.AppendFloat64s(make([]byte, 0, 8*(hi-lo)), d.Weights[lo:hi])
		}
		if labels != nil {
			l32 = l32[:0]
			for _, l := range labels[lo:hi] {
				l32 = append(l32, int32(l))
			}
			chunk.Labels = wire.AppendInt32s(make([]byte, 0, 4*(hi-lo)), l32)
		}
		if err := send(&fitterv1.FitRequest{Message: &fitterv1.FitRequest_Chunk{Chunk: chunk}}); err != nil {
			return err
		}
		garbage.Done(len(chunk.Values) + len(chunk.Weights) + len(chunk.Labels))
	}
	return nil
}
