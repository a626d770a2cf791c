package daemon

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"strings"
	"testing"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"github.com/mixd-dev/mixd/daemon/fitterhost"
	"github.com/mixd-dev/mixd/fitters"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// pumpRows returns n rows of (flow, motor current) from two operating
// regimes, seeded.
func pumpRows(n int, seed uint64) []float64 {
	r := rand.New(rand.NewPCG(seed, 1))
	out := make([]float64, 0, 2*n)
	for i := range n {
		if i%3 == 0 {
			out = append(out, 20+2*r.NormFloat64(), 5+0.5*r.NormFloat64())
		} else {
			out = append(out, 45+3*r.NormFloat64(), 11+0.8*r.NormFloat64())
		}
	}
	return out
}

func chunk(rows []float64, little bool) *mixdv1.FitChunk {
	return &mixdv1.FitChunk{Data: encodeMatrix(len(rows)/2, 2, rows, little)}
}

// fitEvents runs Fit with msgs and returns the events and the final error.
func fitEvents(ctx context.Context, c mixdv1.MixtureServiceClient, msgs ...*mixdv1.FitRequest) ([]*mixdv1.FitResponse, error) {
	s, err := c.Fit(ctx)
	if err != nil {
		return nil, err
	}
	for _, m := range msgs {
		if err := s.Send(m); err != nil {
			break // the server ended the call; Recv has the status
		}
	}
	s.CloseSend()
	var evs []*mixdv1.FitResponse
	for {
		ev, err := s.Recv()
		if errors.Is(err, io.EOF) {
			return evs, nil
		}
		if err != nil {
			return evs, err
		}
		evs = append(evs, ev)
	}
}

func spec(model string, k int32) *mixdv1.FitSpec {
	return &mixdv1.FitSpec{Model: model, Components: k, Seed: 7}
}

func TestFitStoresModel(t *testing.T) {
	e := newTestEnv(t, Options{})
	ctx := context.Background()
	data := pumpRows(300, 1)
	sp := spec("pumps", 2)
	sp.FeatureNames = []string{"flow", "current"}
	sp.ExpectedRows = 300
	evs, err := fitEvents(ctx, e.client,
		&mixdv1.FitRequest{Spec: sp, Chunk: chunk(data[:200], false)},
		&mixdv1.FitRequest{Chunk: chunk(data[200:400], true)},
		&mixdv1.FitRequest{Chunk: &mixdv1.FitChunk{}}, // an empty chunk is allowed
		&mixdv1.FitRequest{Chunk: chunk(data[400:], false)},
	)
	if err != nil {
		t.Fatal(err)
	}
	first := evs[0].GetJob()
	if first == nil || first.State != mixdv1.FitJobState_FIT_JOB_STATE_RECEIVING || !strings.HasPrefix(first.Name, "fitJobs/") || first.Model != "models/pumps" || first.Fitter != "em" {
		t.Fatalf("first event %v", evs[0])
	}
	last := evs[len(evs)-1].GetModel()
	if last == nil {
		t.Fatalf("last event %v", evs[len(evs)-1])
	}
	var states []mixdv1.FitJobState
	progress := 0
	for _, ev := range evs {
		if j := ev.GetJob(); j != nil {
			states = append(states, j.State)
		}
		if ev.GetProgress() != nil {
			progress++
		}
	}
	if progress == 0 || states[len(states)-1] != mixdv1.FitJobState_FIT_JOB_STATE_SUCCEEDED {
		t.Fatalf("states %v, %d progress events", states, progress)
	}
	stored, err := e.store.Get(ctx, "models/pumps", 1)
	if err != nil {
		t.Fatal(err)
	}
	if stored.Version != 1 || last.Version != 1 || last.CreateTime == nil {
		t.Fatalf("stored version %d, reported %d", stored.Version, last.Version)
	}
	r := stored.Report
	if r.Fitter != "em" || r.FitterVersion != "1.2.3" || r.Seed != 7 || r.TrainingRows != 300 || r.Elapsed == nil ||
		r.Settings["components"] != "2" || len(r.TrainingQuantiles.Levels) != len(QuantileLevels) {
		t.Fatalf("report %v", r)
	}
	if got := stored.Parameters.FeatureNames; len(got) != 2 || got[0] != "flow" {
		t.Fatalf("feature names %v", got)
	}
	// The quantiles are those of the training rows under the stored model.
	m, err := buildModel(stored)
	if err != nil {
		t.Fatal(err)
	}
	ld := make([]float64, 300)
	if err := m.LogDensity(data, ld); err != nil {
		t.Fatal(err)
	}
	q := trainingQuantiles(ld, nil)
	for i := range q.LogDensities {
		if q.LogDensities[i] != r.TrainingQuantiles.LogDensities[i] {
			t.Fatalf("quantile %d: %v, recomputed %v", i, r.TrainingQuantiles.LogDensities[i], q.LogDensities[i])
		}
	}
	// Scoring the training rows gives percentiles spread over [0, 100]
	// with a median near 50.
	sc, err := e.client.Score(ctx, &mixdv1.ScoreRequest{Model: "pumps", Rows: encodeMatrix(300, 2, data, false)})
	if err != nil {
		t.Fatal(err)
	}
	below := 0
	for _, p := range values(t, sc.Percentiles) {
		if p < 50 {
			below++
		}
	}
	if below < 140 || below > 160 {
		t.Fatalf("%d of 300 training rows below the 50th percentile", below)
	}
	// The job remembers its model.
	j, err := e.client.GetFitJob(ctx, &mixdv1.GetFitJobRequest{Name: first.Name})
	if err != nil || j.Job.State != mixdv1.FitJobState_FIT_JOB_STATE_SUCCEEDED || j.Job.ModelVersion != 1 || j.Job.Rows != 300 || j.Model.GetVersion() != 1 || j.Job.EndTime == nil {
		t.Fatalf("job %v %v", j, err)
	}
	// A second fit makes version 2, served as the newest at once.
	if _, err := fitEvents(ctx, e.client, &mixdv1.FitRequest{Spec: spec("models/pumps", 1), Chunk: chunk(data, false)}); err != nil {
		t.Fatal(err)
	}
	sc, err = e.client.Score(ctx, &mixdv1.ScoreRequest{Model: "pumps", Rows: rows2(20, 5)})
	if err != nil || sc.Version != 2 {
		t.Fatalf("newest after a second fit: %v %v", sc, err)
	}
}

func TestFitWithWeightsLabelsAndStart(t *testing.T) {
	e := newTestEnv(t, Options{})
	var seen fitters.Settings
	var seenData fitters.Data
	e.host.setFit("em", func(ctx context.Context, d fitters.Data, s fitters.Settings, p func(fitters.Progress)) (*fitters.Result, error) {
		seen, seenData = s, d
		return groupFit(ctx, d, s, p)
	})
	ridge := 0.5
	sp := &mixdv1.FitSpec{
		Model: "w", Fitter: "em", StartParameters: refModel("").Parameters, Ridge: &ridge,
		Criterion: mixdv1.Criterion_CRITERION_AIC, MaxIterations: -1, Tolerance: 1e-6, Restarts: 3,
		Options: map[string]string{"x": "1"},
	}
	data := pumpRows(4, 2)
	c1 := chunk(data[:4], false)
	c1.RowWeights = &mixdv1.Matrix{Rows: 2, Cols: 1, Values: []float64{1, 2}}
	c1.StartLabels = &mixdv1.Labels{Values: []int32{0, 1}}
	c2 := chunk(data[4:], true)
	c2.RowWeights = &mixdv1.Matrix{Rows: 2, Cols: 1, LittleEndian: le(0, 3)}
	c2.StartLabels = &mixdv1.Labels{LittleEndian: []byte{1, 0, 0, 0, 0, 0, 0, 0}}
	if _, err := fitEvents(context.Background(), e.client, &mixdv1.FitRequest{Spec: sp, Chunk: c1}, &mixdv1.FitRequest{Chunk: c2}); err != nil {
		t.Fatal(err)
	}
	if seen.Components != 2 || seen.Start == nil || seen.Ridge != 0.5 || seen.Criterion != fitters.AIC ||
		seen.MaxIterations != -1 || seen.Tolerance != 1e-6 || seen.Restarts != 3 || seen.Options["x"] != "1" || seen.Seed != 0 ||
		seen.Structure.String() != "full" { // an unset structure follows the start's

		t.Fatalf("settings %+v", seen)
	}
	if fmt.Sprint(seen.Labels) != "[0 1 1 0]" || fmt.Sprint(seenData.Weights) != "[1 2 0 3]" || seenData.Rows != 4 || seenData.Cols != 2 {
		t.Fatalf("labels %v weights %v", seen.Labels, seenData.Weights)
	}
}

func TestFitDefaults(t *testing.T) {
	e := newTestEnv(t, Options{})
	var seen fitters.Settings
	e.host.setFit("em", func(ctx context.Context, d fitters.Data, s fitters.Settings, p func(fitters.Progress)) (*fitters.Result, error) {
		seen = s
		return groupFit(ctx, d, s, p)
	})
	sp := &mixdv1.FitSpec{Model: "d", ComponentsMax: 3}
	if _, err := fitEvents(context.Background(), e.client, &mixdv1.FitRequest{Spec: sp, Chunk: chunk(pumpRows(10, 3), false)}); err != nil {
		t.Fatal(err)
	}
	if seen.MinComponents != 1 || seen.MaxComponents != 3 || seen.Ridge != -1 || seen.Family != 0 ||
		seen.Structure.String() != "full" || seen.Criterion != fitters.BIC || seen.Labels != nil {
		t.Fatalf("defaults %+v", seen)
	}
}

func TestFitValidation(t *testing.T) {
	e := newTestEnv(t, Options{Limits: Limits{MaxComponents: 5, MaxDimension: 3, MaxFitRows: 10, MaxFitValues: 16}})
	rows := pumpRows(4, 1)
	good := func() *mixdv1.FitSpec { return spec("pumps", 2) }
	with := func(f func(*mixdv1.FitSpec)) *mixdv1.FitSpec { s := good(); f(s); return s }
	withNaN := append([]float64(nil), rows...)
	withNaN[3] = math.NaN()
	badStart := refModel("").Parameters
	badStart.Components[0].Weight = 0.5
	cases := []struct {
		name string
		msgs []*mixdv1.FitRequest
		code codes.Code
		msg  string
	}{
		{"no messages", nil, codes.InvalidArgument, "stream ended before the first message"},
		{"no spec", []*mixdv1.FitRequest{{Chunk: chunk(rows, false)}}, codes.InvalidArgument, "spec: missing"},
		{"bad model", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) { s.Model = "a:b" })}}, codes.InvalidArgument, "spec.model: model id \"a:b\""},
		{"no components", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) { s.Components = 0 })}}, codes.InvalidArgument, "spec.components is 0"},
		{"negative components", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) { s.Components = -2 })}}, codes.InvalidArgument, "spec.components is -2"},
		{"too many components", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) { s.Components = 6 })}}, codes.ResourceExhausted, "spec.components is 6, above the limit of 5 (mixd serve --max-components)"},
		{"range too wide", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) { s.ComponentsMax = 9 })}}, codes.ResourceExhausted, "spec.components_max is 9"},
		{"range reversed", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) { s.ComponentsMin, s.ComponentsMax = 4, 3 })}}, codes.InvalidArgument, "spec.components_min (4) is greater than spec.components_max (3)"},
		{"min without max", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) { s.ComponentsMin = 2 })}}, codes.InvalidArgument, "spec.components_min is 2 but spec.components_max is 0"},
		{"family", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) { s.Family = 9 })}}, codes.InvalidArgument, "spec.family: unknown value 9"},
		{"structure", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) { s.CovarianceStructure = 9 })}}, codes.InvalidArgument, "spec.covariance_structure: unknown value 9"},
		{"criterion", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) { s.Criterion = 9 })}}, codes.InvalidArgument, "spec.criterion: unknown value 9"},
		{"iterations", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) { s.MaxIterations = -2 })}}, codes.InvalidArgument, "spec.max_iterations is -2"},
		{"tolerance", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) { s.Tolerance = math.NaN() })}}, codes.InvalidArgument, "spec.tolerance is NaN"},
		{"restarts", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) { s.Restarts = -1 })}}, codes.InvalidArgument, "spec.restarts is -1"},
		{"ridge", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) { r := -1.0; s.Ridge = &r })}}, codes.InvalidArgument, "spec.ridge is -1"},
		{"empty feature name", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) { s.FeatureNames = []string{"a", " "} })}}, codes.InvalidArgument, "spec.feature_names[1] is empty"},
		{"duplicate feature name", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) { s.FeatureNames = []string{"a", "a"} })}}, codes.InvalidArgument, "spec.feature_names[1] \"a\" repeats spec.feature_names[0]"},
		{"empty option name", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) { s.Options = map[string]string{"": "1"} })}}, codes.InvalidArgument, "spec.options"},
		{"expected rows negative", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) { s.ExpectedRows = -1 })}}, codes.InvalidArgument, "spec.expected_rows is -1"},
		{"expected rows over limit", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) { s.ExpectedRows = 11 })}}, codes.ResourceExhausted, "--max-fit-rows"},
		{"unknown fitter", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) { s.Fitter = "nope" })}}, codes.InvalidArgument, "spec.fitter: unknown fitter \"nope\" (available: em, tfake)"},
		{"unsupported family", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) { s.Family = mixdv1.Family_FAMILY_STUDENT_T })}}, codes.Unimplemented, "fitter \"em\" does not fit the student_t family"},
		{"unsupported structure", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) {
			s.Fitter, s.Family, s.CovarianceStructure = "tfake", mixdv1.Family_FAMILY_STUDENT_T, mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_TIED
		})}}, codes.Unimplemented, "does not fit the tied structure"},
		{"bad start", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) { s.StartParameters = badStart })}}, codes.InvalidArgument, "spec.start_parameters:"},
		{"start with range", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) {
			s.ComponentsMax, s.StartParameters = 3, refModel("").Parameters
		})}}, codes.InvalidArgument, "spec.start_parameters cannot be combined with a component range"},
		{"start structure", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) {
			s.StartParameters, s.CovarianceStructure = refModel("").Parameters, mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_DIAGONAL
		})}}, codes.InvalidArgument, "spec.start_parameters.covariance_structure is full but spec.covariance_structure is diagonal"},
		{"start count", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) { s.Components, s.StartParameters = 3, refModel("").Parameters })}}, codes.InvalidArgument, "spec.start_parameters has 2 components but spec.components is 3"},
		{"start dimension", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) { s.StartParameters = refModel("").Parameters }),
			Chunk: &mixdv1.FitChunk{Data: &mixdv1.Matrix{Rows: 1, Cols: 3, Values: []float64{1, 2, 3}}}}}, codes.InvalidArgument, "spec.start_parameters.dimension is 2 but messages[0].chunk.data has 3 columns"},
		{"second spec", []*mixdv1.FitRequest{{Spec: good()}, {Spec: good()}}, codes.InvalidArgument, "messages[1].spec: the spec is allowed only in the first message"},
		{"no rows", []*mixdv1.FitRequest{{Spec: good()}, {Chunk: &mixdv1.FitChunk{}}}, codes.InvalidArgument, "no training rows arrived"},
		{"columns change", []*mixdv1.FitRequest{{Spec: good(), Chunk: chunk(rows, false)}, {Chunk: &mixdv1.FitChunk{Data: &mixdv1.Matrix{Rows: 1, Cols: 3, Values: []float64{1, 2, 3}}}}},
			codes.InvalidArgument, "messages[1].chunk.data.cols is 3 but earlier chunks have 2 columns"},
		{"feature count", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) { s.FeatureNames = []string{"flow"} }), Chunk: chunk(rows, false)}},
			codes.InvalidArgument, "spec.feature_names has 1 names but messages[0].chunk.data has 2 columns"},
		{"NaN", []*mixdv1.FitRequest{{Spec: good(), Chunk: chunk(rows[:2], false)}, {Chunk: chunk(withNaN, true)}},
			codes.InvalidArgument, "messages[1].chunk.data: value at row 1, column 1 is NaN"},
		{"too many columns", []*mixdv1.FitRequest{{Spec: good(), Chunk: &mixdv1.FitChunk{Data: &mixdv1.Matrix{Rows: 1, Cols: 4, Values: make([]float64, 4)}}}},
			codes.ResourceExhausted, "--max-dimension"},
		{"too many rows", []*mixdv1.FitRequest{{Spec: good(), Chunk: chunk(pumpRows(6, 1), false)}, {Chunk: chunk(pumpRows(5, 1), false)}},
			codes.ResourceExhausted, "the fit would have 11 training rows, above the limit of 10 (mixd serve --max-fit-rows)"},
		{"too many values", []*mixdv1.FitRequest{{Spec: good(), Chunk: chunk(pumpRows(9, 1), false)}},
			codes.ResourceExhausted, "9×2 = 18 training values, above the limit of 16 (mixd serve --max-fit-values)"},
		{"more than expected", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) { s.ExpectedRows = 3 }), Chunk: chunk(rows, false)}},
			codes.InvalidArgument, "4 rows have arrived, more than spec.expected_rows = 3"},
		{"fewer than expected", []*mixdv1.FitRequest{{Spec: with(func(s *mixdv1.FitSpec) { s.ExpectedRows = 5 }), Chunk: chunk(rows, false)}},
			codes.InvalidArgument, "spec.expected_rows is 5 but 4 rows arrived"},
		{"weights on later chunk only", []*mixdv1.FitRequest{{Spec: good(), Chunk: chunk(rows[:2], false)},
			{Chunk: &mixdv1.FitChunk{Data: encodeMatrix(1, 2, rows[2:4], false), RowWeights: &mixdv1.Matrix{Rows: 1, Cols: 1, Values: []float64{1}}}}},
			codes.InvalidArgument, "messages[1].chunk.row_weights: the first chunk had no row weights"},
		{"weights missing later", []*mixdv1.FitRequest{
			{Spec: good(), Chunk: &mixdv1.FitChunk{Data: encodeMatrix(1, 2, rows[:2], false), RowWeights: &mixdv1.Matrix{Rows: 1, Cols: 1, Values: []float64{1}}}},
			{Chunk: chunk(rows[2:4], false)}}, codes.InvalidArgument, "messages[1].chunk.row_weights: missing"},
		{"weights shape", []*mixdv1.FitRequest{
			{Spec: good(), Chunk: &mixdv1.FitChunk{Data: encodeMatrix(2, 2, rows[:4], false), RowWeights: &mixdv1.Matrix{Rows: 1, Cols: 2, Values: []float64{1, 1}}}}},
			codes.InvalidArgument, "messages[0].chunk.row_weights is 1×2, want 2×1"},
		{"negative weight", []*mixdv1.FitRequest{
			{Spec: good(), Chunk: &mixdv1.FitChunk{Data: encodeMatrix(2, 2, rows[:4], false), RowWeights: &mixdv1.Matrix{Rows: 2, Cols: 1, Values: []float64{1, -1}}}}},
			codes.InvalidArgument, "weight of row 1 is -1"},
		{"zero weights", []*mixdv1.FitRequest{
			{Spec: good(), Chunk: &mixdv1.FitChunk{Data: encodeMatrix(2, 2, rows[:4], false), RowWeights: &mixdv1.Matrix{Rows: 2, Cols: 1, Values: []float64{0, 0}}}}},
			codes.InvalidArgument, "row_weights sum to 0"},
		{"label range", []*mixdv1.FitRequest{
			{Spec: good(), Chunk: &mixdv1.FitChunk{Data: encodeMatrix(2, 2, rows[:4], false), StartLabels: &mixdv1.Labels{Values: []int32{0, 2}}}}},
			codes.InvalidArgument, "messages[0].chunk.start_labels: label of row 1 is 2, want a component index in [0, 2)"},
		{"labels with range", []*mixdv1.FitRequest{
			{Spec: with(func(s *mixdv1.FitSpec) { s.ComponentsMax = 3 }), Chunk: &mixdv1.FitChunk{Data: encodeMatrix(2, 2, rows[:4], false), StartLabels: &mixdv1.Labels{Values: []int32{0, 1}}}}},
			codes.InvalidArgument, "start_labels cannot be combined with a component range"},
		{"weights without data", []*mixdv1.FitRequest{{Spec: good(), Chunk: &mixdv1.FitChunk{RowWeights: &mixdv1.Matrix{Rows: 1, Cols: 1, Values: []float64{1}}}}},
			codes.InvalidArgument, "row_weights or start_labels sent without data rows"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			before := e.store.dump()
			calls := e.host.callCount()
			_, err := fitEvents(context.Background(), e.client, c.msgs...)
			st := status.Convert(err)
			if st.Code() != c.code || !strings.Contains(st.Message(), c.msg) {
				t.Fatalf("got %s %q, want %s containing %q", st.Code(), st.Message(), c.code, c.msg)
			}
			if !sameDump(before, e.store.dump()) || e.host.callCount() != calls {
				t.Fatal("a rejected fit changed the store or reached the fitter")
			}
		})
	}
}

func TestFitErrorMapping(t *testing.T) {
	e := newTestEnv(t, Options{})
	nanMean := func(ctx context.Context, d fitters.Data, s fitters.Settings, p func(fitters.Progress)) (*fitters.Result, error) {
		r, err := groupFit(ctx, d, s, p)
		r.Params.Components[0].Mean[0] = math.NaN()
		return r, err
	}
	wrongDim := func(ctx context.Context, d fitters.Data, s fitters.Settings, p func(fitters.Progress)) (*fitters.Result, error) {
		return groupFit(ctx, fitters.Data{Rows: d.Rows, Cols: 1, Values: d.Values[:d.Rows]}, s, p)
	}
	nanReport := func(ctx context.Context, d fitters.Data, s fitters.Settings, p func(fitters.Progress)) (*fitters.Result, error) {
		r, err := groupFit(ctx, d, s, p)
		r.Report.History = []float64{-3, math.NaN()}
		return r, err
	}
	fail := func(err error) fitFunc {
		return func(context.Context, fitters.Data, fitters.Settings, func(fitters.Progress)) (*fitters.Result, error) {
			return nil, err
		}
	}
	cases := []struct {
		name string
		fit  fitFunc
		code codes.Code
		msg  string
	}{
		{"failed precondition", fail(fitters.Errorf(fitters.FailedPrecondition, "3 distinct rows for 5 components")), codes.FailedPrecondition, "3 distinct rows"},
		{"invalid argument", fail(fitters.Errorf(fitters.InvalidArgument, "option \"x\" unknown")), codes.InvalidArgument, "option \"x\""},
		{"unimplemented", fail(fitters.Errorf(fitters.Unimplemented, "tied not supported")), codes.Unimplemented, "tied not supported"},
		{"deadline", fail(fitters.Errorf(fitters.DeadlineExceeded, "too slow")), codes.DeadlineExceeded, "too slow"},
		{"crash", fail(fmt.Errorf("fitter em: %w: process exited with signal killed", fitterhost.ErrUnavailable)), codes.Unavailable, "signal killed (retryable)"},
		{"transport", fail(fmt.Errorf("fit: %w", fitters.ErrTransport)), codes.Unavailable, "retryable"},
		{"vanished", fail(fmt.Errorf("fit: %w", fitterhost.ErrUnknownFitter)), codes.InvalidArgument, "unknown fitter"},
		{"plain error", fail(errBoom), codes.Internal, "boom"},
		{"raw status", fail(status.Error(codes.PermissionDenied, "plugin says no")), codes.Internal, "plugin says no"},
		{"NaN parameters", nanMean, codes.Internal, "returned parameters that do not validate"},
		{"wrong dimension", wrongDim, codes.Internal, "returned a model of dimension 1 for 2 columns"},
		{"NaN report", nanReport, codes.Internal, "history[1] is NaN"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			e.host.setFit("em", c.fit)
			before := e.store.dump()
			evs, err := fitEvents(context.Background(), e.client, &mixdv1.FitRequest{Spec: spec("pumps", 2), Chunk: chunk(pumpRows(10, 1), false)})
			st := status.Convert(err)
			if st.Code() != c.code || !strings.Contains(st.Message(), c.msg) {
				t.Fatalf("got %s %q, want %s containing %q", st.Code(), st.Message(), c.code, c.msg)
			}
			if !sameDump(before, e.store.dump()) {
				t.Fatal("a failed fit changed the store")
			}
			last := evs[len(evs)-1].GetJob()
			if last.GetState() != mixdv1.FitJobState_FIT_JOB_STATE_FAILED || codes.Code(last.ErrorCode) != c.code || last.ErrorMessage != st.Message() {
				t.Fatalf("final job event %v", evs[len(evs)-1])
			}
		})
	}
}

// createJob starts a job with CreateFitJob and returns it.
func createJob(t *testing.T, e *testEnv, model string) *mixdv1.FitJob {
	t.Helper()
	s, err := e.client.CreateFitJob(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	if err := s.Send(&mixdv1.CreateFitJobRequest{Spec: spec(model, 2)}); err != nil {
		t.Fatal(err)
	}
	if err := s.Send(&mixdv1.CreateFitJobRequest{Chunk: chunk(pumpRows(20, 1), false)}); err != nil {
		t.Fatal(err)
	}
	resp, err := s.CloseAndRecv()
	if err != nil {
		t.Fatal(err)
	}
	return resp.Job
}

func jobState(t *testing.T, e *testEnv, name string) *mixdv1.GetFitJobResponse {
	t.Helper()
	r, err := e.client.GetFitJob(context.Background(), &mixdv1.GetFitJobRequest{Name: name})
	if err != nil {
		t.Fatal(err)
	}
	return r
}

// watchAll collects a watch's events until it ends.
func watchAll(t *testing.T, e *testEnv, name string, onEvent func(*mixdv1.WatchFitJobResponse)) ([]*mixdv1.WatchFitJobResponse, error) {
	t.Helper()
	s, err := e.client.WatchFitJob(context.Background(), &mixdv1.WatchFitJobRequest{Name: name})
	if err != nil {
		t.Fatal(err)
	}
	var evs []*mixdv1.WatchFitJobResponse
	for {
		ev, err := s.Recv()
		if errors.Is(err, io.EOF) {
			return evs, nil
		}
		if err != nil {
			return evs, err
		}
		evs = append(evs, ev)
		if onEvent != nil {
			onEvent(ev)
		}
	}
}

func TestCreateFitJobRunsWithoutWatcher(t *testing.T) {
	e := newTestEnv(t, Options{})
	started, release := make(chan struct{}, 1), make(chan struct{})
	e.host.setFit("em", blockingFit(started, release))
	job := createJob(t, e, "pumps")
	if job.State != mixdv1.FitJobState_FIT_JOB_STATE_QUEUED && job.State != mixdv1.FitJobState_FIT_JOB_STATE_RUNNING || job.Rows != 20 {
		t.Fatalf("created job %v", job)
	}
	<-started // the uploading call has ended; the fit still runs
	if r := jobState(t, e, job.Name); r.Job.State != mixdv1.FitJobState_FIT_JOB_STATE_RUNNING || r.Job.Progress.GetIteration() != 1 {
		t.Fatalf("running job %v", r.Job)
	}
	close(release)
	waitFor(t, "the job to succeed", func() bool {
		return jobState(t, e, job.Name).Job.State == mixdv1.FitJobState_FIT_JOB_STATE_SUCCEEDED
	})
	r := jobState(t, e, job.Name)
	if r.Model.GetName() != "models/pumps" || r.Job.ModelVersion != 1 {
		t.Fatalf("finished job %v", r)
	}
	if _, err := e.store.Get(context.Background(), "models/pumps", 1); err != nil {
		t.Fatalf("the model of an unwatched job was not stored: %v", err)
	}
	// A late watcher gets the final state and the model at once.
	evs, err := watchAll(t, e, job.Name, nil)
	if err != nil || len(evs) != 2 || evs[0].GetJob().GetState() != mixdv1.FitJobState_FIT_JOB_STATE_SUCCEEDED || evs[1].GetModel().GetVersion() != 1 {
		t.Fatalf("late watch: %v %v", evs, err)
	}
}

func TestWatchFitJob(t *testing.T) {
	e := newTestEnv(t, Options{})
	started, release := make(chan struct{}, 1), make(chan struct{})
	e.host.setFit("em", blockingFit(started, release))
	job := createJob(t, e, "pumps")
	<-started
	evs, err := watchAll(t, e, job.Name, func(ev *mixdv1.WatchFitJobResponse) {
		if ev.GetProgress() != nil {
			select {
			case <-release:
			default:
				close(release) // finish once the watcher has seen progress
			}
		}
	})
	if err != nil {
		t.Fatal(err)
	}
	var kinds []string
	for _, ev := range evs {
		switch {
		case ev.GetJob() != nil:
			kinds = append(kinds, "job:"+strings.TrimPrefix(ev.GetJob().State.String(), "FIT_JOB_STATE_"))
		case ev.GetProgress() != nil:
			kinds = append(kinds, "progress")
		case ev.GetModel() != nil:
			kinds = append(kinds, "model")
		}
	}
	got := strings.Join(kinds, " ")
	if !strings.HasPrefix(got, "job:RUNNING progress") || !strings.HasSuffix(got, "job:SUCCEEDED model") {
		t.Fatalf("events: %s", got)
	}
}

func TestCancelFitJob(t *testing.T) {
	e := newTestEnv(t, Options{})
	started := make(chan struct{}, 1)
	e.host.setFit("em", blockingFit(started, nil))
	before := e.store.dump()
	job := createJob(t, e, "pumps")
	<-started
	resp, err := e.client.CancelFitJob(context.Background(), &mixdv1.CancelFitJobRequest{Name: job.Name})
	if err != nil {
		t.Fatal(err)
	}
	if resp.Job.State != mixdv1.FitJobState_FIT_JOB_STATE_CANCELLED || codes.Code(resp.Job.ErrorCode) != codes.Canceled {
		t.Fatalf("cancelled job %v", resp.Job)
	}
	if !sameDump(before, e.store.dump()) {
		t.Fatal("a cancelled job stored a model")
	}
	_, err = e.client.CancelFitJob(context.Background(), &mixdv1.CancelFitJobRequest{Name: job.Name})
	if status.Code(err) != codes.FailedPrecondition {
		t.Fatalf("cancelling again: %v", err)
	}
	evs, err := watchAll(t, e, job.Name, nil)
	if err != nil || len(evs) != 1 || evs[0].GetJob().GetState() != mixdv1.FitJobState_FIT_JOB_STATE_CANCELLED {
		t.Fatalf("watching a cancelled job: %v %v", evs, err)
	}
}

func TestFitCallerCancelStopsFit(t *testing.T) {
	e := newTestEnv(t, Options{})
	stopped := make(chan error, 1)
	e.host.setFit("em", func(ctx context.Context, d fitters.Data, s fitters.Settings, p func(fitters.Progress)) (*fitters.Result, error) {
		p(fitters.Progress{Iteration: 1})
		<-ctx.Done()
		stopped <- ctx.Err()
		return nil, fitters.ContextError(ctx)
	})
	ctx, cancel := context.WithCancel(context.Background())
	s, err := e.client.Fit(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if err := s.Send(&mixdv1.FitRequest{Spec: spec("pumps", 2), Chunk: chunk(pumpRows(10, 1), false)}); err != nil {
		t.Fatal(err)
	}
	s.CloseSend()
	first, err := s.Recv()
	if err != nil {
		t.Fatal(err)
	}
	for {
		ev, err := s.Recv()
		if err != nil {
			t.Fatal(err)
		}
		if ev.GetProgress() != nil {
			break
		}
	}
	cancel()
	select {
	case err := <-stopped:
		if !errors.Is(err, context.Canceled) {
			t.Fatalf("fit context: %v", err)
		}
	case <-time.After(10 * time.Second):
		t.Fatal("the fit was not cancelled when its caller went away")
	}
	waitFor(t, "the job to be cancelled", func() bool {
		return jobState(t, e, first.GetJob().Name).Job.State == mixdv1.FitJobState_FIT_JOB_STATE_CANCELLED
	})
	if len(e.store.dump()) != 0 {
		t.Fatal("a cancelled fit stored a model")
	}
}

func TestFitQueueAndActiveLimit(t *testing.T) {
	e := newTestEnv(t, Options{MaxConcurrentFits: 1, Limits: Limits{MaxActiveJobs: 2}})
	started, release := make(chan struct{}, 2), make(chan struct{})
	e.host.setFit("em", blockingFit(started, release))
	a := createJob(t, e, "a")
	<-started
	b := createJob(t, e, "b")
	if got := jobState(t, e, b.Name).Job.State; got != mixdv1.FitJobState_FIT_JOB_STATE_QUEUED {
		t.Fatalf("second job %v while the only slot is taken", got)
	}
	// A third job is refused before it uploads anything.
	s, err := e.client.CreateFitJob(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	s.Send(&mixdv1.CreateFitJobRequest{Spec: spec("c", 2)})
	if _, err := s.CloseAndRecv(); status.Code(err) != codes.ResourceExhausted || !strings.Contains(err.Error(), "--max-active-jobs") {
		t.Fatalf("third job: %v", err)
	}
	close(release)
	for _, j := range []*mixdv1.FitJob{a, b} {
		waitFor(t, j.Name, func() bool {
			return jobState(t, e, j.Name).Job.State == mixdv1.FitJobState_FIT_JOB_STATE_SUCCEEDED
		})
	}
	// Now there is room again.
	createJob(t, e, "c")
}

func TestListFitJobs(t *testing.T) {
	e := newTestEnv(t, Options{Limits: Limits{JobHistory: 3}})
	var names []string
	for i := range 4 {
		j := createJob(t, e, fmt.Sprintf("m%d", i))
		names = append(names, j.Name)
		waitFor(t, j.Name, func() bool { return finalState(jobState(t, e, j.Name).Job.State) })
	}
	ctx := context.Background()
	p1, err := e.client.ListFitJobs(ctx, &mixdv1.ListFitJobsRequest{PageSize: 2})
	if err != nil || len(p1.Jobs) != 2 || p1.Jobs[0].Name != names[3] || p1.Jobs[1].Name != names[2] || p1.NextPageToken == "" {
		t.Fatalf("first page %v %v", p1, err)
	}
	p2, err := e.client.ListFitJobs(ctx, &mixdv1.ListFitJobsRequest{PageSize: 2, PageToken: p1.NextPageToken})
	// Only the 3 most recent finished jobs are kept.
	if err != nil || len(p2.Jobs) != 1 || p2.Jobs[0].Name != names[1] || p2.NextPageToken != "" {
		t.Fatalf("second page %v %v", p2, err)
	}
	if _, err := e.client.GetFitJob(ctx, &mixdv1.GetFitJobRequest{Name: names[0]}); status.Code(err) != codes.NotFound {
		t.Fatalf("the oldest job should be forgotten: %v", err)
	}
}

func TestFitProgressThrottled(t *testing.T) {
	e := newTestEnv(t, Options{})
	const n = 300
	e.host.setFit("em", func(ctx context.Context, d fitters.Data, s fitters.Settings, p func(fitters.Progress)) (*fitters.Result, error) {
		for i := 1; i <= n; i++ {
			p(fitters.Progress{Components: 2, Iteration: i, Objective: float64(-i)})
			time.Sleep(time.Millisecond)
		}
		r, err := groupFit(ctx, d, s, nil)
		return r, err
	})
	start := time.Now()
	evs, err := fitEvents(context.Background(), e.client, &mixdv1.FitRequest{Spec: spec("pumps", 2), Chunk: chunk(pumpRows(10, 1), false)})
	if err != nil {
		t.Fatal(err)
	}
	elapsed := time.Since(start)
	var prog []*mixdv1.FitProgress
	lastProgressBeforeEnd := -1
	for i, ev := range evs {
		if p := ev.GetProgress(); p != nil {
			prog = append(prog, p)
			lastProgressBeforeEnd = i
		}
	}
	limit := int(elapsed/progressInterval) + 2
	if len(prog) == 0 || len(prog) > limit {
		t.Fatalf("%d progress events in %v; want 1 to %d", len(prog), elapsed, limit)
	}
	if it := prog[len(prog)-1].Iteration; it != n {
		t.Fatalf("last progress is iteration %d, want %d", it, n)
	}
	if lastProgressBeforeEnd != len(evs)-3 { // then job SUCCEEDED, then model
		t.Fatalf("the last progress is event %d of %d", lastProgressBeforeEnd, len(evs))
	}
}

func TestCloseFailsRunningJobsAsUnavailable(t *testing.T) {
	e := newTestEnv(t, Options{})
	started := make(chan struct{}, 1)
	e.host.setFit("em", blockingFit(started, nil))
	job := createJob(t, e, "pumps")
	<-started
	e.srv.Close()
	r := jobState(t, e, job.Name)
	if r.Job.State != mixdv1.FitJobState_FIT_JOB_STATE_FAILED || codes.Code(r.Job.ErrorCode) != codes.Unavailable {
		t.Fatalf("job after Close: %v", r.Job)
	}
}
