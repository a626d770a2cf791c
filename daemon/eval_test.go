package daemon

import (
	"context"
	"errors"
	"io"
	"math"
	"slices"
	"testing"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// envWithRef returns a test server whose store holds refModel as
// models/pumps version 1.
func envWithRef(t *testing.T, o Options) *testEnv {
	t.Helper()
	e := newTestEnv(t, o)
	if _, err := e.store.Create(context.Background(), refModel("models/pumps")); err != nil {
		t.Fatal(err)
	}
	return e
}

// values returns a matrix's values whatever its encoding.
func values(t *testing.T, m *mixdv1.Matrix) []float64 {
	t.Helper()
	d, err := decodeMatrix("response", m, rowLimit{1 << 40, ""}, 1<<40)
	if err != nil {
		t.Fatal(err)
	}
	return d.values
}

func labelValues(t *testing.T, l *mixdv1.Labels, n int) []int {
	t.Helper()
	v, err := decodeLabels("response", l, n, math.MaxInt32)
	if err != nil {
		t.Fatal(err)
	}
	return v
}

func TestScoreMatchesScipy(t *testing.T) {
	e := envWithRef(t, Options{})
	ctx := context.Background()
	for _, little := range []bool{false, true} {
		rows := encodeMatrix(4, 2, refRows, little)
		resp, err := e.client.Score(ctx, &mixdv1.ScoreRequest{Model: "pumps", Rows: rows, IncludeComponentLogDensities: true})
		if err != nil {
			t.Fatal(err)
		}
		if resp.Model != "models/pumps" || resp.Version != 1 {
			t.Fatalf("model %s version %d", resp.Model, resp.Version)
		}
		// UNSPECIFIED answers in the input's encoding.
		if (len(resp.LogDensities.LittleEndian) > 0) != little {
			t.Fatalf("input little-endian %v, response %v", little, resp.LogDensities)
		}
		ld := values(t, resp.LogDensities)
		var sum float64
		for i, w := range refLogDens {
			if !closeTo(ld[i], w, 1e-12) {
				t.Errorf("row %d: log-density %v, scipy %v", i, ld[i], w)
			}
			sum += ld[i]
		}
		if !closeTo(resp.LogLikelihood, sum, 1e-15) {
			t.Errorf("log-likelihood %v, sum of rows %v", resp.LogLikelihood, sum)
		}
		comp := values(t, resp.ComponentLogDensities)
		if resp.ComponentLogDensities.Cols != 2 {
			t.Fatalf("component matrix %d×%d", resp.ComponentLogDensities.Rows, resp.ComponentLogDensities.Cols)
		}
		for i, w := range refCompLog {
			if !closeTo(comp[i], w, 1e-12) {
				t.Errorf("component log-density %d: %v, scipy %v", i, comp[i], w)
			}
		}
		// Quantiles of refModel: levels 0, 0.5, 1 at -10, -3, -1.
		pct := values(t, resp.Percentiles)
		for i, ldv := range refLogDens {
			var want float64
			switch {
			case ldv < -10:
				want = 0
			case ldv < -3:
				want = 100 * 0.5 * (ldv + 10) / 7
			default:
				want = 100 * (0.5 + 0.5*(ldv+3)/2)
			}
			if !closeTo(pct[i], want, 1e-12) {
				t.Errorf("row %d: percentile %v, want %v", i, pct[i], want)
			}
		}
	}
}

func TestScoreWithoutQuantilesOmitsPercentiles(t *testing.T) {
	e := newTestEnv(t, Options{})
	m := refModel("models/plain")
	m.Report = nil
	if _, err := e.store.Create(context.Background(), m); err != nil {
		t.Fatal(err)
	}
	resp, err := e.client.Score(context.Background(), &mixdv1.ScoreRequest{Model: "plain", Rows: encodeMatrix(1, 2, refRows[:2], false)})
	if err != nil {
		t.Fatal(err)
	}
	if resp.Percentiles != nil || len(values(t, resp.LogDensities)) != 1 {
		t.Fatalf("percentiles %v", resp.Percentiles)
	}
}

func TestClassifyMatchesScipy(t *testing.T) {
	e := envWithRef(t, Options{})
	resp, err := e.client.Classify(context.Background(), &mixdv1.ClassifyRequest{
		Model: "models/pumps", Version: 1, Rows: encodeMatrix(4, 2, refRows, false),
		MinPosterior: 0.9, IncludePosteriors: true,
		ResponseEncoding: mixdv1.MatrixEncoding_MATRIX_ENCODING_LITTLE_ENDIAN,
	})
	if err != nil {
		t.Fatal(err)
	}
	if len(resp.Components.LittleEndian) == 0 || len(resp.MaxPosteriors.LittleEndian) == 0 {
		t.Fatal("asked for little-endian responses")
	}
	labels := labelValues(t, resp.Components, 4)
	if !slices.Equal(labels, []int{0, 1, 1, 1}) {
		t.Fatalf("labels %v", labels)
	}
	post := values(t, resp.Posteriors)
	maxPost := values(t, resp.MaxPosteriors)
	for i, w := range refPost {
		if !closeTo(post[i], w, 1e-12) {
			t.Errorf("posterior %d: %v, scipy %v", i, post[i], w)
		}
	}
	for i, l := range labels {
		if !closeTo(maxPost[i], refPost[2*i+l], 1e-12) {
			t.Errorf("row %d: max posterior %v, want %v", i, maxPost[i], refPost[2*i+l])
		}
	}
	if !slices.Equal(resp.Confident, []bool{true, true, true, false}) {
		t.Fatalf("confident %v (threshold 0.9)", resp.Confident)
	}
}

func TestSampleStreamEqualsSample(t *testing.T) {
	e := envWithRef(t, Options{})
	ctx := context.Background()
	one, err := e.client.Sample(ctx, &mixdv1.SampleRequest{Model: "pumps", Count: 50, Seed: 42})
	if err != nil {
		t.Fatal(err)
	}
	if one.Rows.Rows != 50 || one.Rows.Cols != 2 {
		t.Fatalf("shape %d×%d", one.Rows.Rows, one.Rows.Cols)
	}
	wantX, wantL := values(t, one.Rows), labelValues(t, one.Components, 50)
	for _, chunk := range []int64{0, 1, 7, 50, 64} {
		stream, err := e.client.SampleStream(ctx, &mixdv1.SampleStreamRequest{
			Model: "pumps", Count: 50, Seed: 42, ChunkRows: chunk,
			ResponseEncoding: mixdv1.MatrixEncoding_MATRIX_ENCODING_LITTLE_ENDIAN,
		})
		if err != nil {
			t.Fatal(err)
		}
		var x []float64
		var l []int
		for {
			r, err := stream.Recv()
			if errors.Is(err, io.EOF) {
				break
			}
			if err != nil {
				t.Fatal(err)
			}
			if chunk > 0 && r.Rows.Rows > chunk {
				t.Fatalf("chunk of %d rows, asked for %d", r.Rows.Rows, chunk)
			}
			x = append(x, values(t, r.Rows)...)
			l = append(l, labelValues(t, r.Components, int(r.Rows.Rows))...)
		}
		if !slices.Equal(x, wantX) || !slices.Equal(l, wantL) {
			t.Fatalf("chunk_rows %d: the streamed rows differ from Sample's", chunk)
		}
	}
	// Another seed gives other rows.
	other, err := e.client.Sample(ctx, &mixdv1.SampleRequest{Model: "pumps", Count: 50, Seed: 43})
	if err != nil {
		t.Fatal(err)
	}
	if slices.Equal(values(t, other.Rows), wantX) {
		t.Fatal("seed 43 gave the rows of seed 42")
	}
}

func TestScoreStreamInOrder(t *testing.T) {
	e := envWithRef(t, Options{})
	ctx := context.Background()
	stream, err := e.client.ScoreStream(ctx)
	if err != nil {
		t.Fatal(err)
	}
	// Four chunks of one row; later messages may repeat the model or leave it out.
	for i := range 4 {
		req := &mixdv1.ScoreStreamRequest{Rows: encodeMatrix(1, 2, refRows[2*i:2*i+2], i%2 == 1)}
		if i == 0 {
			req.Model, req.IncludeComponentLogDensities = "pumps", true
		}
		if i == 2 {
			req.Model, req.Version = "models/pumps", 1
		}
		if err := stream.Send(req); err != nil {
			t.Fatal(err)
		}
		resp, err := stream.Recv()
		if err != nil {
			t.Fatal(err)
		}
		if got := values(t, resp.LogDensities); len(got) != 1 || !closeTo(got[0], refLogDens[i], 1e-12) {
			t.Fatalf("chunk %d: %v, want %v", i, got, refLogDens[i])
		}
		if (len(resp.LogDensities.LittleEndian) > 0) != (i%2 == 1) {
			t.Fatalf("chunk %d: encoding does not follow the input", i)
		}
		if resp.ComponentLogDensities == nil {
			t.Fatalf("chunk %d: the first message's flag was not kept", i)
		}
	}
	// A different model in a later message is refused.
	if err := stream.Send(&mixdv1.ScoreStreamRequest{Model: "other", Rows: encodeMatrix(1, 2, refRows[:2], false)}); err != nil {
		t.Fatal(err)
	}
	if _, err := stream.Recv(); status.Code(err) != codes.InvalidArgument {
		t.Fatalf("other model: %v", err)
	}
}

func TestClassifyStream(t *testing.T) {
	e := envWithRef(t, Options{})
	stream, err := e.client.ClassifyStream(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	var labels []int
	for i := range 2 {
		req := &mixdv1.ClassifyStreamRequest{Rows: encodeMatrix(2, 2, refRows[4*i:4*i+4], false)}
		if i == 0 {
			req.Model, req.MinPosterior = "pumps", 0.99
		}
		if err := stream.Send(req); err != nil {
			t.Fatal(err)
		}
		resp, err := stream.Recv()
		if err != nil {
			t.Fatal(err)
		}
		labels = append(labels, labelValues(t, resp.Components, 2)...)
		if i == 1 && !slices.Equal(resp.Confident, []bool{true, false}) {
			t.Fatalf("threshold of the first message not applied: %v", resp.Confident)
		}
	}
	if err := stream.CloseSend(); err != nil {
		t.Fatal(err)
	}
	if _, err := stream.Recv(); !errors.Is(err, io.EOF) {
		t.Fatalf("end of stream: %v", err)
	}
	if !slices.Equal(labels, []int{0, 1, 1, 1}) {
		t.Fatalf("labels %v", labels)
	}
}
