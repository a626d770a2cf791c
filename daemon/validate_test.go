package daemon

import (
	"context"
	"fmt"
	"math"
	"strings"
	"testing"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	"github.com/mixd-dev/mixd/daemon/modeldoc"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// rpcCase is one call that must fail with code and a message containing msg.
type rpcCase struct {
	name string
	call func(ctx context.Context, c mixdv1.MixtureServiceClient) error
	code codes.Code
	msg  string
}

// runCases runs every case and checks that the store is unchanged.
func runCases(t *testing.T, e *testEnv, cases []rpcCase) {
	t.Helper()
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			before := e.store.dump()
			err := c.call(context.Background(), e.client)
			st := status.Convert(err)
			if st.Code() != c.code || !strings.Contains(st.Message(), c.msg) {
				t.Fatalf("got %s %q, want %s containing %q", st.Code(), st.Message(), c.code, c.msg)
			}
			if !sameDump(before, e.store.dump()) {
				t.Fatal("a rejected request changed the store")
			}
		})
	}
}

func rows2(vals ...float64) *mixdv1.Matrix {
	return &mixdv1.Matrix{Rows: int64(len(vals) / 2), Cols: 2, Values: vals}
}

// streamErr sends msgs on a stream call and returns the first error.
func scoreStreamErr(ctx context.Context, c mixdv1.MixtureServiceClient, msgs ...*mixdv1.ScoreStreamRequest) error {
	s, err := c.ScoreStream(ctx)
	if err != nil {
		return err
	}
	for _, m := range msgs {
		if err := s.Send(m); err != nil {
			break
		}
		if _, err := s.Recv(); err != nil {
			return err
		}
	}
	return fmt.Errorf("no error")
}

func classifyStreamErr(ctx context.Context, c mixdv1.MixtureServiceClient, msgs ...*mixdv1.ClassifyStreamRequest) error {
	s, err := c.ClassifyStream(ctx)
	if err != nil {
		return err
	}
	for _, m := range msgs {
		if err := s.Send(m); err != nil {
			break
		}
		if _, err := s.Recv(); err != nil {
			return err
		}
	}
	return fmt.Errorf("no error")
}

func sampleStreamErr(ctx context.Context, c mixdv1.MixtureServiceClient, req *mixdv1.SampleStreamRequest) error {
	s, err := c.SampleStream(ctx, req)
	if err != nil {
		return err
	}
	for {
		if _, err := s.Recv(); err != nil {
			return err
		}
	}
}

func TestServingValidation(t *testing.T) {
	e := envWithRef(t, Options{Limits: Limits{MaxRows: 10, MaxDimension: 4, MaxSampleCount: 100, MaxMessageBytes: 1 << 20}})
	e.store.corrupt["models/broken"] = true
	ok := rows2(1, 2)
	cases := []rpcCase{
		{"score bad name", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Score(ctx, &mixdv1.ScoreRequest{Model: "models/a b", Rows: ok})
			return err
		}, codes.InvalidArgument, "model: model id \"a b\""},
		{"score empty name", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Score(ctx, &mixdv1.ScoreRequest{Rows: ok})
			return err
		}, codes.InvalidArgument, "model: model id is empty"},
		{"score negative version", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Score(ctx, &mixdv1.ScoreRequest{Model: "pumps", Version: -2, Rows: ok})
			return err
		}, codes.InvalidArgument, "version is -2"},
		{"score unknown model", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Score(ctx, &mixdv1.ScoreRequest{Model: "nothing", Rows: ok})
			return err
		}, codes.NotFound, "models/nothing"},
		{"score unknown version", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Score(ctx, &mixdv1.ScoreRequest{Model: "pumps", Version: 9, Rows: ok})
			return err
		}, codes.NotFound, "version 9"},
		{"score corrupt model", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Score(ctx, &mixdv1.ScoreRequest{Model: "broken", Rows: ok})
			return err
		}, codes.DataLoss, "checksum"},
		{"score wrong dimension", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Score(ctx, &mixdv1.ScoreRequest{Model: "pumps", Rows: &mixdv1.Matrix{Rows: 1, Cols: 3, Values: []float64{1, 2, 3}}})
			return err
		}, codes.InvalidArgument, "rows.cols is 3 but model models/pumps version 1 has dimension 2"},
		{"score NaN", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Score(ctx, &mixdv1.ScoreRequest{Model: "pumps", Rows: rows2(1, 2, 3, math.NaN())})
			return err
		}, codes.InvalidArgument, "rows: value at row 1, column 1 is NaN"},
		{"score shape", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Score(ctx, &mixdv1.ScoreRequest{Model: "pumps", Rows: &mixdv1.Matrix{Rows: 2, Cols: 2, Values: []float64{1, 2, 3}}})
			return err
		}, codes.InvalidArgument, "rows.values has 3 values, want rows*cols = 2*2 = 4"},
		{"score too many rows", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Score(ctx, &mixdv1.ScoreRequest{Model: "pumps", Rows: rows2(make([]float64, 22)...)})
			return err
		}, codes.ResourceExhausted, "limit of 10 rows (mixd serve --max-rows)"},
		{"score too many columns", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Score(ctx, &mixdv1.ScoreRequest{Model: "pumps", Rows: &mixdv1.Matrix{Rows: 1, Cols: 5, Values: make([]float64, 5)}})
			return err
		}, codes.ResourceExhausted, "--max-dimension"},
		{"score encoding", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Score(ctx, &mixdv1.ScoreRequest{Model: "pumps", Rows: ok, ResponseEncoding: 7})
			return err
		}, codes.InvalidArgument, "response_encoding: unknown encoding 7"},
		{"classify min_posterior", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Classify(ctx, &mixdv1.ClassifyRequest{Model: "pumps", Rows: ok, MinPosterior: 1.5})
			return err
		}, codes.InvalidArgument, "min_posterior is 1.5, must be in [0, 1]"},
		{"classify NaN min_posterior", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Classify(ctx, &mixdv1.ClassifyRequest{Model: "pumps", Rows: ok, MinPosterior: math.NaN()})
			return err
		}, codes.InvalidArgument, "min_posterior is NaN"},
		{"classify bytes", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Classify(ctx, &mixdv1.ClassifyRequest{Model: "pumps", Rows: &mixdv1.Matrix{Rows: 1, Cols: 2, LittleEndian: make([]byte, 15)}})
			return err
		}, codes.InvalidArgument, "rows.little_endian has 15 bytes"},
		{"classify unknown model", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Classify(ctx, &mixdv1.ClassifyRequest{Model: "nothing", Rows: ok})
			return err
		}, codes.NotFound, "models/nothing"},
		{"sample negative", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Sample(ctx, &mixdv1.SampleRequest{Model: "pumps", Count: -1})
			return err
		}, codes.InvalidArgument, "count is -1"},
		{"sample over limit", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Sample(ctx, &mixdv1.SampleRequest{Model: "pumps", Count: 11})
			return err
		}, codes.ResourceExhausted, "use SampleStream"},
		{"sample unknown model", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.Sample(ctx, &mixdv1.SampleRequest{Model: "nothing", Count: 1})
			return err
		}, codes.NotFound, "models/nothing"},
		{"sample stream over limit", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			return sampleStreamErr(ctx, c, &mixdv1.SampleStreamRequest{Model: "pumps", Count: 101})
		}, codes.ResourceExhausted, "--max-sample-count"},
		{"sample stream negative chunk", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			return sampleStreamErr(ctx, c, &mixdv1.SampleStreamRequest{Model: "pumps", Count: 1, ChunkRows: -3})
		}, codes.InvalidArgument, "chunk_rows is -3"},
		{"sample stream chunk over limit", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			return sampleStreamErr(ctx, c, &mixdv1.SampleStreamRequest{Model: "pumps", Count: 1, ChunkRows: 11})
		}, codes.ResourceExhausted, "chunk_rows is 11"},
		{"sample stream bad name", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			return sampleStreamErr(ctx, c, &mixdv1.SampleStreamRequest{Model: "..", Count: 1})
		}, codes.InvalidArgument, "model: model id \"..\""},
		{"score stream unknown model", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			return scoreStreamErr(ctx, c, &mixdv1.ScoreStreamRequest{Model: "nothing", Rows: ok})
		}, codes.NotFound, "models/nothing"},
		{"score stream bad later chunk", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			return scoreStreamErr(ctx, c, &mixdv1.ScoreStreamRequest{Model: "pumps", Rows: ok},
				&mixdv1.ScoreStreamRequest{Rows: rows2(math.Inf(1), 0)})
		}, codes.InvalidArgument, "messages[1].rows: value at row 0, column 0 is +Inf"},
		{"score stream other version", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			return scoreStreamErr(ctx, c, &mixdv1.ScoreStreamRequest{Model: "pumps", Rows: ok},
				&mixdv1.ScoreStreamRequest{Version: 3, Rows: ok})
		}, codes.InvalidArgument, "messages[1].version is 3 but the stream serves version 1"},
		{"classify stream min_posterior", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			return classifyStreamErr(ctx, c, &mixdv1.ClassifyStreamRequest{Model: "pumps", Rows: ok, MinPosterior: -0.1})
		}, codes.InvalidArgument, "messages[0].min_posterior is -0.1"},
		{"classify stream other model", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			return classifyStreamErr(ctx, c, &mixdv1.ClassifyStreamRequest{Model: "pumps", Rows: ok},
				&mixdv1.ClassifyStreamRequest{Model: "x", Rows: ok})
		}, codes.InvalidArgument, "messages[1].model is models/x"},
	}
	runCases(t, e, cases)
}

func TestResponseSizeLimit(t *testing.T) {
	// 20 000 rows of 2 columns: 320 KB of log-densities and percentiles
	// fits a 1 MiB message; the component log-densities are also fine,
	// but a 100 000-row sample is not.
	e := envWithRef(t, Options{Limits: Limits{MaxMessageBytes: 1 << 20}})
	_, err := e.client.Sample(context.Background(), &mixdv1.SampleRequest{Model: "pumps", Count: 100_000})
	if status.Code(err) != codes.ResourceExhausted || !strings.Contains(err.Error(), "use SampleStream") {
		t.Fatalf("got %v", err)
	}
}

func TestModelManagementValidation(t *testing.T) {
	e := envWithRef(t, Options{Limits: Limits{MaxDimension: 4, MaxComponents: 1}})
	doc, err := modeldoc.Encode(refModel("models/pumps"))
	if err != nil {
		t.Fatal(err)
	}
	bigDim := refModel("models/big")
	bigDim.Parameters = &mixdv1.Parameters{Dimension: 5, Components: []*mixdv1.Component{{Weight: 1, Mean: make([]float64, 5), Covariance: identity(5)}},
		Family: mixdv1.Family_FAMILY_GAUSSIAN, CovarianceStructure: mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_FULL}
	bigDim.Report = nil
	bigDoc, err := modeldoc.Encode(bigDim)
	if err != nil {
		t.Fatal(err)
	}
	cases := []rpcCase{
		{"get bad name", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.GetModel(ctx, &mixdv1.GetModelRequest{Name: "models/"})
			return err
		}, codes.InvalidArgument, "name: model id is empty"},
		{"get missing", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.GetModel(ctx, &mixdv1.GetModelRequest{Name: "none"})
			return err
		}, codes.NotFound, "models/none"},
		{"get negative version", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.GetModel(ctx, &mixdv1.GetModelRequest{Name: "pumps", Version: -1})
			return err
		}, codes.InvalidArgument, "version is -1"},
		{"list negative page", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.ListModels(ctx, &mixdv1.ListModelsRequest{PageSize: -1})
			return err
		}, codes.InvalidArgument, "page_size is -1"},
		{"list bad token", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.ListModels(ctx, &mixdv1.ListModelsRequest{PageToken: "zz"})
			return err
		}, codes.InvalidArgument, "page token"},
		{"versions bad name", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.ListModelVersions(ctx, &mixdv1.ListModelVersionsRequest{Name: "a/b"})
			return err
		}, codes.InvalidArgument, "name: model id \"a/b\""},
		{"versions missing", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.ListModelVersions(ctx, &mixdv1.ListModelVersionsRequest{Name: "none"})
			return err
		}, codes.NotFound, "models/none"},
		{"delete missing", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.DeleteModel(ctx, &mixdv1.DeleteModelRequest{Name: "none"})
			return err
		}, codes.NotFound, "models/none"},
		{"delete missing version", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.DeleteModel(ctx, &mixdv1.DeleteModelRequest{Name: "pumps", Version: 4})
			return err
		}, codes.NotFound, "version 4"},
		{"delete negative version", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.DeleteModel(ctx, &mixdv1.DeleteModelRequest{Name: "pumps", Version: -4})
			return err
		}, codes.InvalidArgument, "version is -4"},
		{"export missing", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.ExportModel(ctx, &mixdv1.ExportModelRequest{Name: "none"})
			return err
		}, codes.NotFound, "models/none"},
		{"import empty", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.ImportModel(ctx, &mixdv1.ImportModelRequest{})
			return err
		}, codes.InvalidArgument, "document is empty"},
		{"import not JSON", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.ImportModel(ctx, &mixdv1.ImportModelRequest{Document: []byte("{oops")})
			return err
		}, codes.InvalidArgument, "document: model document"},
		{"import bad weights", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			bad := strings.Replace(string(doc), "0.7", "0.8", 1)
			_, err := c.ImportModel(ctx, &mixdv1.ImportModelRequest{Document: []byte(bad)})
			return err
		}, codes.InvalidArgument, "document:"},
		{"import bad rename", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.ImportModel(ctx, &mixdv1.ImportModelRequest{Document: doc, Name: "no way"})
			return err
		}, codes.InvalidArgument, "name: model id \"no way\""},
		{"import too many components", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.ImportModel(ctx, &mixdv1.ImportModelRequest{Document: doc})
			return err
		}, codes.ResourceExhausted, "2 components, above the limit of 1"},
		{"import too many dimensions", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.ImportModel(ctx, &mixdv1.ImportModelRequest{Document: bigDoc})
			return err
		}, codes.ResourceExhausted, "dimension 5 is above the limit of 4"},
		{"job bad name", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.GetFitJob(ctx, &mixdv1.GetFitJobRequest{Name: "jobs/1"})
			return err
		}, codes.InvalidArgument, "not a fit job name"},
		{"job missing", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.GetFitJob(ctx, &mixdv1.GetFitJobRequest{Name: "fitJobs/00"})
			return err
		}, codes.NotFound, "fit job \"fitJobs/00\" not found"},
		{"cancel missing job", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.CancelFitJob(ctx, &mixdv1.CancelFitJobRequest{Name: "fitJobs/00"})
			return err
		}, codes.NotFound, "not found"},
		{"watch missing job", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			s, err := c.WatchFitJob(ctx, &mixdv1.WatchFitJobRequest{Name: "fitJobs/00"})
			if err != nil {
				return err
			}
			_, err = s.Recv()
			return err
		}, codes.NotFound, "not found"},
		{"jobs bad token", func(ctx context.Context, c mixdv1.MixtureServiceClient) error {
			_, err := c.ListFitJobs(ctx, &mixdv1.ListFitJobsRequest{PageToken: "x"})
			return err
		}, codes.InvalidArgument, "page_token"},
	}
	runCases(t, e, cases)
}

func identity(d int) []float64 {
	m := make([]float64, d*d)
	for i := range d {
		m[i*d+i] = 1
	}
	return m
}

func TestModelManagement(t *testing.T) {
	e := envWithRef(t, Options{})
	ctx := context.Background()
	c := e.client
	// A second version and a second model.
	if _, err := e.store.Create(ctx, refModel("models/pumps")); err != nil {
		t.Fatal(err)
	}
	if _, err := e.store.Create(ctx, refModel("models/alpha")); err != nil {
		t.Fatal(err)
	}
	got, err := c.GetModel(ctx, &mixdv1.GetModelRequest{Name: "pumps"})
	if err != nil || got.Model.Version != 2 {
		t.Fatalf("newest: %v %v", got, err)
	}
	list, err := c.ListModels(ctx, &mixdv1.ListModelsRequest{PageSize: 1})
	if err != nil || len(list.Models) != 1 || list.Models[0].Name != "models/alpha" || list.NextPageToken == "" {
		t.Fatalf("first page: %v %v", list, err)
	}
	list, err = c.ListModels(ctx, &mixdv1.ListModelsRequest{PageSize: 1, PageToken: list.NextPageToken})
	if err != nil || len(list.Models) != 1 || list.Models[0].Name != "models/pumps" || list.Models[0].Version != 2 || list.NextPageToken != "" {
		t.Fatalf("second page: %v %v", list, err)
	}
	vers, err := c.ListModelVersions(ctx, &mixdv1.ListModelVersionsRequest{Name: "models/pumps"})
	if err != nil || len(vers.Models) != 2 || vers.Models[0].Version != 1 {
		t.Fatalf("versions: %v %v", vers, err)
	}

	// Export and import under a new name: a new model at version 1 that scores the same.
	exp, err := c.ExportModel(ctx, &mixdv1.ExportModelRequest{Name: "pumps", Version: 1})
	if err != nil {
		t.Fatal(err)
	}
	imp, err := c.ImportModel(ctx, &mixdv1.ImportModelRequest{Document: exp.Document, Name: "copy"})
	if err != nil {
		t.Fatal(err)
	}
	if imp.Model.Name != "models/copy" || imp.Model.Version != 1 || imp.Model.CreateTime == nil {
		t.Fatalf("imported %s version %d", imp.Model.Name, imp.Model.Version)
	}
	if !proto.Equal(imp.Model.Parameters, refModel("").Parameters) {
		t.Fatal("imported parameters differ")
	}
	// Importing again makes version 2 of the document's own name.
	imp2, err := c.ImportModel(ctx, &mixdv1.ImportModelRequest{Document: exp.Document})
	if err != nil || imp2.Model.Name != "models/pumps" || imp2.Model.Version != 3 {
		t.Fatalf("re-import: %v %v", imp2, err)
	}
	sc, err := c.Score(ctx, &mixdv1.ScoreRequest{Model: "copy", Rows: encodeMatrix(4, 2, refRows, false)})
	if err != nil {
		t.Fatal(err)
	}
	if ld := values(t, sc.LogDensities); !closeTo(ld[2], refLogDens[2], 1e-12) {
		t.Fatalf("imported model scores %v", ld)
	}

	// Delete evicts: the deleted version is gone from serving at once.
	if _, err := c.Score(ctx, &mixdv1.ScoreRequest{Model: "pumps", Rows: rows2(0, 0)}); err != nil {
		t.Fatal(err)
	}
	del, err := c.DeleteModel(ctx, &mixdv1.DeleteModelRequest{Name: "pumps", Version: 3})
	if err != nil || del.DeletedVersions != 1 {
		t.Fatalf("delete: %v %v", del, err)
	}
	sc, err = c.Score(ctx, &mixdv1.ScoreRequest{Model: "pumps", Rows: rows2(0, 0)})
	if err != nil || sc.Version != 2 {
		t.Fatalf("newest after deleting version 3: %v %v", sc, err)
	}
	del, err = c.DeleteModel(ctx, &mixdv1.DeleteModelRequest{Name: "models/pumps"})
	if err != nil || del.DeletedVersions != 2 {
		t.Fatalf("delete all: %v %v", del, err)
	}
	for _, v := range []int64{0, 1, 2} {
		if _, err := c.Score(ctx, &mixdv1.ScoreRequest{Model: "pumps", Version: v, Rows: rows2(0, 0)}); status.Code(err) != codes.NotFound {
			t.Fatalf("version %d after delete: %v", v, err)
		}
	}
}

func TestFittersListAndReload(t *testing.T) {
	e := newTestEnv(t, Options{})
	e.host.problems = []string{"/plugins/broken: handshake failed"}
	ctx := context.Background()
	l, err := e.client.ListFitters(ctx, &mixdv1.ListFittersRequest{})
	if err != nil {
		t.Fatal(err)
	}
	if len(l.Fitters) != 2 || l.Fitters[0].Name != "em" || l.Fitters[0].Version != "1.2.3" || l.Fitters[0].Source != "built-in" || l.Fitters[1].Name != "tfake" {
		t.Fatalf("fitters %v", l.Fitters)
	}
	if len(l.Fitters[0].Families) != 1 || l.Fitters[0].Families[0] != mixdv1.Family_FAMILY_GAUSSIAN {
		t.Fatalf("families %v", l.Fitters[0].Families)
	}
	r, err := e.client.ReloadFitters(ctx, &mixdv1.ReloadFittersRequest{})
	if err != nil || len(r.Problems) != 1 || len(r.Fitters) != 2 || e.host.reloadCount() != 1 {
		t.Fatalf("reload: %v %v", r, err)
	}
}
