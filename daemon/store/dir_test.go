package store_test

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"io"
	"log/slog"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"golang.org/x/sys/unix"
	"google.golang.org/protobuf/proto"

	"github.com/mixd-dev/mixd/daemon/modeldoc"
	"github.com/mixd-dev/mixd/daemon/store"
	"github.com/mixd-dev/mixd/daemon/store/storetest"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

var bg = context.Background()

func quiet() store.Option { return store.WithLogger(slog.New(slog.NewTextHandler(io.Discard, nil))) }

func openDir(t *testing.T, dir string, opts ...store.Option) *store.DirStore {
	t.Helper()
	s, err := store.OpenDir(dir, append([]store.Option{quiet()}, opts...)...)
	if err != nil {
		t.Fatalf("OpenDir(%s): %v", dir, err)
	}
	t.Cleanup(func() { _ = s.Close() })
	return s
}

// recordPath is where DirStore keeps a version (see the layout on DirStore).
func recordPath(t *testing.T, s store.Store, name string, version int64) string {
	t.Helper()
	id, err := store.ParseName(name)
	if err != nil {
		t.Fatal(err)
	}
	return filepath.Join(s.(*store.DirStore).Dir(), "models", id, strconv.FormatInt(version, 10)+".json")
}

func truncateHalf(t *testing.T, s store.Store, name string, version int64) {
	t.Helper()
	p := recordPath(t, s, name, version)
	fi, err := os.Stat(p)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.Truncate(p, fi.Size()/2); err != nil {
		t.Fatal(err)
	}
}

func TestDirStoreConformance(t *testing.T) {
	storetest.Run(t, func(t *testing.T) store.Store {
		s, err := store.OpenDir(t.TempDir(), quiet())
		if err != nil {
			t.Fatal(err)
		}
		return s
	}, truncateHalf)
}

func TestOpenDirLayout(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "data", "mixd")
	s := openDir(t, dir)
	m, err := s.Create(bg, storetest.Model("pump-station-1", 1))
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range []string{"mixd-store.json", "lock", "models/pump-station-1/1.json"} {
		if _, err := os.Stat(filepath.Join(dir, p)); err != nil {
			t.Errorf("layout: %v", err)
		}
	}
	marker, _ := os.ReadFile(filepath.Join(dir, "mixd-store.json"))
	if string(marker) != "{\"format\": \"mixd-store\", \"layout_version\": 1}\n" {
		t.Errorf("marker = %q", marker)
	}
	// The record holds the model document and its checksum.
	raw, err := os.ReadFile(filepath.Join(dir, "models/pump-station-1/1.json"))
	if err != nil {
		t.Fatal(err)
	}
	var rec struct {
		Record        string          `json:"record"`
		RecordVersion int             `json:"record_version"`
		SHA256        string          `json:"sha256"`
		Document      json.RawMessage `json:"document"`
	}
	if err := json.Unmarshal(raw, &rec); err != nil {
		t.Fatalf("record is not JSON: %v", err)
	}
	sum := sha256.Sum256(rec.Document)
	if rec.Record != "mixd-model-record" || rec.RecordVersion != 1 || rec.SHA256 != hex.EncodeToString(sum[:]) {
		t.Errorf("record header = %q %d %q, document hashes to %x", rec.Record, rec.RecordVersion, rec.SHA256, sum)
	}
	doc, err := modeldoc.Encode(m)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(rec.Document, bytes.TrimRight(doc, "\n")) {
		t.Errorf("record document differs from modeldoc.Encode of the created model")
	}
	// Reopening the same directory works and sees the model.
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	s2 := openDir(t, dir)
	got, err := s2.Get(bg, "pump-station-1", 1)
	if err != nil || !proto.Equal(got, m) {
		t.Errorf("after reopening, Get = %v, %v", got, err)
	}
}

func TestOpenDirRefuses(t *testing.T) {
	foreign := t.TempDir()
	os.WriteFile(filepath.Join(foreign, "thesis.tex"), []byte("x"), 0o600)
	if _, err := store.OpenDir(foreign, quiet()); err == nil || !strings.Contains(err.Error(), `not a mixd store (it has no mixd-store.json but holds "thesis.tex")`) {
		t.Errorf("OpenDir of a foreign directory: %v", err)
	}
	if _, err := os.Stat(filepath.Join(foreign, "models")); err == nil {
		t.Error("OpenDir of a foreign directory created models/")
	}

	newer := t.TempDir()
	os.WriteFile(filepath.Join(newer, "mixd-store.json"), []byte(`{"format": "mixd-store", "layout_version": 2}`), 0o600)
	if _, err := store.OpenDir(newer, quiet()); err == nil || !strings.Contains(err.Error(), "layout_version 2 is not supported") {
		t.Errorf("OpenDir of a newer layout: %v", err)
	}

	garbled := t.TempDir()
	os.WriteFile(filepath.Join(garbled, "mixd-store.json"), []byte(`{"format": "mixd-sto`), 0o600)
	if _, err := store.OpenDir(garbled, quiet()); !errors.Is(err, store.ErrCorrupt) {
		t.Errorf("OpenDir with a garbled marker: %v, want ErrCorrupt", err)
	}

	file := filepath.Join(t.TempDir(), "plain-file")
	os.WriteFile(file, nil, 0o600)
	if _, err := store.OpenDir(file, quiet()); err == nil {
		t.Error("OpenDir of a regular file succeeded")
	}
	if _, err := store.OpenDir("", quiet()); !errors.Is(err, store.ErrInvalid) {
		t.Errorf("OpenDir(\"\"): %v, want ErrInvalid", err)
	}
}

// TestCorruptRecords damages a record in every way we can think of; each
// must be reported as corrupt naming the file, and never served.
func TestCorruptRecords(t *testing.T) {
	flip := func(b []byte, at int) []byte {
		c := append([]byte{}, b...)
		c[at] ^= 0x01
		return c
	}
	// rewrap builds a record with a correct checksum around doc.
	rewrap := func(doc []byte) []byte {
		sum := sha256.Sum256(doc)
		return []byte(`{"record":"mixd-model-record","record_version":1,"sha256":"` + hex.EncodeToString(sum[:]) + `","document":` + string(doc) + "}\n")
	}
	for _, tc := range []struct {
		name   string
		damage func(rec, other []byte) []byte
		want   string
	}{
		{"empty file", func(rec, _ []byte) []byte { return nil }, "not a complete record (0 bytes)"},
		{"truncated", func(rec, _ []byte) []byte { return rec[:len(rec)-40] }, "not a complete record"},
		{"cut after the header", func(rec, _ []byte) []byte { return rec[:bytes.Index(rec, []byte(`"document"`))] }, "not a complete record"},
		{"bit flip in the document", func(rec, _ []byte) []byte { return flip(rec, bytes.Index(rec, []byte("18.25"))+1) }, "checksum mismatch"},
		{"bit flip in the checksum", func(rec, _ []byte) []byte { return flip(rec, bytes.Index(rec, []byte(`"sha256":"`))+12) }, "checksum mismatch"},
		{"garbage appended", func(rec, _ []byte) []byte { return append(append([]byte{}, rec...), "{}"...) }, "unexpected bytes after the record"},
		{"zeros", func(rec, _ []byte) []byte { return make([]byte, len(rec)) }, "not a complete record"},
		{"another version's record", func(_, other []byte) []byte { return other }, "holds models/pumps version 1, want models/pumps version 2"},
		{"unknown record version", func(rec, _ []byte) []byte {
			return bytes.Replace(rec, []byte(`"record_version":1`), []byte(`"record_version":9`), 1)
		}, "record_version 9 is not one this build reads"},
		{"valid checksum, invalid model", func(rec, _ []byte) []byte {
			doc := rec[bytes.Index(rec, []byte(`"document":`))+len(`"document":`) : len(rec)-2]
			return rewrap(bytes.Replace(doc, []byte(`"weight": 0.625`), []byte(`"weight": 0.7`), 1))
		}, "weights: sum to"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			var logBuf bytes.Buffer
			s := openDir(t, t.TempDir(), store.WithLogger(slog.New(slog.NewTextHandler(&logBuf, nil))))
			v1, err := s.Create(bg, storetest.Model("pumps", 1))
			if err != nil {
				t.Fatal(err)
			}
			if _, err := s.Create(bg, storetest.Model("pumps", 2)); err != nil {
				t.Fatal(err)
			}
			p1, p2 := recordPath(t, s, "pumps", 1), recordPath(t, s, "pumps", 2)
			rec1, _ := os.ReadFile(p1)
			rec2, _ := os.ReadFile(p2)
			if err := os.WriteFile(p2, tc.damage(rec2, rec1), 0o600); err != nil {
				t.Fatal(err)
			}
			_, err = s.Get(bg, "pumps", 2)
			if !errors.Is(err, store.ErrCorrupt) || !strings.Contains(err.Error(), p2) || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("Get of the damaged version: %v\nwant ErrCorrupt naming %s and saying %q", err, p2, tc.want)
			}
			got, err := s.Get(bg, "pumps", 0)
			if err != nil || !proto.Equal(got, v1) {
				t.Errorf("newest = version %d, %v; want version 1", got.GetVersion(), err)
			}
			if !strings.Contains(logBuf.String(), "skipping corrupt model version") && !strings.Contains(logBuf.String(), "quarantined corrupt model version") {
				t.Errorf("skipping the corrupt version was not logged; log: %s", logBuf.String())
			}
			ms, _, err := s.List(bg, 10, "")
			if err != nil || len(ms) != 1 || ms[0].Version != 1 {
				t.Errorf("List = %v, %v; want pumps version 1", ms, err)
			}
		})
	}
}

func TestTemporaryFilesIgnoredAndRemoved(t *testing.T) {
	dir := t.TempDir()
	s := openDir(t, dir)
	v1, err := s.Create(bg, storetest.Model("pumps", 1))
	if err != nil {
		t.Fatal(err)
	}
	// What a writer killed mid-write leaves behind: a partial temporary file,
	// also in a model directory that has nothing else.
	temps := []string{
		filepath.Join(dir, "models", "pumps", ".tmp-123456"),
		filepath.Join(dir, "models", "ghost", ".tmp-99"),
		filepath.Join(dir, ".tmp-7"),
	}
	os.MkdirAll(filepath.Join(dir, "models", "ghost"), 0o700)
	rec, _ := os.ReadFile(recordPath(t, s, "pumps", 1))
	for _, p := range temps {
		if err := os.WriteFile(p, rec[:len(rec)/3], 0o600); err != nil {
			t.Fatal(err)
		}
	}
	// Stray files that are not records.
	for _, p := range []string{"notes.txt", "01.json", "0.json", "-1.json", "2.json.bak", "x.json"} {
		os.WriteFile(filepath.Join(dir, "models", "pumps", p), rec, 0o600)
	}
	os.Mkdir(filepath.Join(dir, "models", "pumps", "3.json"), 0o700)
	os.Mkdir(filepath.Join(dir, "models", "not a valid id"), 0o700)

	ms, _, err := s.List(bg, 10, "")
	if err != nil || len(ms) != 1 || !proto.Equal(ms[0], v1) {
		t.Errorf("List = %v, %v; want only pumps version 1", ms, err)
	}
	vs, _, err := s.Versions(bg, "pumps", 10, "")
	if err != nil || len(vs) != 1 {
		t.Errorf("Versions = %d, %v; want 1", len(vs), err)
	}
	if _, err := s.Get(bg, "ghost", 0); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("Get(ghost) = %v, want not found", err)
	}
	if v2, err := s.Create(bg, storetest.Model("pumps", 2)); err != nil || v2.Version != 2 {
		t.Errorf("Create beside stray files = %v, %v; want version 2", v2.GetVersion(), err)
	}
	s.Close()
	openDir(t, dir)
	for _, p := range temps {
		if _, err := os.Stat(p); !errors.Is(err, os.ErrNotExist) {
			t.Errorf("%s survived reopening (%v)", p, err)
		}
	}
	if _, err := os.Stat(filepath.Join(dir, "models", "pumps", "notes.txt")); err != nil {
		t.Errorf("reopening removed a file that is not a temporary file: %v", err)
	}
}

func TestHighWaterSurvivesReopen(t *testing.T) {
	dir := t.TempDir()
	s := openDir(t, dir)
	for i := range 3 {
		if _, err := s.Create(bg, storetest.Model("pumps", i)); err != nil {
			t.Fatal(err)
		}
	}
	if n, err := s.Delete(bg, "pumps", 0); err != nil || n != 3 {
		t.Fatalf("Delete = %d, %v", n, err)
	}
	s.Close()
	s = openDir(t, dir)
	if m, err := s.Create(bg, storetest.Model("pumps", 9)); err != nil || m.Version != 4 {
		t.Errorf("Create after delete and reopen = version %d, %v; want 4", m.GetVersion(), err)
	}
}

// TestTwoStoresOneDirectory opens the directory twice, as two daemons
// would; the flock keeps their version numbers apart.
func TestTwoStoresOneDirectory(t *testing.T) {
	dir := t.TempDir()
	a, b := openDir(t, dir), openDir(t, dir)
	var mu sync.Mutex
	seen := map[int64]bool{}
	var wg sync.WaitGroup
	for w, s := range []*store.DirStore{a, b, a, b} {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range 6 {
				m, err := s.Create(bg, storetest.Model("pumps", 10*w+i))
				if err != nil {
					t.Error(err)
					return
				}
				mu.Lock()
				if seen[m.Version] {
					t.Errorf("version %d assigned twice", m.Version)
				}
				seen[m.Version] = true
				mu.Unlock()
			}
		}()
	}
	wg.Wait()
	if len(seen) != 24 {
		t.Errorf("%d distinct versions, want 24", len(seen))
	}
}

// TestLockWaitHonoursContext holds the store's lock file from outside and
// checks that a writer waits, gives up when its context ends, and proceeds
// once the lock is free.
func TestLockWaitHonoursContext(t *testing.T) {
	dir := t.TempDir()
	s := openDir(t, dir)
	f, err := os.OpenFile(filepath.Join(dir, "lock"), os.O_RDWR, 0)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if err := unix.Flock(int(f.Fd()), unix.LOCK_EX); err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(bg, 100*time.Millisecond)
	defer cancel()
	if _, err := s.Create(ctx, storetest.Model("pumps", 1)); !errors.Is(err, context.DeadlineExceeded) {
		t.Errorf("Create while another process holds the lock: %v, want deadline exceeded", err)
	}
	if _, err := s.Delete(ctx, "pumps", 0); !errors.Is(err, context.DeadlineExceeded) {
		t.Errorf("Delete while another process holds the lock: %v, want deadline exceeded", err)
	}
	// Readers do not wait for the lock.
	if _, err := s.Get(bg, "pumps", 0); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("Get while locked: %v, want not found", err)
	}
	done := make(chan error, 1)
	go func() {
		_, err := s.Create(bg, storetest.Model("pumps", 1))
		done <- err
	}()
	time.Sleep(20 * time.Millisecond)
	if err := unix.Flock(int(f.Fd()), unix.LOCK_UN); err != nil {
		t.Fatal(err)
	}
	if err := <-done; err != nil {
		t.Errorf("Create after the lock was released: %v", err)
	}
}

// sameContent compares two models apart from name form, version and time.
func sameContent(a, b *mixdv1.Model) bool {
	a = proto.Clone(a).(*mixdv1.Model)
	b = proto.Clone(b).(*mixdv1.Model)
	a.Name, a.Version, a.CreateTime = "", 0, nil
	b.Name, b.Version, b.CreateTime = "", 0, nil
	return proto.Equal(a, b)
}
