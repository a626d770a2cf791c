package store_test

import (
	"errors"
	"os"
	"path/filepath"
	"testing"

	"github.com/mixd-dev/mixd/daemon/store"
	"github.com/mixd-dev/mixd/daemon/store/storetest"
)

// FuzzRecord writes arbitrary bytes as a version record and reads it back:
// reading must not panic, and must give either the model the file name
// promises or an error wrapping ErrCorrupt.
func FuzzRecord(f *testing.F) {
	seedDir := f.TempDir()
	s, err := store.OpenDir(seedDir, quiet())
	if err != nil {
		f.Fatal(err)
	}
	if _, err := s.Create(bg, storetest.Model("pumps", 1)); err != nil {
		f.Fatal(err)
	}
	s.Close()
	good, err := os.ReadFile(filepath.Join(seedDir, "models", "pumps", "1.json"))
	if err != nil {
		f.Fatal(err)
	}
	f.Add(good)
	f.Add(good[:len(good)/2])
	f.Add([]byte(`{"record":"mixd-model-record","record_version":1,"sha256":"","document":{}}`))
	dir := f.TempDir()
	s, err = store.OpenDir(dir, quiet())
	if err != nil {
		f.Fatal(err)
	}
	f.Cleanup(func() { s.Close() })
	if err := os.MkdirAll(filepath.Join(dir, "models", "pumps"), 0o700); err != nil {
		f.Fatal(err)
	}
	path := filepath.Join(dir, "models", "pumps", "1.json")
	f.Fuzz(func(t *testing.T, b []byte) {
		if err := os.WriteFile(path, b, 0o600); err != nil {
			t.Fatal(err)
		}
		m, err := s.Get(bg, "pumps", 1)
		if err != nil {
			if !errors.Is(err, store.ErrCorrupt) {
				t.Fatalf("error %v does not wrap ErrCorrupt", err)
			}
			return
		}
		if m.Name != "models/pumps" || m.Version != 1 {
			t.Fatalf("1.json of pumps served %s version %d", m.Name, m.Version)
		}
	})
}

// FuzzPageTokens feeds arbitrary page tokens to the token parsers: no
// panic, and an accepted token reissued from what it decoded to decodes to
// the same thing.
func FuzzPageTokens(f *testing.F) {
	f.Add(store.ListToken("pumps"))
	f.Add(store.VersionsToken("pumps", 42))
	f.Add("")
	f.Add("bTE6")
	f.Fuzz(func(t *testing.T, tok string) {
		if id, err := store.ParseListToken(tok); err != nil {
			if !errors.Is(err, store.ErrInvalid) {
				t.Fatalf("list token error %v does not wrap ErrInvalid", err)
			}
		} else if id != "" {
			again, err := store.ParseListToken(store.ListToken(id))
			if err != nil || again != id {
				t.Fatalf("list token for %q reads back as %q, %v", id, again, err)
			}
		}
		if v, err := store.ParseVersionsToken("pumps", tok); err != nil {
			if !errors.Is(err, store.ErrInvalid) {
				t.Fatalf("versions token error %v does not wrap ErrInvalid", err)
			}
		} else if v != 0 {
			again, err := store.ParseVersionsToken("pumps", store.VersionsToken("pumps", v))
			if err != nil || again != v {
				t.Fatalf("versions token for %d reads back as %d, %v", v, again, err)
			}
		}
	})
}
