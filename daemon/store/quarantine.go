package store

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"time"
)

// Quarantine of damaged records (DirStore).
//
// A record whose bytes are damaged — not a complete record, bytes after
// it, a wrong record kind, a checksum mismatch, or the record of another
// model or version — is moved out of the models directory the first time
// it is read:
//
//	<dir>/quarantine/<id>/<version>.json      (".1", ".2"... appended if taken)
//
// The move happens under the writer lock. The model's high-water mark is
// raised to the version first, so the number is never reused. An error
// (ErrCorrupt) is returned to the reader that found it and logged at level
// Error with the model, version, reason and new path. From then on Get of
// that version returns ErrCorrupt naming the quarantined file; Get of the
// newest version, List and Versions do not see it; the other versions and
// models are served as before. The file is left for an operator to inspect
// and remove; mixd never reads the quarantine directory except to say that
// a version is there. Delete of the version (or of the model) removes it.
//
// A record that is intact but not one this build can use (a newer
// record_version, or a document that checks out by its checksum but fails
// this build's validation) is not moved: it may be readable by the mixd
// that wrote it. It is skipped and reported as corrupt, as before.

// quarantineDir names the quarantine directory inside the store directory.
const quarantineDir = "quarantine"

// quarantine moves the damaged record of id version v, whose content was b
// when it was read, to the quarantine directory, and returns cause with
// the new path appended. If the record is gone or changed meanwhile, it
// does nothing.
func (s *DirStore) quarantine(id string, v int64, b []byte, cause error) error {
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	unlock, err := s.lock(ctx)
	if err != nil {
		s.log.Error("store: damaged model version not quarantined", "model", "models/"+id, "version", v, "error", cause, "lock_error", err)
		return cause
	}
	defer unlock()
	dir := filepath.Join(s.models, id)
	src := filepath.Join(dir, versionFile(v))
	now, err := os.ReadFile(src)
	if err != nil || !bytes.Equal(now, b) {
		return cause // deleted or (impossibly) rewritten meanwhile
	}
	moved, err := s.moveToQuarantine(id, v, dir, src)
	if err != nil {
		s.log.Error("store: damaged model version could not be quarantined; it is skipped", "model", "models/"+id, "version", v, "error", cause, "move_error", err)
		return cause
	}
	s.log.Error("store: quarantined corrupt model version", "model", "models/"+id, "version", v, "reason", cause, "moved_to", moved)
	return fmt.Errorf("%w (moved to %s)", cause, moved)
}

// moveToQuarantine raises the high-water mark to v and moves src into the
// quarantine directory, durably. The writer lock is held.
func (s *DirStore) moveToQuarantine(id string, v int64, dir, src string) (string, error) {
	hw, err := s.highWater(id)
	if err != nil {
		return "", err
	}
	if v > hw {
		if err := writeAtomic(dir, highWaterFile, []byte(strconv.FormatInt(v, 10)+"\n")); err != nil {
			return "", err
		}
	}
	qdir := filepath.Join(s.dir, quarantineDir, id)
	if err := mkdirDurable(qdir); err != nil {
		return "", err
	}
	dst := filepath.Join(qdir, versionFile(v))
	for n := 1; ; n++ {
		if _, err := os.Lstat(dst); errors.Is(err, fs.ErrNotExist) {
			break
		}
		dst = filepath.Join(qdir, versionFile(v)+"."+strconv.Itoa(n))
	}
	if err := os.Rename(src, dst); err != nil {
		return "", err
	}
	if err := syncDir(qdir); err != nil {
		return "", err
	}
	if err := syncDir(dir); err != nil {
		return "", err
	}
	return dst, nil
}

// quarantined returns the path of the quarantined record of id version v,
// or "" when there is none.
func (s *DirStore) quarantined(id string, v int64) string {
	p := filepath.Join(s.dir, quarantineDir, id, versionFile(v))
	if _, err := os.Lstat(p); err == nil {
		return p
	}
	return ""
}

// withQuarantined adds the versions of id in quarantine to nums (sorted,
// without repeats), for Delete.
func (s *DirStore) withQuarantined(id string, nums []int64) []int64 {
	ents, err := os.ReadDir(filepath.Join(s.dir, quarantineDir, id))
	if err != nil {
		return nums
	}
	seen := map[int64]bool{}
	for _, v := range nums {
		seen[v] = true
	}
	for _, e := range ents {
		name, _, _ := strings.Cut(e.Name(), ".json")
		if v, ok := parseVersionFile(name + ".json"); ok && !seen[v] {
			seen[v] = true
			nums = append(nums, v)
		}
	}
	sort.Slice(nums, func(i, j int) bool { return nums[i] < nums[j] })
	return nums
}

// removeQuarantined removes the quarantined records of id version v (Delete
// of that version). The writer lock is held.
func (s *DirStore) removeQuarantined(id string, v int64) error {
	qdir := filepath.Join(s.dir, quarantineDir, id)
	ents, err := os.ReadDir(qdir)
	if err != nil {
		return nil
	}
	removed := false
	for _, e := range ents {
		if n := e.Name(); n == versionFile(v) || strings.HasPrefix(n, versionFile(v)+".") {
			if err := os.Remove(filepath.Join(qdir, n)); err != nil && !errors.Is(err, fs.ErrNotExist) {
				return err
			}
			removed = true
		}
	}
	if removed {
		return syncDir(qdir)
	}
	return nil
}

// quarantinedCount returns how many records of id are in quarantine.
func (s *DirStore) quarantinedCount(id string) int {
	ents, err := os.ReadDir(filepath.Join(s.dir, quarantineDir, id))
	if err != nil {
		return 0
	}
	return len(ents)
}
