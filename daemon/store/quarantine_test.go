package store_test

import (
	"bytes"
	"errors"
	"log/slog"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"

	"github.com/mixd-dev/mixd/daemon/store"
	"github.com/mixd-dev/mixd/daemon/store/storetest"
)

func TestDamagedRecordIsQuarantined(t *testing.T) {
	dir := t.TempDir()
	var logBuf bytes.Buffer
	s := openDir(t, dir, store.WithLogger(slog.New(slog.NewTextHandler(&logBuf, nil))))
	for v := int64(1); v <= 3; v++ {
		if _, err := s.Create(bg, storetest.Model("pumps", int(v))); err != nil {
			t.Fatal(err)
		}
	}
	other, err := s.Create(bg, storetest.Model("wells", 1))
	if err != nil {
		t.Fatal(err)
	}
	// Damage the newest version of pumps: half of it is gone.
	p3 := recordPath(t, s, "pumps", 3)
	truncateHalf(t, s, "pumps", 3)
	damaged, _ := os.ReadFile(p3)

	// Reading the newest version finds it, quarantines it, and serves 2.
	got, err := s.Get(bg, "pumps", 0)
	if err != nil || got.GetVersion() != 2 {
		t.Fatalf("newest after damage = version %d, %v; want 2", got.GetVersion(), err)
	}
	q := filepath.Join(dir, "quarantine", "pumps", "3.json")
	moved, err := os.ReadFile(q)
	if err != nil || !bytes.Equal(moved, damaged) {
		t.Fatalf("quarantined file %s: %v (same bytes: %v)", q, err, bytes.Equal(moved, damaged))
	}
	if _, err := os.Stat(p3); !errors.Is(err, os.ErrNotExist) {
		t.Fatalf("the damaged record is still in the models directory: %v", err)
	}
	for _, w := range []string{"quarantined corrupt model version", "model=models/pumps", "version=3", "moved_to=" + q, "not a complete record"} {
		if !strings.Contains(logBuf.String(), w) {
			t.Errorf("log does not say %q:\n%s", w, logBuf.String())
		}
	}
	// Get of the version keeps reporting it as corrupt, naming the file.
	if _, err := s.Get(bg, "pumps", 3); !errors.Is(err, store.ErrCorrupt) || !strings.Contains(err.Error(), q) {
		t.Fatalf("Get of the quarantined version: %v", err)
	}
	vs, _, err := s.Versions(bg, "pumps", 10, "")
	if err != nil || len(vs) != 2 {
		t.Fatalf("Versions = %d, %v; want versions 1 and 2", len(vs), err)
	}
	if g, err := s.Get(bg, "wells", 0); err != nil || !proto.Equal(g, other) {
		t.Fatalf("other model: %v", err)
	}
	// The number is not reused, also after reopening.
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	s = openDir(t, dir, quiet())
	m, err := s.Create(bg, storetest.Model("pumps", 4))
	if err != nil || m.GetVersion() != 4 {
		t.Fatalf("next version %d, %v; want 4", m.GetVersion(), err)
	}

	// A record damaged in the middle of the versions, found by Get of its
	// version: quarantined too; a second damage of the same version number
	// does not overwrite the first quarantined file.
	p2 := recordPath(t, s, "pumps", 2)
	if err := os.WriteFile(p2, []byte("{}"), 0o600); err != nil {
		t.Fatal(err)
	}
	if _, err := s.Get(bg, "pumps", 2); !errors.Is(err, store.ErrCorrupt) || !strings.Contains(err.Error(), "moved to") {
		t.Fatalf("Get of a damaged version: %v", err)
	}
	if _, err := os.Stat(filepath.Join(dir, "quarantine", "pumps", "2.json")); err != nil {
		t.Fatal(err)
	}
	// Every version gone to quarantine: the model reports corruption, not
	// absence.
	for _, v := range []int64{1, 4} {
		truncateHalf(t, s, "pumps", v)
		_, _ = s.Get(bg, "pumps", v)
	}
	if _, err := s.Get(bg, "pumps", 0); !errors.Is(err, store.ErrCorrupt) || !strings.Contains(err.Error(), "4 quarantined") {
		t.Fatalf("model with every version quarantined: %v", err)
	}
	ms, _, err := s.List(bg, 10, "")
	if err != nil || len(ms) != 1 || ms[0].GetName() != "models/wells" {
		t.Fatalf("List = %v, %v; want only wells", ms, err)
	}
}

// TestIntactButUnusableRecordStays: a record whose checksum holds but
// whose record version this build does not read is skipped, not moved.
func TestIntactButUnusableRecordStays(t *testing.T) {
	dir := t.TempDir()
	s := openDir(t, dir, quiet())
	for v := int64(1); v <= 2; v++ {
		if _, err := s.Create(bg, storetest.Model("pumps", int(v))); err != nil {
			t.Fatal(err)
		}
	}
	p2 := recordPath(t, s, "pumps", 2)
	rec, _ := os.ReadFile(p2)
	newer := bytes.Replace(rec, []byte(`"record_version":1`), []byte(`"record_version":2`), 1)
	if err := os.WriteFile(p2, newer, 0o600); err != nil {
		t.Fatal(err)
	}
	if _, err := s.Get(bg, "pumps", 2); !errors.Is(err, store.ErrCorrupt) {
		t.Fatalf("Get: %v", err)
	}
	if b, err := os.ReadFile(p2); err != nil || !bytes.Equal(b, newer) {
		t.Fatalf("the record was moved or changed: %v", err)
	}
	if _, err := os.Stat(filepath.Join(dir, "quarantine")); !errors.Is(err, os.ErrNotExist) {
		t.Fatalf("quarantine directory made: %v", err)
	}
}
