package daemon

import (
	"context"
	"strings"
	"testing"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"github.com/mixd-dev/mixd/fitters/mixture"
	"github.com/mixd-dev/mixd/fitters/pbconv"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// robustRef is a Student-t model stored with the outlier level its fit used.
func robustRef(name string, level float64) *mixdv1.Model {
	m := refModel(name)
	m.Parameters.Family = mixdv1.Family_FAMILY_STUDENT_T
	m.Parameters.Components[0].DegreesOfFreedom = 4
	m.Parameters.Components[1].DegreesOfFreedom = 7.5
	m.Report.Fitter = "tmix"
	m.Report.OutlierLevel = level
	return m
}

// TestScoreOutliersFollowTheModelRule checks that Score reports, for
// Student-t models, the statistic and flag of mixture.Model.Outliers (the rule
// the t fitter applies to its training rows; the rule itself is checked
// against scipy in fitters/mixture) at the request's level, else the model's.
func TestScoreOutliersFollowTheModelRule(t *testing.T) {
	e := newTestEnv(t, Options{})
	ctx := context.Background()
	if _, err := e.store.Create(ctx, robustRef("models/robust", 0.99)); err != nil {
		t.Fatal(err)
	}
	if _, err := e.store.Create(ctx, refModel("models/plain")); err != nil {
		t.Fatal(err)
	}
	p, err := pbconv.ParamsFromProto(robustRef("models/robust", 0.99).Parameters)
	if err != nil {
		t.Fatal(err)
	}
	m, err := mixture.New(p)
	if err != nil {
		t.Fatal(err)
	}
	rows := append(append([]float64(nil), refRows...), 40, -25) // the last row is far from both components
	n := len(rows) / 2
	for _, tc := range []struct {
		name      string
		requested float64
		level     float64
	}{
		{"model level", 0, 0.99},
		{"request level", 0.5, 0.5},
	} {
		t.Run(tc.name, func(t *testing.T) {
			resp, err := e.client.Score(ctx, &mixdv1.ScoreRequest{
				Model: "robust", Rows: &mixdv1.Matrix{Rows: int64(n), Cols: 2, Values: rows}, OutlierLevel: tc.requested,
			})
			if err != nil {
				t.Fatal(err)
			}
			wantStat := make([]float64, n)
			wantFlag := make([]bool, n)
			if err := m.Outliers(rows, tc.level, wantStat, wantFlag); err != nil {
				t.Fatal(err)
			}
			gotStat := values(t, resp.GetOutlierStatistics())
			if len(gotStat) != n || len(resp.GetOutliers()) != n {
				t.Fatalf("got %d statistics and %d flags, want %d", len(gotStat), len(resp.GetOutliers()), n)
			}
			for i := range n {
				if gotStat[i] != wantStat[i] || resp.GetOutliers()[i] != wantFlag[i] {
					t.Errorf("row %d: got (%v, %v), want (%v, %v)", i, gotStat[i], resp.GetOutliers()[i], wantStat[i], wantFlag[i])
				}
			}
			if !resp.GetOutliers()[n-1] {
				t.Errorf("the far row is not flagged at level %v", tc.level)
			}
		})
	}

	// Gaussian models carry no outlier fields.
	resp, err := e.client.Score(ctx, &mixdv1.ScoreRequest{Model: "plain", Rows: &mixdv1.Matrix{Rows: int64(n), Cols: 2, Values: rows}})
	if err != nil {
		t.Fatal(err)
	}
	if resp.GetOutlierStatistics() != nil || resp.GetOutliers() != nil {
		t.Errorf("gaussian model returned outlier fields")
	}

	// A level outside (0, 1) is rejected, naming the field.
	for _, bad := range []float64{1, 1.5, -0.1} {
		_, err := e.client.Score(ctx, &mixdv1.ScoreRequest{Model: "robust", Rows: &mixdv1.Matrix{Rows: 1, Cols: 2, Values: []float64{0, 0}}, OutlierLevel: bad})
		if status.Code(err) != codes.InvalidArgument || !contains(status.Convert(err).Message(), "outlier_level") {
			t.Errorf("level %v: got %v, want INVALID_ARGUMENT naming outlier_level", bad, err)
		}
	}
}

func contains(s, sub string) bool { return strings.Contains(s, sub) }
