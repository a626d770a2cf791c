package fitters

import (
	"context"
	"errors"
	"fmt"
	"io"
	"slices"
	"sync"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"github.com/mixd-dev/mixd/fitters/internal/wire"
	"github.com/mixd-dev/mixd/fitters/reclaim"
	fitterv1 "github.com/mixd-dev/mixd/proto/mixd/fitter/v1"
)

// maxDataValues bounds rows × cols announced in the settings of a fit
// (2³¹ values, 16 GiB of float64): a sanity limit of the protocol, far above
// what the daemon admits.
const maxDataValues = 1 << 31

// grpcServer serves a Fitter in the plugin process.
type grpcServer struct {
	fitterv1.UnimplementedFitterServiceServer
	impl Fitter
}

// Describe implements fitterv1.FitterServiceServer.
func (s *grpcServer) Describe(ctx context.Context, _ *fitterv1.DescribeRequest) (*fitterv1.DescribeResponse, error) {
	info, err := s.impl.Describe(ctx)
	if err != nil {
		return nil, toStatus(err)
	}
	return infoToDescribe(info), nil
}

// Fit implements fitterv1.FitterServiceServer: it receives the settings and
// the data chunks, runs the fitter with the stream's context, streams its
// progress and finally sends the result.
func (s *grpcServer) Fit(stream grpc.BidiStreamingServer[fitterv1.FitRequest, fitterv1.FitResponse]) error {
	ctx := stream.Context()
	data, settings, err := receiveFit(stream)
	if err != nil {
		if cerr := ContextError(ctx); cerr != nil {
			return toStatus(cerr)
		}
		return err
	}
	ps := &progressSender{stream: stream}
	res, err := s.impl.Fit(ctx, data, settings, ps.send)
	ps.stop()
	if err != nil {
		return toStatus(err)
	}
	if res == nil {
		return status.Error(codes.Internal, "fitter returned neither a result nor an error")
	}
	return stream.Send(&fitterv1.FitResponse{Message: &fitterv1.FitResponse_Result{Result: resultToProto(res)}})
}

// progressSender sends progress events on the stream one at a time. The
// fitter's progress callback blocks while an event is being sent, so a slow
// receiver slows the fitter down (it never drops or reorders events); once the
// fit has returned, late calls are ignored, and after a failed send further
// events are dropped (the fit's context ends soon after in that case).
type progressSender struct {
	mu     sync.Mutex
	stream grpc.BidiStreamingServer[fitterv1.FitRequest, fitterv1.FitResponse]
	done   bool
}

func (p *progressSender) send(ev Progress) {
	p.mu.Lock()
	defer p.mu.Unlock()
	if p.done {
		return
	}
	if err := p.stream.Send(&fitterv1.FitResponse{Message: &fitterv1.FitResponse_Progress{Progress: progressToProto(ev)}}); err != nil {
		p.done = true
	}
}

func (p *progressSender) stop() {
	p.mu.Lock()
	p.done = true
	p.mu.Unlock()
}

// receiveFit reads the settings message and every data chunk. Its errors are
// gRPC status errors (INVALID_ARGUMENT for a malformed stream).
func receiveFit(stream grpc.BidiStreamingServer[fitterv1.FitRequest, fitterv1.FitResponse]) (Data, Settings, error) {
	invalid := func(format string, args ...any) error {
		return status.Errorf(codes.InvalidArgument, format, args...)
	}
	first, err := stream.Recv()
	if errors.Is(err, io.EOF) {
		return Data{}, Settings{}, invalid("fit stream closed before the settings message")
	}
	if err != nil {
		return Data{}, Settings{}, err
	}
	pbs := first.GetSettings()
	if pbs == nil {
		return Data{}, Settings{}, invalid("the first fit message must carry settings")
	}
	settings, err := settingsFromProto(pbs)
	if err != nil {
		return Data{}, Settings{}, invalid("%v", err)
	}
	rows, cols := pbs.GetRows(), int64(pbs.GetCols())
	if rows < 0 {
		return Data{}, Settings{}, invalid("settings.rows: must not be negative, got %d", rows)
	}
	if cols < 0 {
		return Data{}, Settings{}, invalid("settings.cols: must not be negative, got %d", cols)
	}
	if cols > 0 && rows > maxDataValues/cols {
		return Data{}, Settings{}, invalid("settings.rows × settings.cols = %d × %d exceeds the protocol limit of %d values", rows, cols, int64(maxDataValues))
	}
	hasWeights, hasLabels := pbs.GetHasWeights(), pbs.GetHasLabels()
	// No allocation of the announced size before any data has arrived: the
	// values take it with the first chunk (below); weights and labels, n
	// values each rather than n·d, grow as chunks arrive.
	const initialCap = 1 << 16
	values := make([]float64, 0, min(rows*cols, initialCap))
	var weights []float64
	if hasWeights {
		weights = make([]float64, 0, min(rows, initialCap))
	}
	var labels []int
	var labels32 []int32
	if hasLabels {
		labels = make([]int, 0, min(rows, initialCap))
	}
	// Each chunk is garbage once decoded: collect every
	// reclaim.DefaultBytes so the process peaks near the data's size plus
	// the fit's work space, not twice the data.
	garbage := reclaim.New(reclaim.DefaultBytes)
	var got int64
	for i := 0; ; i++ {
		msg, err := stream.Recv()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return Data{}, Settings{}, err
		}
		chunk := msg.GetChunk()
		if chunk == nil {
			return Data{}, Settings{}, invalid("fit message %d: expected a data chunk after the settings", i+2)
		}
		n := chunk.GetRows()
		name := fmt.Sprintf("chunk %d (rows from %d)", i, got)
		if n <= 0 {
			return Data{}, Settings{}, invalid("%s: rows must be positive, got %d", name, n)
		}
		if n > rows-got {
			return Data{}, Settings{}, invalid("%s: %d more rows exceed settings.rows = %d", name, n, rows)
		}
		start := len(values)
		if i == 0 && cap(values) < int(rows*cols) {
			// The first chunk has arrived: take the announced size at
			// once. Growing by copying would hold the old and the new
			// array together, up to 1.8 times the data at the end, and
			// that transient is the fitter's peak memory. A stream that
			// then sends fewer or more rows is refused below, and pages
			// of the array are only touched as rows arrive.
			values = make([]float64, 0, rows*cols)
		}
		values = slices.Grow(values, int(n*cols))[:start+int(n*cols)]
		if err := wire.DecodeFloat64s(values[start:], chunk.GetValues(), name+": values"); err != nil {
			return Data{}, Settings{}, invalid("%v", err)
		}
		switch {
		case hasWeights:
			start := len(weights)
			weights = slices.Grow(weights, int(n))[:start+int(n)]
			if err := wire.DecodeFloat64s(weights[start:], chunk.GetWeights(), name+": weights"); err != nil {
				return Data{}, Settings{}, invalid("%v", err)
			}
		case len(chunk.GetWeights()) > 0:
			return Data{}, Settings{}, invalid("%s: carries weights but settings.has_weights is false", name)
		}
		switch {
		case hasLabels:
			labels32 = slices.Grow(labels32[:0], int(n))[:n]
			if err := wire.DecodeInt32s(labels32, chunk.GetLabels(), name+": labels"); err != nil {
				return Data{}, Settings{}, invalid("%v", err)
			}
			for _, l := range labels32 {
				labels = append(labels, int(l))
			}
		case len(chunk.GetLabels()) > 0:
			return Data{}, Settings{}, invalid("%s: carries labels but settings.has_labels is false", name)
		}
		got += n
		garbage.Done(len(chunk.GetValues()) + len(chunk.GetWeights()) + len(chunk.GetLabels()))
	}
	if got != rows {
		return Data{}, Settings{}, invalid("received %d rows, but settings.rows = %d", got, rows)
	}
	settings.Labels = labels
	return Data{Rows: int(rows), Cols: int(cols), Values: values, Weights: weights}, settings, nil
}
