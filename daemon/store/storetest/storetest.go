// Package storetest is the conformance suite for store.Store
// implementations: every store runs Run against fresh instances of itself.
package storetest

import (
	"context"
	"errors"
	"fmt"
	"sync"
	"testing"
	"time"

	"google.golang.org/protobuf/proto"

	"github.com/mixd-dev/mixd/daemon/store"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// Model returns a valid two-component, two-feature Gaussian model named
// name (a bare id or "models/{id}"). Models with different variants differ
// in their means, so a test can tell versions apart.
func Model(name string, variant int) *mixdv1.Model {
	v := float64(variant)
	return &mixdv1.Model{
		Name: name,
		Parameters: &mixdv1.Parameters{
			Dimension:           2,
			FeatureNames:        []string{"flow_lps", "motor_current_a"},
			Family:              mixdv1.Family_FAMILY_GAUSSIAN,
			CovarianceStructure: mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_FULL,
			Components: []*mixdv1.Component{
				{Weight: 0.625, Mean: []float64{41.5 + v, 18.25}, Covariance: []float64{4, 0.75, 0.75, 0.5}},
				{Weight: 0.375, Mean: []float64{33.75, 21.5 + v/8}, Covariance: []float64{9, -1.25, -1.25, 1.5}},
			},
		},
		Report: &mixdv1.FitReport{
			Fitter:        "em",
			FitterVersion: "test",
			Settings:      map[string]string{"components": "2"},
			Seed:          uint64(variant),
			Iterations:    12,
			Converged:     true,
			Objective:     "log_likelihood",
			LogLikelihood: -1234.5 - v,
			TrainingRows:  500,
			History:       []float64{-1300.25, -1240, -1234.5 - v},
		},
	}
}

// Run runs the conformance suite. open must return a new, empty store for
// each call; Run closes it. corrupt, when not nil, must damage the stored
// version so that reading it fails (a truncated file, a flipped byte...);
// without it the corruption tests are skipped.
func Run(t *testing.T, open func(t *testing.T) store.Store, corrupt func(t *testing.T, s store.Store, name string, version int64)) {
	fresh := func(t *testing.T) store.Store {
		t.Helper()
		s := open(t)
		t.Cleanup(func() { _ = s.Close() })
		return s
	}
	t.Run("CreateAndGet", func(t *testing.T) { testCreateAndGet(t, fresh(t)) })
	t.Run("CreateInvalid", func(t *testing.T) { testCreateInvalid(t, fresh(t)) })
	t.Run("GetErrors", func(t *testing.T) { testGetErrors(t, fresh(t)) })
	t.Run("ListPagination", func(t *testing.T) { testListPagination(t, fresh(t)) })
	t.Run("ListStableWhileChanging", func(t *testing.T) { testListStable(t, fresh(t)) })
	t.Run("VersionsPagination", func(t *testing.T) { testVersionsPagination(t, fresh(t)) })
	t.Run("PageArguments", func(t *testing.T) { testPageArguments(t, fresh(t)) })
	t.Run("DeleteVersion", func(t *testing.T) { testDeleteVersion(t, fresh(t)) })
	t.Run("DeleteAll", func(t *testing.T) { testDeleteAll(t, fresh(t)) })
	t.Run("VersionsNotReused", func(t *testing.T) { testNotReused(t, fresh(t)) })
	t.Run("ConcurrentCreate", func(t *testing.T) { testConcurrentCreate(t, fresh(t)) })
	t.Run("Cancelled", func(t *testing.T) { testCancelled(t, fresh(t)) })
	t.Run("Corrupt", func(t *testing.T) {
		if corrupt == nil {
			t.Skip("no corruption hook for this store")
		}
		testCorrupt(t, fresh(t), corrupt)
	})
	t.Run("Closed", func(t *testing.T) { testClosed(t, open(t)) })
}

var bg = context.Background()

func mustCreate(t *testing.T, s store.Store, m *mixdv1.Model) *mixdv1.Model {
	t.Helper()
	got, err := s.Create(bg, m)
	if err != nil {
		t.Fatalf("Create(%s): %v", m.GetName(), err)
	}
	return got
}

// sameContent reports whether got is want apart from name form, version and
// creation time.
func sameContent(got, want *mixdv1.Model) bool {
	a := proto.Clone(got).(*mixdv1.Model)
	b := proto.Clone(want).(*mixdv1.Model)
	a.Name, a.Version, a.CreateTime = "", 0, nil
	b.Name, b.Version, b.CreateTime = "", 0, nil
	return proto.Equal(a, b)
}

func wantErr(t *testing.T, what string, err, target error) {
	t.Helper()
	if !errors.Is(err, target) {
		t.Errorf("%s: error %v, want one wrapping %q", what, err, target)
	}
}

func testCreateAndGet(t *testing.T, s store.Store) {
	in := Model("models/pump-station-1", 1)
	keep := proto.Clone(in)
	before := time.Now().Add(-time.Second)
	v1 := mustCreate(t, s, in)
	after := time.Now().Add(time.Second)
	if !proto.Equal(in, keep) {
		t.Error("Create modified its argument")
	}
	if v1.Name != "models/pump-station-1" || v1.Version != 1 {
		t.Errorf("first Create returned %s version %d, want models/pump-station-1 version 1", v1.Name, v1.Version)
	}
	if ct := v1.GetCreateTime().AsTime(); v1.CreateTime == nil || ct.Before(before) || ct.After(after) {
		t.Errorf("create_time %v is not the time of the call", v1.GetCreateTime())
	}
	if !sameContent(v1, in) {
		t.Errorf("Create returned different content:\n got %v\nwant %v", v1, in)
	}
	// A bare id names the same model; the store ignores a version and time in the input.
	in2 := Model("pump-station-1", 2)
	in2.Version = 77
	v2 := mustCreate(t, s, in2)
	if v2.Name != "models/pump-station-1" || v2.Version != 2 {
		t.Errorf("second Create returned %s version %d, want models/pump-station-1 version 2", v2.Name, v2.Version)
	}
	for _, tc := range []struct {
		name    string
		version int64
		want    *mixdv1.Model
	}{
		{"models/pump-station-1", 0, v2},
		{"pump-station-1", 0, v2},
		{"models/pump-station-1", 2, v2},
		{"models/pump-station-1", 1, v1},
		{"pump-station-1", 1, v1},
	} {
		got, err := s.Get(bg, tc.name, tc.version)
		if err != nil {
			t.Errorf("Get(%s, %d): %v", tc.name, tc.version, err)
			continue
		}
		if !proto.Equal(got, tc.want) {
			t.Errorf("Get(%s, %d) =\n %v\nwant what Create returned:\n %v", tc.name, tc.version, got, tc.want)
		}
	}
	// Returned models are the caller's own.
	got, _ := s.Get(bg, "pump-station-1", 1)
	got.Parameters.Components[0].Mean[0] = -1
	again, _ := s.Get(bg, "pump-station-1", 1)
	if !proto.Equal(again, v1) {
		t.Error("changing a returned model changed the stored one")
	}
	// Other models are independent.
	o := mustCreate(t, s, Model("pump-station-2", 3))
	if o.Version != 1 {
		t.Errorf("first version of another model is %d, want 1", o.Version)
	}
}

func testCreateInvalid(t *testing.T, s store.Store) {
	notSum := Model("bad", 1)
	notSum.Parameters.Components[0].Weight = 0.9
	shape := Model("bad", 1)
	shape.Parameters.Components[1].Mean = []float64{1, 2, 3}
	noParams := Model("bad", 1)
	noParams.Parameters = nil
	for _, tc := range []struct {
		what string
		m    *mixdv1.Model
	}{
		{"nil model", nil},
		{"empty name", Model("", 1)},
		{"name with slash", Model("models/a/b", 1)},
		{"name with space", Model("pump 1", 1)},
		{"name ..", Model("..", 1)},
		{"weights not summing to 1", notSum},
		{"mean of the wrong length", shape},
		{"no parameters", noParams},
	} {
		_, err := s.Create(bg, tc.m)
		wantErr(t, "Create with "+tc.what, err, store.ErrInvalid)
	}
	if _, err := s.Get(bg, "bad", 0); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("after rejected creates, Get(bad) error = %v, want not found", err)
	}
	ms, _, err := s.List(bg, 0, "")
	if err != nil || len(ms) != 0 {
		t.Errorf("after rejected creates, List = %d models, %v; want none", len(ms), err)
	}
	// A valid create afterwards still gets version 1.
	if m := mustCreate(t, s, Model("bad", 1)); m.Version != 1 {
		t.Errorf("first accepted version is %d, want 1", m.Version)
	}
}

func testGetErrors(t *testing.T, s store.Store) {
	mustCreate(t, s, Model("pumps", 1))
	_, err := s.Get(bg, "absent", 0)
	wantErr(t, "Get of a missing model", err, store.ErrNotFound)
	_, err = s.Get(bg, "absent", 1)
	wantErr(t, "Get of a version of a missing model", err, store.ErrNotFound)
	_, err = s.Get(bg, "pumps", 2)
	wantErr(t, "Get of a missing version", err, store.ErrNotFound)
	_, err = s.Get(bg, "pumps", -1)
	wantErr(t, "Get of a negative version", err, store.ErrInvalid)
	_, err = s.Get(bg, "models/pu/mps", 0)
	wantErr(t, "Get with a bad name", err, store.ErrInvalid)
	_, err = s.Get(bg, "", 0)
	wantErr(t, "Get with an empty name", err, store.ErrInvalid)
}

// listAll pages through List and returns every model and the page count.
func listAll(t *testing.T, s store.Store, size int) ([]*mixdv1.Model, int) {
	t.Helper()
	var all []*mixdv1.Model
	tok, pages := "", 0
	for {
		ms, next, err := s.List(bg, size, tok)
		if err != nil {
			t.Fatalf("List(%d, %q): %v", size, tok, err)
		}
		pages++
		if len(ms) > size {
			t.Fatalf("List(%d) returned %d models", size, len(ms))
		}
		if next != "" && len(ms) != size {
			t.Fatalf("List(%d) returned a short page (%d) with a next token", size, len(ms))
		}
		all = append(all, ms...)
		if next == "" {
			return all, pages
		}
		if pages > 1000 {
			t.Fatal("List does not end")
		}
		tok = next
	}
}

func testListPagination(t *testing.T, s store.Store) {
	const n = 23
	want := map[string]*mixdv1.Model{}
	for i := range n {
		name := fmt.Sprintf("models/station-%02d", (i*7)%n) // created out of order
		var last *mixdv1.Model
		for v := 0; v <= i%3; v++ {
			last = mustCreate(t, s, Model(name, 10*i+v))
		}
		want[name] = last
	}
	for _, size := range []int{1, 5, 23, 100} {
		all, pages := listAll(t, s, size)
		if len(all) != n {
			t.Fatalf("List pages of %d returned %d models, want %d", size, len(all), n)
		}
		if wantPages := max(1, (n+size-1)/size); pages != wantPages {
			t.Errorf("List pages of %d took %d pages, want %d", size, pages, wantPages)
		}
		for i, m := range all {
			if i > 0 && all[i-1].Name >= m.Name {
				t.Errorf("List order: %s before %s", all[i-1].Name, m.Name)
			}
			if !proto.Equal(m, want[m.Name]) {
				t.Errorf("List returned %s version %d, want the newest version %d", m.Name, m.Version, want[m.Name].GetVersion())
			}
		}
	}
	// Size 0 means the default page size, which holds all 23.
	ms, next, err := s.List(bg, 0, "")
	if err != nil || len(ms) != n || next != "" {
		t.Errorf("List(0) = %d models, token %q, %v; want %d, no token", len(ms), next, err, n)
	}
}

func testListStable(t *testing.T, s store.Store) {
	for _, id := range []string{"b", "d", "f", "h"} {
		mustCreate(t, s, Model(id, 1))
	}
	ms, tok, err := s.List(bg, 2, "")
	if err != nil || len(ms) != 2 || tok == "" {
		t.Fatalf("List(2) = %d, %q, %v", len(ms), tok, err)
	}
	// Changes behind the cursor do not disturb the next page; changes after it show.
	mustCreate(t, s, Model("a", 1))
	mustCreate(t, s, Model("e", 1))
	if _, err := s.Delete(bg, "d", 0); err != nil {
		t.Fatal(err)
	}
	rest, _ := listFrom(t, s, 2, tok)
	var names []string
	for _, m := range append(ms, rest...) {
		names = append(names, m.Name)
	}
	want := []string{"models/b", "models/d", "models/e", "models/f", "models/h"}
	if fmt.Sprint(names) != fmt.Sprint(want) {
		t.Errorf("paging while changing gave %v, want %v", names, want)
	}
}

func listFrom(t *testing.T, s store.Store, size int, tok string) ([]*mixdv1.Model, int) {
	t.Helper()
	var all []*mixdv1.Model
	pages := 0
	for tok != "" {
		ms, next, err := s.List(bg, size, tok)
		if err != nil {
			t.Fatalf("List: %v", err)
		}
		all = append(all, ms...)
		tok = next
		pages++
	}
	return all, pages
}

func versionsAll(t *testing.T, s store.Store, name string, size int) []*mixdv1.Model {
	t.Helper()
	var all []*mixdv1.Model
	tok := ""
	for i := 0; ; i++ {
		ms, next, err := s.Versions(bg, name, size, tok)
		if err != nil {
			t.Fatalf("Versions(%s, %d, %q): %v", name, size, tok, err)
		}
		if len(ms) > size || (next != "" && len(ms) != size) {
			t.Fatalf("Versions(%s, %d) returned a page of %d with token %q", name, size, len(ms), next)
		}
		all = append(all, ms...)
		if next == "" {
			return all
		}
		if i > 1000 {
			t.Fatal("Versions does not end")
		}
		tok = next
	}
}

func testVersionsPagination(t *testing.T, s store.Store) {
	var created []*mixdv1.Model
	for i := range 7 {
		created = append(created, mustCreate(t, s, Model("pumps", i)))
	}
	mustCreate(t, s, Model("other", 1))
	for _, size := range []int{1, 3, 7, 50} {
		all := versionsAll(t, s, "models/pumps", size)
		if len(all) != len(created) {
			t.Fatalf("Versions in pages of %d returned %d versions, want %d", size, len(all), len(created))
		}
		for i := range all {
			if !proto.Equal(all[i], created[i]) {
				t.Errorf("Versions[%d] (pages of %d) = version %d, want version %d (oldest first)", i, size, all[i].Version, created[i].Version)
			}
		}
	}
	_, _, err := s.Versions(bg, "absent", 10, "")
	wantErr(t, "Versions of a missing model", err, store.ErrNotFound)
	_, _, err = s.Versions(bg, "bad name", 10, "")
	wantErr(t, "Versions with a bad name", err, store.ErrInvalid)
	// A token is tied to its model.
	_, tok, err := s.Versions(bg, "pumps", 2, "")
	if err != nil || tok == "" {
		t.Fatalf("Versions(pumps, 2) token %q, %v", tok, err)
	}
	_, _, err = s.Versions(bg, "other", 2, tok)
	wantErr(t, "Versions of another model with pumps' token", err, store.ErrInvalid)
}

func testPageArguments(t *testing.T, s store.Store) {
	mustCreate(t, s, Model("pumps", 1))
	_, _, err := s.List(bg, -1, "")
	wantErr(t, "List with a negative page size", err, store.ErrInvalid)
	_, _, err = s.Versions(bg, "pumps", -1, "")
	wantErr(t, "Versions with a negative page size", err, store.ErrInvalid)
	for _, tok := range []string{"garbage!", "bm90IGEgdG9rZW4", "\x00"} {
		_, _, err = s.List(bg, 1, tok)
		wantErr(t, fmt.Sprintf("List with token %q", tok), err, store.ErrInvalid)
		_, _, err = s.Versions(bg, "pumps", 1, tok)
		wantErr(t, fmt.Sprintf("Versions with token %q", tok), err, store.ErrInvalid)
	}
	// A page size above the maximum is capped, not refused.
	ms, _, err := s.List(bg, store.MaxPageSize+1, "")
	if err != nil || len(ms) != 1 {
		t.Errorf("List(MaxPageSize+1) = %d models, %v", len(ms), err)
	}
}

func testDeleteVersion(t *testing.T, s store.Store) {
	v := []*mixdv1.Model{nil}
	for i := 1; i <= 3; i++ {
		v = append(v, mustCreate(t, s, Model("pumps", i)))
	}
	n, err := s.Delete(bg, "models/pumps", 3)
	if err != nil || n != 1 {
		t.Fatalf("Delete(pumps, 3) = %d, %v; want 1", n, err)
	}
	_, err = s.Get(bg, "pumps", 3)
	wantErr(t, "Get of a deleted version", err, store.ErrNotFound)
	got, err := s.Get(bg, "pumps", 0)
	if err != nil || !proto.Equal(got, v[2]) {
		t.Errorf("newest after deleting version 3 = %v, %v; want version 2", got.GetVersion(), err)
	}
	if n, err := s.Delete(bg, "pumps", 1); err != nil || n != 1 {
		t.Errorf("Delete(pumps, 1) = %d, %v", n, err)
	}
	all := versionsAll(t, s, "pumps", 10)
	if len(all) != 1 || !proto.Equal(all[0], v[2]) {
		t.Errorf("Versions after deletes = %d models, want only version 2", len(all))
	}
	_, err = s.Delete(bg, "pumps", 1)
	wantErr(t, "Delete of a deleted version", err, store.ErrNotFound)
	_, err = s.Delete(bg, "pumps", 9)
	wantErr(t, "Delete of a version never written", err, store.ErrNotFound)
	_, err = s.Delete(bg, "pumps", -2)
	wantErr(t, "Delete of a negative version", err, store.ErrInvalid)
}

func testDeleteAll(t *testing.T, s store.Store) {
	for i := range 4 {
		mustCreate(t, s, Model("pumps", i))
	}
	mustCreate(t, s, Model("wells", 1))
	n, err := s.Delete(bg, "pumps", 0)
	if err != nil || n != 4 {
		t.Fatalf("Delete(pumps, 0) = %d, %v; want 4", n, err)
	}
	_, err = s.Get(bg, "pumps", 0)
	wantErr(t, "Get of a deleted model", err, store.ErrNotFound)
	_, err = s.Get(bg, "pumps", 2)
	wantErr(t, "Get of a version of a deleted model", err, store.ErrNotFound)
	_, _, err = s.Versions(bg, "pumps", 10, "")
	wantErr(t, "Versions of a deleted model", err, store.ErrNotFound)
	all, _ := listAll(t, s, 10)
	if len(all) != 1 || all[0].Name != "models/wells" {
		t.Errorf("List after deleting pumps = %v, want only models/wells", all)
	}
	_, err = s.Delete(bg, "pumps", 0)
	wantErr(t, "Delete of a deleted model", err, store.ErrNotFound)
	_, err = s.Delete(bg, "never", 0)
	wantErr(t, "Delete of a model never written", err, store.ErrNotFound)
	_, err = s.Delete(bg, "bad/name", 0)
	wantErr(t, "Delete with a bad name", err, store.ErrInvalid)
}

func testNotReused(t *testing.T, s store.Store) {
	for i := range 3 {
		mustCreate(t, s, Model("pumps", i))
	}
	if _, err := s.Delete(bg, "pumps", 3); err != nil {
		t.Fatal(err)
	}
	if m := mustCreate(t, s, Model("pumps", 4)); m.Version != 4 {
		t.Errorf("after deleting the newest version 3, Create gave version %d, want 4", m.Version)
	}
	if _, err := s.Delete(bg, "pumps", 0); err != nil {
		t.Fatal(err)
	}
	if m := mustCreate(t, s, Model("pumps", 5)); m.Version != 5 {
		t.Errorf("after deleting every version, Create gave version %d, want 5", m.Version)
	}
	all := versionsAll(t, s, "pumps", 10)
	if len(all) != 1 || all[0].Version != 5 {
		t.Errorf("Versions = %d models, want only version 5", len(all))
	}
}

func testConcurrentCreate(t *testing.T, s store.Store) {
	const writers, each = 6, 5
	var (
		mu   sync.Mutex
		seen = map[int64]int{}
		wg   sync.WaitGroup
	)
	errs := make(chan error, writers*each)
	for w := range writers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range each {
				m, err := s.Create(bg, Model("pumps", 100*w+i))
				if err != nil {
					errs <- err
					return
				}
				mu.Lock()
				seen[m.Version] = 100*w + i
				mu.Unlock()
			}
		}()
	}
	wg.Wait()
	close(errs)
	for err := range errs {
		t.Errorf("concurrent Create: %v", err)
	}
	if len(seen) != writers*each {
		t.Fatalf("%d concurrent creates got %d distinct versions", writers*each, len(seen))
	}
	for v := int64(1); v <= writers*each; v++ {
		variant, ok := seen[v]
		if !ok {
			t.Errorf("version %d was not assigned", v)
			continue
		}
		got, err := s.Get(bg, "pumps", v)
		if err != nil || !sameContent(got, Model("pumps", variant)) {
			t.Errorf("version %d does not hold what its writer wrote (%v)", v, err)
		}
	}
}

func testCancelled(t *testing.T, s store.Store) {
	ctx, cancel := context.WithCancel(bg)
	cancel()
	if _, err := s.Create(ctx, Model("pumps", 1)); !errors.Is(err, context.Canceled) {
		t.Errorf("Create with a cancelled context: %v, want context.Canceled", err)
	}
	if _, err := s.Get(bg, "pumps", 0); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("a cancelled Create stored something: Get error %v", err)
	}
}

func testCorrupt(t *testing.T, s store.Store, corrupt func(t *testing.T, s store.Store, name string, version int64)) {
	v1 := mustCreate(t, s, Model("pumps", 1))
	mustCreate(t, s, Model("pumps", 2))
	v3 := mustCreate(t, s, Model("pumps", 3))
	mustCreate(t, s, Model("lonely", 1))
	corrupt(t, s, "models/pumps", 2)
	corrupt(t, s, "models/pumps", 3)
	corrupt(t, s, "models/lonely", 1)

	_, err := s.Get(bg, "pumps", 2)
	wantErr(t, "Get of a corrupted version", err, store.ErrCorrupt)
	_, err = s.Get(bg, "pumps", 3)
	wantErr(t, "Get of a corrupted version", err, store.ErrCorrupt)
	got, err := s.Get(bg, "pumps", 0)
	if err != nil || !proto.Equal(got, v1) {
		t.Errorf("newest of pumps with versions 2 and 3 corrupt = version %d, %v; want version 1", got.GetVersion(), err)
	}
	_, err = s.Get(bg, "lonely", 0)
	wantErr(t, "Get of a model whose only version is corrupt", err, store.ErrCorrupt)
	all, _ := listAll(t, s, 1)
	if len(all) != 1 || !proto.Equal(all[0], v1) {
		t.Errorf("List with corrupt versions = %d models, want only pumps version 1", len(all))
	}
	vs := versionsAll(t, s, "pumps", 1)
	if len(vs) != 1 || vs[0].Version != 1 {
		t.Errorf("Versions with corrupt versions = %d models, want only version 1", len(vs))
	}
	// Corrupt version numbers are not reused, and deleting them works.
	if m := mustCreate(t, s, Model("pumps", 4)); m.Version != v3.Version+1 {
		t.Errorf("Create after corruption gave version %d, want %d", m.Version, v3.Version+1)
	}
	if n, err := s.Delete(bg, "pumps", 2); err != nil || n != 1 {
		t.Errorf("Delete of a corrupt version = %d, %v; want 1", n, err)
	}
	if n, err := s.Delete(bg, "lonely", 0); err != nil || n != 1 {
		t.Errorf("Delete of a model whose only version is corrupt = %d, %v; want 1", n, err)
	}
}

func testClosed(t *testing.T, s store.Store) {
	mustCreate(t, s, Model("pumps", 1))
	if err := s.Close(); err != nil {
		t.Fatalf("Close: %v", err)
	}
	_, err := s.Create(bg, Model("pumps", 2))
	wantErr(t, "Create after Close", err, store.ErrClosed)
	_, err = s.Get(bg, "pumps", 0)
	wantErr(t, "Get after Close", err, store.ErrClosed)
	_, _, err = s.List(bg, 0, "")
	wantErr(t, "List after Close", err, store.ErrClosed)
	_, _, err = s.Versions(bg, "pumps", 0, "")
	wantErr(t, "Versions after Close", err, store.ErrClosed)
	_, err = s.Delete(bg, "pumps", 0)
	wantErr(t, "Delete after Close", err, store.ErrClosed)
	if err := s.Close(); err != nil {
		t.Errorf("second Close: %v", err)
	}
}
