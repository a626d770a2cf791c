package daemon

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"io/fs"
	"log/slog"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"github.com/mixd-dev/mixd/daemon/modeldoc"
	"github.com/mixd-dev/mixd/daemon/store"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// dirSnapshot maps every file under dir to a hash of its content.
func dirSnapshot(t *testing.T, dir string) map[string]string {
	t.Helper()
	out := map[string]string{}
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		sum := sha256.Sum256(b)
		out[p] = hex.EncodeToString(sum[:])
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return out
}

func sameSnapshot(a, b map[string]string) bool {
	if len(a) != len(b) {
		return false
	}
	for k, v := range a {
		if b[k] != v {
			return false
		}
	}
	return true
}

// TestWithDirStore runs a fit, an import and rejected requests against the
// real directory store.
func TestWithDirStore(t *testing.T) {
	dir := t.TempDir()
	ds, err := store.OpenDir(dir, store.WithLogger(slog.New(slog.DiscardHandler)))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { ds.Close() })
	_, client, _ := serveOver(t, Options{Store: ds, Host: newFakeHost()})
	ctx := context.Background()
	data := pumpRows(100, 5)
	evs, err := fitEvents(ctx, client, &mixdv1.FitRequest{Spec: spec("pumps", 2), Chunk: chunk(data, true)})
	if err != nil {
		t.Fatal(err)
	}
	model := evs[len(evs)-1].GetModel()
	got, err := ds.Get(ctx, "models/pumps", 0)
	if err != nil || got.Version != 1 || len(got.Report.TrainingQuantiles.Levels) != len(QuantileLevels) {
		t.Fatalf("stored: %v %v", got, err)
	}
	if model.Version != got.Version || !model.CreateTime.AsTime().Equal(got.CreateTime.AsTime()) {
		t.Fatal("the fit reported a model other than the stored one")
	}

	doc, err := modeldoc.Encode(refModel("models/ref"))
	if err != nil {
		t.Fatal(err)
	}
	imp, err := client.ImportModel(ctx, &mixdv1.ImportModelRequest{Document: doc})
	if err != nil || imp.Model.Version != 1 {
		t.Fatalf("import: %v %v", imp, err)
	}
	sc, err := client.Score(ctx, &mixdv1.ScoreRequest{Model: "ref", Rows: encodeMatrix(4, 2, refRows, false)})
	if err != nil {
		t.Fatal(err)
	}
	for i, v := range values(t, sc.LogDensities) {
		if !closeTo(v, refLogDens[i], 1e-12) {
			t.Fatalf("row %d: %v, scipy %v", i, v, refLogDens[i])
		}
	}

	before := dirSnapshot(t, dir)
	for _, call := range []func() error{
		func() error {
			_, err := fitEvents(ctx, client, &mixdv1.FitRequest{Spec: spec("pumps", 2), Chunk: chunk([]float64{1, 2, 3}, false)})
			return err
		},
		func() error {
			_, err := client.ImportModel(ctx, &mixdv1.ImportModelRequest{Document: []byte(strings.Replace(string(doc), "0.3", "0.4", 1))})
			return err
		},
		func() error {
			_, err := client.DeleteModel(ctx, &mixdv1.DeleteModelRequest{Name: "pumps", Version: 7})
			return err
		},
	} {
		if c := status.Code(call()); c != codes.InvalidArgument && c != codes.NotFound {
			t.Fatalf("rejected request: %s", c)
		}
	}
	if !sameSnapshot(before, dirSnapshot(t, dir)) {
		t.Fatal("rejected requests changed the store directory")
	}
}
