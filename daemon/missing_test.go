package daemon

import (
	"context"
	"encoding/binary"
	"math"
	"slices"
	"testing"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	"github.com/mixd-dev/mixd/fitters/mixture"
	"github.com/mixd-dev/mixd/fitters/pbconv"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// builtModel builds the mixture of a stored model, as the daemon does.
func builtModel(t *testing.T, m *mixdv1.Model) *mixture.Model {
	t.Helper()
	p, err := pbconv.ParamsFromProto(m.GetParameters())
	if err != nil {
		t.Fatal(err)
	}
	mm, err := mixture.New(p)
	if err != nil {
		t.Fatal(err)
	}
	return mm
}

// maskedRows are refRows with some values unobserved: row 0 complete, row 1
// flow only, row 2 current only, row 3 nothing observed.
var (
	maskedRows  = []float64{0.1, -0.2, 3, 0, 0, -4, 0, 0}
	maskedBytes = []byte{1, 1, 1, 0, 0, 1, 0, 0}
)

// rawValues decodes a response matrix that may hold NaN.
func rawValues(m *mixdv1.Matrix) []float64 {
	if b := m.GetLittleEndian(); len(b) > 0 {
		out := make([]float64, len(b)/8)
		for i := range out {
			out[i] = math.Float64frombits(binary.LittleEndian.Uint64(b[8*i:]))
		}
		return out
	}
	return m.GetValues()
}

func maskBools(b []byte) []bool {
	out := make([]bool, len(b))
	for i, v := range b {
		out[i] = v == 1
	}
	return out
}

// TestScoreClassifyWithMask checks that masked Score and Classify (unary and
// streamed, both encodings) return what the in-process marginal evaluation
// computes (itself checked against scipy in fitters/mixture), that rows with
// an unobserved feature get a NaN percentile, and that an all-ones mask
// gives exactly the unmasked response.
func TestScoreClassifyWithMask(t *testing.T) {
	e := newTestEnv(t, Options{})
	ctx := context.Background()
	for _, pb := range []*mixdv1.Model{refModel("models/pumps"), robustRef("models/robust", 0.99)} {
		if _, err := e.store.Create(ctx, pb); err != nil {
			t.Fatal(err)
		}
	}
	for _, name := range []string{"pumps", "robust"} {
		stored, err := e.client.GetModel(ctx, &mixdv1.GetModelRequest{Name: name})
		if err != nil {
			t.Fatal(err)
		}
		m := builtModel(t, stored.Model)
		k := m.K()
		want := mixture.MarginalOutput{
			LogDensity: make([]float64, 4), ComponentLogDensity: make([]float64, 4*k),
			Posteriors: make([]float64, 4*k), Labels: make([]int, 4), MaxPosterior: make([]float64, 4),
			OutlierStatistic: make([]float64, 4), Outlier: make([]bool, 4), OutlierLevel: 0.99,
		}
		if err := m.Marginal(maskedRows, maskBools(maskedBytes), &want); err != nil {
			t.Fatal(err)
		}
		for _, little := range []bool{false, true} {
			rows := encodeMatrix(4, 2, maskedRows, little)
			sr, err := e.client.Score(ctx, &mixdv1.ScoreRequest{Model: name, Rows: rows, ObservedMask: maskedBytes,
				IncludeComponentLogDensities: true, OutlierLevel: 0.99})
			if err != nil {
				t.Fatal(err)
			}
			if !slices.Equal(values(t, sr.LogDensities), want.LogDensity) ||
				!slices.Equal(values(t, sr.ComponentLogDensities), want.ComponentLogDensity) {
				t.Errorf("%s: masked scores differ from the in-process marginal", name)
			}
			pct := rawValues(sr.Percentiles)
			if math.IsNaN(pct[0]) || !math.IsNaN(pct[1]) || !math.IsNaN(pct[2]) || !math.IsNaN(pct[3]) {
				t.Errorf("%s: percentiles %v, want a number for the complete row and NaN for the others", name, pct)
			}
			if want.LogDensity[3] != 0 {
				t.Errorf("nothing observed: log-density %v", want.LogDensity[3])
			}
			if name == "robust" {
				if !slices.Equal(values(t, sr.OutlierStatistics), want.OutlierStatistic) || !slices.Equal(sr.Outliers, want.Outlier) {
					t.Errorf("masked outliers %v %v, in-process %v %v", values(t, sr.OutlierStatistics), sr.Outliers, want.OutlierStatistic, want.Outlier)
				}
			}
			cr, err := e.client.Classify(ctx, &mixdv1.ClassifyRequest{Model: name, Rows: rows, ObservedMask: maskedBytes, IncludePosteriors: true, MinPosterior: 0.9})
			if err != nil {
				t.Fatal(err)
			}
			if !slices.Equal(labelValues(t, cr.Components, 4), want.Labels) ||
				!slices.Equal(values(t, cr.MaxPosteriors), want.MaxPosterior) ||
				!slices.Equal(values(t, cr.Posteriors), want.Posteriors) {
				t.Errorf("%s: masked classification differs from the in-process marginal", name)
			}
			for i, ok := range cr.Confident {
				if ok != (want.MaxPosterior[i] >= 0.9) {
					t.Errorf("row %d: confident %v with max posterior %v", i, ok, want.MaxPosterior[i])
				}
			}
		}

		// Streams: one mask per message.
		ss, err := e.client.ScoreStream(ctx)
		if err != nil {
			t.Fatal(err)
		}
		for c := 0; c < 2; c++ {
			req := &mixdv1.ScoreStreamRequest{Rows: rows2(maskedRows[4*c : 4*c+4]...), ObservedMask: maskedBytes[4*c : 4*c+4]}
			if c == 0 {
				req.Model = name
			}
			if err := ss.Send(req); err != nil {
				t.Fatal(err)
			}
			resp, err := ss.Recv()
			if err != nil {
				t.Fatal(err)
			}
			if !slices.Equal(values(t, resp.LogDensities), want.LogDensity[2*c:2*c+2]) {
				t.Errorf("%s: stream chunk %d log-densities %v, want %v", name, c, values(t, resp.LogDensities), want.LogDensity[2*c:2*c+2])
			}
		}
		ss.CloseSend()
		cs, err := e.client.ClassifyStream(ctx)
		if err != nil {
			t.Fatal(err)
		}
		if err := cs.Send(&mixdv1.ClassifyStreamRequest{Model: name, Rows: rows2(maskedRows...), ObservedMask: maskedBytes}); err != nil {
			t.Fatal(err)
		}
		cresp, err := cs.Recv()
		if err != nil {
			t.Fatal(err)
		}
		if !slices.Equal(values(t, cresp.MaxPosteriors), want.MaxPosterior) {
			t.Errorf("%s: streamed classification differs", name)
		}
		cs.CloseSend()
	}

	// An all-ones mask is the unmasked request.
	plain, err := e.client.Score(ctx, &mixdv1.ScoreRequest{Model: "pumps", Rows: rows2(refRows...)})
	if err != nil {
		t.Fatal(err)
	}
	ones, err := e.client.Score(ctx, &mixdv1.ScoreRequest{Model: "pumps", Rows: rows2(refRows...), ObservedMask: []byte{1, 1, 1, 1, 1, 1, 1, 1}})
	if err != nil {
		t.Fatal(err)
	}
	if !proto.Equal(plain, ones) {
		t.Error("an all-ones mask changed the response")
	}
	// scipy reference values (refLogDens) for the complete row.
	if ld := values(t, ones.LogDensities); !closeTo(ld[0], refLogDens[0], 1e-12) {
		t.Errorf("complete row %v, scipy %v", ld[0], refLogDens[0])
	}
}

// TestMaskValidation checks that bad masks are rejected with the field, row
// and column named, and change nothing stored.
func TestMaskValidation(t *testing.T) {
	e := envWithRef(t, Options{})
	rows := rows2(maskedRows...)
	runCases(t, e, []rpcCase{
		{"score short mask", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Score(ctx, &mixdv1.ScoreRequest{Model: "pumps", Rows: rows, ObservedMask: []byte{1, 0}})
			return err
		}, codes.InvalidArgument, "observed_mask has 2 bytes, want one per value, rows*cols = 4*2 = 8"},
		{"score bad byte", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Score(ctx, &mixdv1.ScoreRequest{Model: "pumps", Rows: rows, ObservedMask: []byte{1, 1, 1, '0', 1, 1, 1, 1}})
			return err
		}, codes.InvalidArgument, "observed_mask: byte for row 1, column 1 is 48; want 1 (observed) or 0 (unobserved)"},
		{"classify bad byte", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Classify(ctx, &mixdv1.ClassifyRequest{Model: "pumps", Rows: rows, ObservedMask: []byte{2, 1, 1, 1, 1, 1, 1, 1}})
			return err
		}, codes.InvalidArgument, "observed_mask: byte for row 0, column 0 is 2"},
		{"NaN at an unobserved position", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Score(ctx, &mixdv1.ScoreRequest{Model: "pumps", Rows: rows2(1, math.NaN()), ObservedMask: []byte{1, 0}})
			return err
		}, codes.InvalidArgument, "rows: value at row 0, column 1 is NaN; values must be finite"},
		{"stream mask", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			return scoreStreamErr(ctx, c,
				&mixdv1.ScoreStreamRequest{Model: "pumps", Rows: rows2(1, 2), ObservedMask: []byte{1, 0}},
				&mixdv1.ScoreStreamRequest{Rows: rows2(1, 2), ObservedMask: []byte{1}})
		}, codes.InvalidArgument, "messages[1].observed_mask has 1 bytes"},
		{"predict mask", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Predict(ctx, &mixdv1.PredictRequest{Model: "pumps", Rows: rows, ObservedMask: []byte{1, 1, 1}})
			return err
		}, codes.InvalidArgument, "observed_mask has 3 bytes"},
	})
}

// TestPredictMatchesConditional checks Predict against the in-process
// conditional (itself checked against Bishop's formulas and scipy in
// fitters/mixture), for every optional output and both encodings.
func TestPredictMatchesConditional(t *testing.T) {
	e := newTestEnv(t, Options{})
	ctx := context.Background()
	for _, pb := range []*mixdv1.Model{refModel("models/pumps"), robustRef("models/robust", 0.99)} {
		if _, err := e.store.Create(ctx, pb); err != nil {
			t.Fatal(err)
		}
	}
	for _, name := range []string{"pumps", "robust"} {
		stored, err := e.client.GetModel(ctx, &mixdv1.GetModelRequest{Name: name})
		if err != nil {
			t.Fatal(err)
		}
		m := builtModel(t, stored.Model)
		opts := mixture.ConditionalOptions{StdDev: true, Covariance: true, Components: true, ComponentScales: true, Draws: 3, Seed: 5, FirstRow: 10}
		want, err := m.Conditional(maskedRows, maskBools(maskedBytes), opts)
		if err != nil {
			t.Fatal(err)
		}
		for _, little := range []bool{false, true} {
			resp, err := e.client.Predict(ctx, &mixdv1.PredictRequest{
				Model: name, Rows: encodeMatrix(4, 2, maskedRows, little), ObservedMask: maskedBytes,
				IncludeStandardDeviations: true, IncludeCovariances: true, IncludeComponents: true, IncludeComponentScales: true,
				Draws: 3, Seed: 5, FirstRow: 10,
			})
			if err != nil {
				t.Fatal(err)
			}
			if resp.Model != "models/"+name || resp.Version != 1 {
				t.Errorf("model %s version %d", resp.Model, resp.Version)
			}
			for _, c := range []struct {
				field      string
				got        *mixdv1.Matrix
				want       []float64
				rows, cols int64
			}{
				{"means", resp.Means, want.Mean, 4, 2},
				{"standard_deviations", resp.StandardDeviations, want.StdDev, 4, 2},
				{"covariances", resp.Covariances, want.Cov, 4, 4},
				{"log_densities", resp.LogDensities, want.LogDensity, 4, 1},
				{"posteriors", resp.Posteriors, want.Posteriors, 4, 2},
				{"component_means", resp.ComponentMeans, want.ComponentMeans, 4, 4},
				{"component_scales", resp.ComponentScales, want.ComponentScales, 4, 8},
				{"draws", resp.Draws, want.Draws, 12, 2},
			} {
				if c.got.GetRows() != c.rows || c.got.GetCols() != c.cols || !slices.Equal(values(t, c.got), c.want) {
					t.Errorf("%s %s: %d×%d %v, in-process %v", name, c.field, c.got.GetRows(), c.got.GetCols(), values(t, c.got), c.want)
				}
				if (len(c.got.GetLittleEndian()) > 0) != little {
					t.Errorf("%s: encoding does not follow the input", c.field)
				}
			}
			if name == "robust" {
				if !slices.Equal(values(t, resp.ComponentDegreesOfFreedom), want.ComponentDF) {
					t.Errorf("component degrees of freedom %v, want %v", values(t, resp.ComponentDegreesOfFreedom), want.ComponentDF)
				}
			} else if resp.ComponentDegreesOfFreedom != nil {
				t.Error("degrees of freedom for a Gaussian model")
			}
		}
		// Only the means by default.
		resp, err := e.client.Predict(ctx, &mixdv1.PredictRequest{Model: name, Rows: rows2(maskedRows...), ObservedMask: maskedBytes})
		if err != nil {
			t.Fatal(err)
		}
		if resp.StandardDeviations != nil || resp.Covariances != nil || resp.Posteriors != nil || resp.Draws != nil {
			t.Error("outputs not asked for were returned")
		}
		if !slices.Equal(values(t, resp.Means), want.Mean) {
			t.Error("means differ")
		}
	}
}

// TestPredictErrors checks validation, limits and the missing-moment error.
func TestPredictErrors(t *testing.T) {
	e := newTestEnv(t, Options{Limits: Limits{MaxRows: 10}})
	ctx := context.Background()
	heavy := refModel("models/heavy")
	heavy.Parameters.Family = mixdv1.Family_FAMILY_STUDENT_T
	heavy.Parameters.Components[0].DegreesOfFreedom = 0.8
	heavy.Parameters.Components[1].DegreesOfFreedom = 0.9
	for _, pb := range []*mixdv1.Model{refModel("models/pumps"), heavy} {
		if _, err := e.store.Create(ctx, pb); err != nil {
			t.Fatal(err)
		}
	}
	rows := rows2(maskedRows...)
	runCases(t, e, []rpcCase{
		{"negative draws", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Predict(ctx, &mixdv1.PredictRequest{Model: "pumps", Rows: rows, Draws: -1})
			return err
		}, codes.InvalidArgument, "draws is -1"},
		{"negative first row", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Predict(ctx, &mixdv1.PredictRequest{Model: "pumps", Rows: rows, FirstRow: -2})
			return err
		}, codes.InvalidArgument, "first_row is -2"},
		{"rows times draws", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Predict(ctx, &mixdv1.PredictRequest{Model: "pumps", Rows: rows, ObservedMask: maskedBytes, Draws: 3})
			return err
		}, codes.ResourceExhausted, "rows × draws is 4 × 3 = 12, above the limit of 10 drawn rows per response (mixd serve --max-rows)"},
		{"too many rows", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Predict(ctx, &mixdv1.PredictRequest{Model: "pumps", Rows: &mixdv1.Matrix{Rows: 11, Cols: 2, Values: make([]float64, 22)}})
			return err
		}, codes.ResourceExhausted, "rows.rows is 11, above the limit of 10 rows"},
		{"wrong dimension", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Predict(ctx, &mixdv1.PredictRequest{Model: "pumps", Rows: &mixdv1.Matrix{Rows: 1, Cols: 3, Values: []float64{1, 2, 3}}})
			return err
		}, codes.InvalidArgument, "rows.cols is 3 but model models/pumps version 1 has dimension 2"},
		{"unknown model", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Predict(ctx, &mixdv1.PredictRequest{Model: "nope", Rows: rows})
			return err
		}, codes.NotFound, "models/nope"},
		{"no covariance", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Predict(ctx, &mixdv1.PredictRequest{Model: "heavy", Rows: rows2(1, 0), ObservedMask: []byte{1, 0}, IncludeStandardDeviations: true})
			return err
		}, codes.FailedPrecondition, "covariance does not exist"},
	})
	// The mean alone exists for that model (ν + 1 > 1).
	if _, err := e.client.Predict(ctx, &mixdv1.PredictRequest{Model: "heavy", Rows: rows2(1, 0), ObservedMask: []byte{1, 0}}); err != nil {
		t.Errorf("mean only: %v", err)
	}
}

// TestCompareModels checks CompareModels over two versions of one model and
// two models: the result equals the in-process comparison (itself checked
// against the closed-form Gaussian KL in fitters/mixture), a version compared
// with itself gives 0, and bad requests are rejected naming the field.
func TestCompareModels(t *testing.T) {
	e := newTestEnv(t, Options{Limits: Limits{MaxSampleCount: 50000}})
	ctx := context.Background()
	v1 := refModel("models/pumps")
	v2 := refModel("models/pumps")
	v2.Parameters.Components[1].Mean = []float64{3.5, 1}
	v2.Parameters.Components[0].Weight, v2.Parameters.Components[1].Weight = 0.4, 0.6
	other := refModel("models/other")
	other.Parameters.FeatureNames = []string{"flow", "vibration"}
	three := &mixdv1.Model{Name: "models/three", Parameters: &mixdv1.Parameters{
		Dimension: 3, Family: mixdv1.Family_FAMILY_GAUSSIAN, CovarianceStructure: mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_DIAGONAL,
		Components: []*mixdv1.Component{{Weight: 1, Mean: []float64{0, 0, 0}, Covariance: []float64{1, 0, 0, 0, 1, 0, 0, 0, 1}}},
	}}
	for _, pb := range []*mixdv1.Model{v1, v2, other, three} {
		if _, err := e.store.Create(ctx, pb); err != nil {
			t.Fatal(err)
		}
	}
	resp, err := e.client.CompareModels(ctx, &mixdv1.CompareModelsRequest{Model: "pumps", Version: 1, OtherVersion: 2, Samples: 4000, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	want, err := mixture.Compare(ctx, builtModel(t, v1), builtModel(t, v2), mixture.CompareOptions{Samples: 4000, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	if resp.Model != "models/pumps" || resp.Version != 1 || resp.OtherModel != "models/pumps" || resp.OtherVersion != 2 || resp.Samples != 4000 {
		t.Errorf("names %s@%d %s@%d samples %d", resp.Model, resp.Version, resp.OtherModel, resp.OtherVersion, resp.Samples)
	}
	if resp.KlForward != want.Forward || resp.KlForwardStandardError != want.ForwardSE ||
		resp.KlBackward != want.Backward || resp.KlBackwardStandardError != want.BackwardSE {
		t.Errorf("KL %v ± %v / %v ± %v, in-process %+v", resp.KlForward, resp.KlForwardStandardError, resp.KlBackward, resp.KlBackwardStandardError, want)
	}
	if !(resp.KlForward > 3*resp.KlForwardStandardError) || resp.ComponentDistance != "bhattacharyya" {
		t.Errorf("drift not detected: %v ± %v", resp.KlForward, resp.KlForwardStandardError)
	}
	if len(resp.Matches) != 2 || resp.Matches[1].OtherComponent != 1 || resp.Matches[1].Distance != want.Matches[1].Distance ||
		resp.Matches[0].Weight != 0.3 || resp.Matches[0].OtherWeight != 0.4 {
		t.Errorf("matches %v, in-process %+v", resp.Matches, want.Matches)
	}
	same, err := e.client.CompareModels(ctx, &mixdv1.CompareModelsRequest{Model: "pumps", Version: 2, OtherVersion: 2, Samples: 100})
	if err != nil {
		t.Fatal(err)
	}
	if same.KlForward != 0 || same.KlBackward != 0 || same.Matches[0].Distance != 0 {
		t.Errorf("a version against itself: %v %v %v", same.KlForward, same.KlBackward, same.Matches)
	}
	if def, err := e.client.CompareModels(ctx, &mixdv1.CompareModelsRequest{Model: "pumps", OtherModel: "models/pumps"}); err != nil || def.Samples != mixture.DefaultCompareSamples {
		t.Errorf("default samples: %v %v", def.GetSamples(), err)
	}

	runCases(t, e, []rpcCase{
		{"one sample", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.CompareModels(ctx, &mixdv1.CompareModelsRequest{Model: "pumps", Samples: 1})
			return err
		}, codes.InvalidArgument, "samples is 1, must be at least 2"},
		{"negative samples", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.CompareModels(ctx, &mixdv1.CompareModelsRequest{Model: "pumps", Samples: -5})
			return err
		}, codes.InvalidArgument, "samples is -5"},
		{"samples limit", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.CompareModels(ctx, &mixdv1.CompareModelsRequest{Model: "pumps", Samples: 50001})
			return err
		}, codes.ResourceExhausted, "samples is 50001, above the limit of 50000 draws per call (mixd serve --max-sample-count)"},
		{"other version", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.CompareModels(ctx, &mixdv1.CompareModelsRequest{Model: "pumps", OtherVersion: -1})
			return err
		}, codes.InvalidArgument, "other_version is -1"},
		{"missing version", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.CompareModels(ctx, &mixdv1.CompareModelsRequest{Model: "pumps", OtherVersion: 9})
			return err
		}, codes.NotFound, "version 9"},
		{"bad other name", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.CompareModels(ctx, &mixdv1.CompareModelsRequest{Model: "pumps", OtherModel: "a/b"})
			return err
		}, codes.InvalidArgument, "other_model"},
		{"dimensions", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.CompareModels(ctx, &mixdv1.CompareModelsRequest{Model: "pumps", OtherModel: "three"})
			return err
		}, codes.InvalidArgument, "has dimension 2 but other_model models/three version 1 has dimension 3"},
		{"features", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.CompareModels(ctx, &mixdv1.CompareModelsRequest{Model: "pumps", OtherModel: "other"})
			return err
		}, codes.InvalidArgument, "has features [flow current] but other_model models/other version 1 has [flow vibration]"},
	})
}

// FuzzDecodeMask decodes arbitrary mask bytes for a matrix of arbitrary
// shape: no panic; accepted exactly when the mask is empty or holds one 0/1
// byte per value; an accepted mask means what its bytes say, and an all-ones
// mask decodes to nil (the unmasked path).
func FuzzDecodeMask(f *testing.F) {
	f.Add(uint8(2), uint8(2), []byte{1, 0, 0, 1})
	f.Add(uint8(1), uint8(3), []byte{1, 1, 1})
	f.Add(uint8(0), uint8(4), []byte{})
	f.Add(uint8(3), uint8(1), []byte{1, 2, 0})
	f.Add(uint8(2), uint8(2), []byte{1, 0, 0})
	f.Fuzz(func(t *testing.T, rows, cols uint8, b []byte) {
		x := matrix{rows: int(rows), cols: int(cols)}
		mask, err := decodeMask("observed_mask", b, x)
		valid := len(b) == 0 || len(b) == int(rows)*int(cols)
		allOnes := true
		for _, v := range b {
			valid = valid && v <= 1
			allOnes = allOnes && v == 1
		}
		if valid != (err == nil) {
			t.Fatalf("rows %d cols %d mask %v: error %v", rows, cols, b, err)
		}
		if err != nil {
			if c := status.Code(err); c != codes.InvalidArgument {
				t.Fatalf("code %v", c)
			}
			return
		}
		if allOnes {
			if mask != nil {
				t.Fatal("all-ones mask not decoded to nil")
			}
			return
		}
		for i, v := range b {
			if mask[i] != (v == 1) {
				t.Fatalf("value %d: %v from byte %d", i, mask[i], v)
			}
		}
	})
}
