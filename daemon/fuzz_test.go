package daemon

import (
	"context"
	"math"
	"testing"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// allowed are the codes request validation may return.
var allowed = map[codes.Code]bool{
	codes.OK: true, codes.InvalidArgument: true, codes.ResourceExhausted: true,
	codes.NotFound: true, codes.Unimplemented: true,
}

func fuzzServer(t testing.TB) (*Server, *memStore) {
	st := newMemStore()
	if _, err := st.Create(context.Background(), refModel("models/pumps")); err != nil {
		t.Fatal(err)
	}
	s, err := NewServer(Options{Store: st, Host: newFakeHost(), Limits: Limits{MaxRows: 64, MaxDimension: 8, MaxComponents: 8, MaxMessageBytes: 1 << 20}})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(s.Close)
	return s, st
}

// FuzzCheckSpec decodes arbitrary bytes as a FitSpec and validates it: no
// panic, only validation codes, and an accepted spec has sane settings.
func FuzzCheckSpec(f *testing.F) {
	for _, sp := range []*mixdv1.FitSpec{
		spec("pumps", 2),
		{Model: "x", ComponentsMin: 2, ComponentsMax: 4, Family: mixdv1.Family_FAMILY_STUDENT_T, Fitter: "tfake"},
		{Model: "x", StartParameters: refModel("").Parameters, FeatureNames: []string{"a", "b"}},
		{Model: "x", Components: 3, Tolerance: math.Inf(1), Options: map[string]string{"a": "b"}},
	} {
		b, err := proto.Marshal(sp)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(b)
	}
	s, _ := fuzzServer(f)
	f.Fuzz(func(t *testing.T, b []byte) {
		var sp mixdv1.FitSpec
		if proto.Unmarshal(b, &sp) != nil {
			return
		}
		plan, err := s.checkSpec(&sp)
		if !allowed[status.Code(err)] {
			t.Fatalf("code %s: %v", status.Code(err), err)
		}
		if err != nil {
			return
		}
		st := plan.settings
		k := max(st.Components, st.MaxComponents)
		if k < 1 || k > 8 || st.Tolerance < 0 || math.IsNaN(st.Tolerance) || st.MaxIterations < -1 || st.Restarts < 0 {
			t.Fatalf("accepted settings %+v", st)
		}
	})
}

// FuzzServingRequests decodes arbitrary bytes as Score, Classify and Sample
// requests and runs them: no panic, only validation codes, nothing stored,
// and successful responses carry finite log-densities or probabilities.
func FuzzServingRequests(f *testing.F) {
	seed := []proto.Message{
		&mixdv1.ScoreRequest{Model: "pumps", Rows: rows2(1, 2, 3, 4), IncludeComponentLogDensities: true},
		&mixdv1.ScoreRequest{Model: "pumps", Rows: &mixdv1.Matrix{Rows: 1, Cols: 2, LittleEndian: le(1, math.NaN())}},
		&mixdv1.ClassifyRequest{Model: "pumps", Rows: rows2(0, 0), MinPosterior: 0.5, IncludePosteriors: true},
		&mixdv1.SampleRequest{Model: "pumps", Count: 5, Seed: 3},
	}
	for i, m := range seed {
		b, err := proto.Marshal(m)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(uint8(i%3), b)
	}
	s, st := fuzzServer(f)
	before := st.dump()
	ctx := context.Background()
	f.Fuzz(func(t *testing.T, kind uint8, b []byte) {
		var err error
		switch kind % 3 {
		case 0:
			var req mixdv1.ScoreRequest
			if proto.Unmarshal(b, &req) != nil {
				return
			}
			var r *mixdv1.ScoreResponse
			if r, err = s.Score(ctx, &req); err == nil {
				checkFinite(t, r.Percentiles)
			}
		case 1:
			var req mixdv1.ClassifyRequest
			if proto.Unmarshal(b, &req) != nil {
				return
			}
			var r *mixdv1.ClassifyResponse
			if r, err = s.Classify(ctx, &req); err == nil {
				checkFinite(t, r.MaxPosteriors)
			}
		case 2:
			var req mixdv1.SampleRequest
			if proto.Unmarshal(b, &req) != nil {
				return
			}
			var r *mixdv1.SampleResponse
			if r, err = s.Sample(ctx, &req); err == nil {
				checkFinite(t, r.Rows)
			}
		}
		if !allowed[status.Code(err)] {
			t.Fatalf("code %s: %v", status.Code(err), err)
		}
		if !sameDump(before, st.dump()) {
			t.Fatal("a serving request changed the store")
		}
	})
}

func checkFinite(t *testing.T, m *mixdv1.Matrix) {
	t.Helper()
	if m == nil {
		return
	}
	// decodeMatrix refuses non-finite values.
	if _, err := decodeMatrix("response", m, rowLimit{1 << 40, ""}, 1<<40); err != nil {
		t.Fatalf("response matrix: %v", err)
	}
}
