package store

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"log/slog"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"sync/atomic"
	"time"

	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/types/known/timestamppb"

	"github.com/mixd-dev/mixd/daemon/modeldoc"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// DirStore is a Store in a local directory. The layout (layout version 1):
//
//	<dir>/mixd-store.json             marker: {"format": "mixd-store", "layout_version": 1}
//	<dir>/lock                        empty; flock(2)ed by whoever writes
//	<dir>/models/<id>/<version>.json  one record per model version, e.g. models/pumps/3.json
//	<dir>/models/<id>/high-water      highest version ever assigned, kept when versions are deleted
//	<dir>/models/<id>/.tmp-*          a write in progress (or abandoned by a crash)
//	<dir>/quarantine/<id>/<version>.json  damaged records moved aside (quarantine.go)
//
// A record is a JSON object holding the model document (see
// daemon/modeldoc/FORMAT.md) and the SHA-256 of its exact bytes:
//
//	{"record":"mixd-model-record","record_version":1,"sha256":"<64 hex digits>","document":{...}}
//
// Writes are atomic and durable: the record goes to a temporary file in the
// model's directory, which is fsynced, renamed to its final name, and the
// directory fsynced, before Create returns. A process killed at any moment
// therefore leaves either the complete record or none (only a temporary file,
// which readers ignore and OpenDir removes).
//
// Reading a record checks its checksum, decodes and fully validates the
// document, and checks that it is the version its file name says. A record
// failing any check is corrupt: Get of that exact version returns an error
// wrapping ErrCorrupt that names the file; Get of the newest version, List
// and Versions skip it (logging a warning), so "newest" means the newest
// readable version. Corrupt records are never served, and their version
// numbers are never reused; Delete removes them. Records whose bytes are
// damaged are moved to the quarantine directory when first read (see
// quarantine.go).
//
// The next version of a model is one more than the larger of its highest
// version file and its high-water file. Delete raises the high-water mark
// (durably) before removing files, so deleted numbers are not reused.
//
// Writers (Create, Delete, OpenDir's clean-up) hold an in-process mutex and
// an exclusive flock on <dir>/lock, so several goroutines, or several
// processes sharing the directory, never assign the same version. Readers
// take no lock. Model ids are case-sensitive: use a case-sensitive file
// system.
type DirStore struct {
	dir    string
	models string
	log    *slog.Logger
	now    func() time.Time
	sem    chan struct{} // in-process writer mutex, usable with a context
	lockf  *os.File
	lockfd int
	closed atomic.Bool
}

var _ Store = (*DirStore)(nil)

// Names inside the store directory.
const (
	markerFile    = "mixd-store.json"
	lockFile      = "lock"
	modelsDir     = "models"
	highWaterFile = "high-water"
	tempPrefix    = ".tmp-"
	storeFormat   = "mixd-store"
	layoutVersion = 1
	recordKind    = "mixd-model-record"
	recordVersion = 1
)

// Option configures OpenDir.
type Option func(*DirStore)

// WithLogger sets where DirStore reports corrupt records it skips and
// temporary files it removes; the default is slog.Default().
func WithLogger(l *slog.Logger) Option {
	return func(s *DirStore) {
		if l != nil {
			s.log = l
		}
	}
}

// OpenDir opens the store in dir, creating the directory and the layout
// when dir does not exist or is empty. It refuses a non-empty directory
// that is not a mixd store, and a store of a newer layout version. It
// removes temporary files left by writes that never finished.
func OpenDir(dir string, opts ...Option) (*DirStore, error) {
	if dir == "" {
		return nil, fmt.Errorf("open store: %w: directory name is empty", ErrInvalid)
	}
	abs, err := filepath.Abs(dir)
	if err != nil {
		return nil, fmt.Errorf("open store %s: %w", dir, err)
	}
	if err := mkdirDurable(abs); err != nil {
		return nil, fmt.Errorf("open store %s: %w", abs, err)
	}
	s := &DirStore{
		dir:    abs,
		models: filepath.Join(abs, modelsDir),
		log:    slog.Default(),
		now:    time.Now,
		sem:    make(chan struct{}, 1),
	}
	for _, o := range opts {
		o(s)
	}
	if err := s.checkForeign(); err != nil {
		return nil, err
	}
	s.lockf, err = os.OpenFile(filepath.Join(abs, lockFile), os.O_RDWR|os.O_CREATE, 0o600)
	if err != nil {
		return nil, fmt.Errorf("open store %s: %w", abs, err)
	}
	s.lockfd = int(s.lockf.Fd())
	if err := s.init(); err != nil {
		s.lockf.Close()
		return nil, fmt.Errorf("open store %s: %w", abs, err)
	}
	return s, nil
}

// checkForeign refuses to turn a directory holding other things into a store.
func (s *DirStore) checkForeign() error {
	if _, err := os.Stat(filepath.Join(s.dir, markerFile)); err == nil {
		return nil
	}
	ents, err := os.ReadDir(s.dir)
	if err != nil {
		return fmt.Errorf("open store %s: %w", s.dir, err)
	}
	for _, e := range ents {
		switch n := e.Name(); {
		case n == lockFile, n == modelsDir, strings.HasPrefix(n, tempPrefix):
		default:
			return fmt.Errorf("open store %s: %w: the directory is not empty and is not a mixd store (it has no %s but holds %q)", s.dir, ErrInvalid, markerFile, n)
		}
	}
	return nil
}

// init writes or checks the marker, creates models/ and removes temporary
// files, holding the writer lock.
func (s *DirStore) init() error {
	unlock, err := s.lock(context.Background())
	if err != nil {
		return err
	}
	defer unlock()
	if err := mkdirDurable(s.models); err != nil {
		return err
	}
	marker := filepath.Join(s.dir, markerFile)
	b, err := os.ReadFile(marker)
	switch {
	case errors.Is(err, fs.ErrNotExist):
		b = []byte(fmt.Sprintf("{\"format\": %q, \"layout_version\": %d}\n", storeFormat, layoutVersion))
		if err := writeAtomic(s.dir, markerFile, b); err != nil {
			return err
		}
	case err != nil:
		return err
	default:
		var m struct {
			Format        string `json:"format"`
			LayoutVersion int    `json:"layout_version"`
		}
		if err := json.Unmarshal(b, &m); err != nil || m.Format != storeFormat {
			return fmt.Errorf("%w: %s is not a mixd store marker", ErrCorrupt, marker)
		}
		if m.LayoutVersion != layoutVersion {
			return fmt.Errorf("%s: layout_version %d is not supported by this build (it reads %d); use the mixd that wrote it", marker, m.LayoutVersion, layoutVersion)
		}
	}
	removed := 0
	clean := func(dir string) error {
		ents, err := os.ReadDir(dir)
		if err != nil {
			return err
		}
		for _, e := range ents {
			if strings.HasPrefix(e.Name(), tempPrefix) {
				if err := os.Remove(filepath.Join(dir, e.Name())); err != nil && !errors.Is(err, fs.ErrNotExist) {
					return err
				}
				removed++
			}
		}
		return nil
	}
	if err := clean(s.dir); err != nil {
		return err
	}
	ents, err := os.ReadDir(s.models)
	if err != nil {
		return err
	}
	for _, e := range ents {
		if e.IsDir() {
			if err := clean(filepath.Join(s.models, e.Name())); err != nil {
				return err
			}
		}
	}
	if removed > 0 {
		s.log.Info("store: removed temporary files of unfinished writes", "dir", s.dir, "files", removed)
	}
	return nil
}

// Dir returns the store's absolute directory.
func (s *DirStore) Dir() string { return s.dir }

// Create implements Store.
func (s *DirStore) Create(ctx context.Context, m *mixdv1.Model) (*mixdv1.Model, error) {
	if err := s.live(); err != nil {
		return nil, err
	}
	if m == nil {
		return nil, fmt.Errorf("create model: %w: model is nil", ErrInvalid)
	}
	id, err := ParseName(m.GetName())
	if err != nil {
		return nil, fmt.Errorf("create model: %w", err)
	}
	name := modeldoc.NamePrefix + id
	if err := ctx.Err(); err != nil {
		return nil, fmt.Errorf("create %s: %w", name, err)
	}
	c := proto.Clone(m).(*mixdv1.Model)
	c.Name = name

	unlock, err := s.lock(ctx)
	if err != nil {
		return nil, fmt.Errorf("create %s: %w", name, err)
	}
	defer unlock()
	v, err := s.nextVersion(id)
	if err != nil {
		return nil, fmt.Errorf("create %s: %w", name, err)
	}
	c.Version = v
	c.CreateTime = timestamppb.New(s.now())
	doc, err := modeldoc.Encode(c)
	if err != nil {
		return nil, fmt.Errorf("create %s: %w: %w", name, ErrInvalid, err)
	}
	back, err := modeldoc.Decode(doc)
	if err != nil {
		return nil, fmt.Errorf("create %s: the encoded model does not read back (a bug): %w", name, err)
	}
	dir := filepath.Join(s.models, id)
	if err := mkdirDurable(dir); err != nil {
		return nil, fmt.Errorf("create %s: %w", name, err)
	}
	if err := writeAtomic(dir, versionFile(v), record(doc)); err != nil {
		return nil, fmt.Errorf("create %s version %d: %w", name, v, err)
	}
	return back, nil
}

// Get implements Store.
func (s *DirStore) Get(ctx context.Context, name string, version int64) (*mixdv1.Model, error) {
	if err := s.live(); err != nil {
		return nil, err
	}
	id, err := ParseName(name)
	if err != nil {
		return nil, fmt.Errorf("get model: %w", err)
	}
	if version < 0 {
		return nil, fmt.Errorf("get models/%s: %w: version %d is negative", id, ErrInvalid, version)
	}
	if err := ctx.Err(); err != nil {
		return nil, fmt.Errorf("get models/%s: %w", id, err)
	}
	if version > 0 {
		m, err := s.read(id, version)
		if err != nil {
			return nil, fmt.Errorf("get models/%s version %d: %w", id, version, err)
		}
		return m, nil
	}
	m, err := s.newest(ctx, id)
	if err != nil {
		return nil, fmt.Errorf("get models/%s: %w", id, err)
	}
	return m, nil
}

// List implements Store.
func (s *DirStore) List(ctx context.Context, pageSize int, pageToken string) ([]*mixdv1.Model, string, error) {
	if err := s.live(); err != nil {
		return nil, "", err
	}
	size, err := PageSize(pageSize)
	if err != nil {
		return nil, "", fmt.Errorf("list models: %w", err)
	}
	after, err := ParseListToken(pageToken)
	if err != nil {
		return nil, "", fmt.Errorf("list models: %w", err)
	}
	ents, err := os.ReadDir(s.models)
	if err != nil {
		return nil, "", fmt.Errorf("list models: %w", err)
	}
	ids := make([]string, 0, len(ents))
	for _, e := range ents {
		if e.IsDir() && modeldoc.ValidateID(e.Name()) == nil && e.Name() > after {
			ids = append(ids, e.Name())
		}
	}
	sort.Strings(ids)
	out := []*mixdv1.Model{}
	for _, id := range ids {
		if err := ctx.Err(); err != nil {
			return nil, "", fmt.Errorf("list models: %w", err)
		}
		m, err := s.newest(ctx, id)
		if errors.Is(err, ErrNotFound) || errors.Is(err, ErrCorrupt) {
			continue
		}
		if err != nil {
			return nil, "", fmt.Errorf("list models: models/%s: %w", id, err)
		}
		if len(out) == size {
			return out, ListToken(idOf(out[size-1])), nil
		}
		out = append(out, m)
	}
	return out, "", nil
}

// Versions implements Store.
func (s *DirStore) Versions(ctx context.Context, name string, pageSize int, pageToken string) ([]*mixdv1.Model, string, error) {
	if err := s.live(); err != nil {
		return nil, "", err
	}
	id, err := ParseName(name)
	if err != nil {
		return nil, "", fmt.Errorf("list versions: %w", err)
	}
	size, err := PageSize(pageSize)
	if err != nil {
		return nil, "", fmt.Errorf("list versions of models/%s: %w", id, err)
	}
	after, err := ParseVersionsToken(id, pageToken)
	if err != nil {
		return nil, "", fmt.Errorf("list versions of models/%s: %w", id, err)
	}
	nums, err := s.versionNumbers(id)
	if err != nil {
		return nil, "", fmt.Errorf("list versions of models/%s: %w", id, err)
	}
	if len(nums) == 0 {
		return nil, "", fmt.Errorf("list versions of models/%s: %w", id, ErrNotFound)
	}
	out := []*mixdv1.Model{}
	for _, v := range nums {
		if v <= after {
			continue
		}
		if err := ctx.Err(); err != nil {
			return nil, "", fmt.Errorf("list versions of models/%s: %w", id, err)
		}
		m, err := s.read(id, v)
		if errors.Is(err, ErrNotFound) {
			continue
		}
		if errors.Is(err, ErrCorrupt) {
			s.log.Warn("store: skipping corrupt model version", "model", "models/"+id, "version", v, "error", err)
			continue
		}
		if err != nil {
			return nil, "", fmt.Errorf("list versions of models/%s: %w", id, err)
		}
		if len(out) == size {
			return out, VersionsToken(id, out[size-1].Version), nil
		}
		out = append(out, m)
	}
	return out, "", nil
}

// Delete implements Store.
func (s *DirStore) Delete(ctx context.Context, name string, version int64) (int64, error) {
	if err := s.live(); err != nil {
		return 0, err
	}
	id, err := ParseName(name)
	if err != nil {
		return 0, fmt.Errorf("delete model: %w", err)
	}
	what := "models/" + id
	if version > 0 {
		what += " version " + strconv.FormatInt(version, 10)
	}
	if version < 0 {
		return 0, fmt.Errorf("delete %s: %w: version %d is negative", what, ErrInvalid, version)
	}
	unlock, err := s.lock(ctx)
	if err != nil {
		return 0, fmt.Errorf("delete %s: %w", what, err)
	}
	defer unlock()
	nums, err := s.versionNumbers(id)
	if err != nil {
		return 0, fmt.Errorf("delete %s: %w", what, err)
	}
	nums = s.withQuarantined(id, nums)
	targets := nums
	if version > 0 {
		targets = nil
		for _, v := range nums {
			if v == version {
				targets = []int64{v}
			}
		}
	}
	if len(targets) == 0 {
		return 0, fmt.Errorf("delete %s: %w", what, ErrNotFound)
	}
	dir := filepath.Join(s.models, id)
	hw, err := s.highWater(id)
	if err != nil {
		return 0, fmt.Errorf("delete %s: %w", what, err)
	}
	if top := nums[len(nums)-1]; top > hw {
		if err := writeAtomic(dir, highWaterFile, []byte(strconv.FormatInt(top, 10)+"\n")); err != nil {
			return 0, fmt.Errorf("delete %s: %w", what, err)
		}
	}
	for _, v := range targets {
		if err := os.Remove(filepath.Join(dir, versionFile(v))); err != nil && !errors.Is(err, fs.ErrNotExist) {
			return 0, fmt.Errorf("delete %s: %w", what, err)
		}
		if err := s.removeQuarantined(id, v); err != nil {
			return 0, fmt.Errorf("delete %s: %w", what, err)
		}
	}
	if err := syncDir(dir); err != nil {
		return 0, fmt.Errorf("delete %s: %w", what, err)
	}
	return int64(len(targets)), nil
}

// Close implements Store. It waits for a write in progress to finish.
func (s *DirStore) Close() error {
	if s.closed.Swap(true) {
		return nil
	}
	s.sem <- struct{}{}
	defer func() { <-s.sem }()
	return s.lockf.Close()
}

func (s *DirStore) live() error {
	if s.closed.Load() {
		return fmt.Errorf("store %s: %w", s.dir, ErrClosed)
	}
	return nil
}

// lock takes the in-process mutex, then the flock on <dir>/lock, polling
// so that ctx can cancel the wait. The returned function releases both.
func (s *DirStore) lock(ctx context.Context) (func(), error) {
	select {
	case s.sem <- struct{}{}:
	case <-ctx.Done():
		return nil, ctx.Err()
	}
	if s.closed.Load() {
		// Close ran while we waited; the lock file may be closed.
		<-s.sem
		return nil, fmt.Errorf("store %s: %w", s.dir, ErrClosed)
	}
	delay := time.Millisecond
	for {
		ok, err := tryLock(s.lockfd)
		if err != nil {
			<-s.sem
			return nil, fmt.Errorf("lock %s: %w", filepath.Join(s.dir, lockFile), err)
		}
		if ok {
			break
		}
		t := time.NewTimer(delay)
		select {
		case <-t.C:
		case <-ctx.Done():
			t.Stop()
			<-s.sem
			return nil, ctx.Err()
		}
		delay = min(2*delay, 50*time.Millisecond)
	}
	return func() {
		if err := unlock(s.lockfd); err != nil {
			s.log.Error("store: releasing the lock failed", "dir", s.dir, "error", err)
		}
		<-s.sem
	}, nil
}

// newest returns the newest readable version of model id; ErrNotFound when
// it has no versions, ErrCorrupt when none of them is readable.
func (s *DirStore) newest(ctx context.Context, id string) (*mixdv1.Model, error) {
	nums, err := s.versionNumbers(id)
	if err != nil {
		return nil, err
	}
	var firstCorrupt error
	corrupt := 0
	for i := len(nums) - 1; i >= 0; i-- {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		m, err := s.read(id, nums[i])
		switch {
		case err == nil:
			return m, nil
		case errors.Is(err, ErrNotFound): // deleted meanwhile
		case errors.Is(err, ErrCorrupt):
			s.log.Warn("store: skipping corrupt model version", "model", "models/"+id, "version", nums[i], "error", err)
			if firstCorrupt == nil {
				firstCorrupt = err
			}
			corrupt++
		default:
			return nil, err
		}
	}
	if firstCorrupt != nil {
		return nil, fmt.Errorf("no readable version (%d corrupt; the newest: %w)", corrupt, firstCorrupt)
	}
	if q := s.quarantinedCount(id); q > 0 {
		return nil, fmt.Errorf("%w: no readable version: %d quarantined in %s", ErrCorrupt, q, filepath.Join(s.dir, quarantineDir, id))
	}
	return nil, ErrNotFound
}

// read reads, checks and decodes one version record.
func (s *DirStore) read(id string, v int64) (*mixdv1.Model, error) {
	path := filepath.Join(s.models, id, versionFile(v))
	b, err := os.ReadFile(path)
	if errors.Is(err, fs.ErrNotExist) {
		if q := s.quarantined(id, v); q != "" {
			return nil, fmt.Errorf("%w: %s: quarantined as %s: it failed its checks when it was read", ErrCorrupt, path, q)
		}
		return nil, ErrNotFound
	}
	if err != nil {
		return nil, err
	}
	corrupt := func(format string, args ...any) error {
		return fmt.Errorf("%w: %s: %s", ErrCorrupt, path, fmt.Sprintf(format, args...))
	}
	damaged := func(format string, args ...any) error {
		return s.quarantine(id, v, b, corrupt(format, args...))
	}
	var rec struct {
		Record        string          `json:"record"`
		RecordVersion int             `json:"record_version"`
		SHA256        string          `json:"sha256"`
		Document      json.RawMessage `json:"document"`
	}
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&rec); err != nil {
		return nil, damaged("not a complete record (%d bytes): %v", len(b), err)
	}
	if rest := bytes.TrimSpace(b[dec.InputOffset():]); len(rest) > 0 {
		return nil, damaged("%d unexpected bytes after the record", len(rest))
	}
	if rec.Record != recordKind {
		return nil, damaged("record kind %q, want %q", rec.Record, recordKind)
	}
	if rec.RecordVersion != recordVersion {
		return nil, corrupt("record_version %d is not one this build reads (%d)", rec.RecordVersion, recordVersion)
	}
	sum := sha256.Sum256(rec.Document)
	if got := hex.EncodeToString(sum[:]); got != rec.SHA256 {
		return nil, damaged("checksum mismatch: the record says sha256 %s, the document hashes to %s", rec.SHA256, got)
	}
	m, err := modeldoc.Decode(rec.Document)
	if err != nil {
		return nil, corrupt("%v", err)
	}
	if want := modeldoc.NamePrefix + id; m.Name != want || m.Version != v {
		return nil, damaged("holds %s version %d, want %s version %d", m.Name, m.Version, want, v)
	}
	return m, nil
}

// versionNumbers returns the version numbers of model id that have a
// record file (readable or not), ascending.
func (s *DirStore) versionNumbers(id string) ([]int64, error) {
	ents, err := os.ReadDir(filepath.Join(s.models, id))
	if errors.Is(err, fs.ErrNotExist) {
		return nil, nil
	}
	if err != nil {
		return nil, err
	}
	var nums []int64
	for _, e := range ents {
		if v, ok := parseVersionFile(e.Name()); ok && e.Type().IsRegular() {
			nums = append(nums, v)
		}
	}
	sort.Slice(nums, func(i, j int) bool { return nums[i] < nums[j] })
	return nums, nil
}

// highWater returns the high-water mark of model id (0 when there is none).
func (s *DirStore) highWater(id string) (int64, error) {
	path := filepath.Join(s.models, id, highWaterFile)
	b, err := os.ReadFile(path)
	if errors.Is(err, fs.ErrNotExist) {
		return 0, nil
	}
	if err != nil {
		return 0, err
	}
	v, err := strconv.ParseInt(strings.TrimSpace(string(b)), 10, 64)
	if err != nil || v < 0 {
		return 0, fmt.Errorf("%w: %s: %q is not a version number", ErrCorrupt, path, b)
	}
	return v, nil
}

// nextVersion returns the version number the next Create of id gets.
func (s *DirStore) nextVersion(id string) (int64, error) {
	nums, err := s.versionNumbers(id)
	if err != nil {
		return 0, err
	}
	hw, err := s.highWater(id)
	if err != nil {
		return 0, err
	}
	if n := len(nums); n > 0 && nums[n-1] > hw {
		hw = nums[n-1]
	}
	return hw + 1, nil
}

func versionFile(v int64) string { return strconv.FormatInt(v, 10) + ".json" }

// parseVersionFile recognises "<version>.json" with a canonical decimal
// version ≥ 1.
func parseVersionFile(name string) (int64, bool) {
	digits, ok := strings.CutSuffix(name, ".json")
	if !ok || digits == "" || digits[0] == '0' || len(digits) > 19 {
		return 0, false
	}
	for i := 0; i < len(digits); i++ {
		if digits[i] < '0' || digits[i] > '9' {
			return 0, false
		}
	}
	v, err := strconv.ParseInt(digits, 10, 64)
	return v, err == nil
}

// record wraps a model document with its checksum.
func record(doc []byte) []byte {
	doc = bytes.TrimRight(doc, "\n")
	sum := sha256.Sum256(doc)
	var b bytes.Buffer
	fmt.Fprintf(&b, `{"record":%q,"record_version":%d,"sha256":"%s","document":`, recordKind, recordVersion, hex.EncodeToString(sum[:]))
	b.Write(doc)
	b.WriteString("}\n")
	return b.Bytes()
}

func idOf(m *mixdv1.Model) string { return strings.TrimPrefix(m.Name, modeldoc.NamePrefix) }

// writeAtomic writes data to dir/name so that the file either keeps its old
// content or has the new content in full, durably: temporary file, fsync,
// rename, fsync of the directory.
func writeAtomic(dir, name string, data []byte) (err error) {
	f, err := os.CreateTemp(dir, tempPrefix+"*")
	if err != nil {
		return err
	}
	tmp := f.Name()
	defer func() {
		if err != nil {
			f.Close()
			os.Remove(tmp)
		}
	}()
	if _, err = f.Write(data); err != nil {
		return err
	}
	if err = f.Sync(); err != nil {
		return err
	}
	if err = f.Close(); err != nil {
		return err
	}
	if err = os.Rename(tmp, filepath.Join(dir, name)); err != nil {
		return err
	}
	return syncDir(dir)
}

// mkdirDurable creates dir (and missing parents) and fsyncs the parent of
// every directory it creates.
func mkdirDurable(dir string) error {
	if fi, err := os.Stat(dir); err == nil {
		if !fi.IsDir() {
			return fmt.Errorf("%s is not a directory", dir)
		}
		return nil
	}
	parent := filepath.Dir(dir)
	if parent != dir {
		if err := mkdirDurable(parent); err != nil {
			return err
		}
	}
	if err := os.Mkdir(dir, 0o700); err != nil && !errors.Is(err, fs.ErrExist) {
		return err
	}
	return syncDir(parent)
}

func syncDir(dir string) error {
	d, err := os.Open(dir)
	if err != nil {
		return err
	}
	err = d.Sync()
	if cerr := d.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		return fmt.Errorf("fsync directory %s: %w", dir, err)
	}
	return nil
}
