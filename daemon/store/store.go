// Package store keeps fitted models: every version of every model, durably.
//
// A model is named "models/{id}" and has integer versions starting at 1.
// Versions are immutable once written; a new write of the same model makes a
// new version, numbered one more than the highest version the model has ever
// had, so a number is never reused, even after deletes.
//
// The Store interface is what the daemon uses. DirStore keeps models in a
// local directory (the default); package storetest holds the conformance
// suite every implementation must pass.
package store

import (
	"context"
	"encoding/base64"
	"errors"
	"fmt"
	"strconv"
	"strings"

	"github.com/mixd-dev/mixd/daemon/modeldoc"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// Store holds model versions. Implementations are safe for concurrent use.
//
// Names may be given as "models/{id}" or "{id}"; returned models are always
// named "models/{id}". Every returned model is the caller's own copy.
type Store interface {
	// Create validates m (fully, as modeldoc.Encode does) and writes it as a
	// new version of the model m.Name. The store assigns Version (one more
	// than the highest version the model ever had) and CreateTime; the values
	// in m are ignored and m is not modified. The version is durable before
	// Create returns. It returns the stored model, exactly as Get will
	// return it.
	Create(ctx context.Context, m *mixdv1.Model) (*mixdv1.Model, error)
	// Get returns one version of a model; version 0 means the newest
	// readable version. It fails with ErrNotFound when the model or version
	// does not exist, and with ErrCorrupt when that version (for version 0:
	// every version) is stored but unreadable.
	Get(ctx context.Context, name string, version int64) (*mixdv1.Model, error)
	// List returns the newest readable version of each model, ordered by
	// id (byte order), pageSize at a time (0 means DefaultPageSize; larger
	// than MaxPageSize means MaxPageSize). The returned token fetches the
	// next page and is empty after the last one. Paging is stable: a page
	// continues after the last id of the previous one, so models created or
	// deleted meanwhile before that point do not shift later pages. Models
	// without a readable version are left out.
	List(ctx context.Context, pageSize int, pageToken string) ([]*mixdv1.Model, string, error)
	// Versions returns the readable versions of one model, oldest first,
	// paged like List (a page continues after the last version of the
	// previous one). It fails with ErrNotFound when the model has no stored
	// versions; unreadable versions are left out.
	Versions(ctx context.Context, name string, pageSize int, pageToken string) ([]*mixdv1.Model, string, error)
	// Delete removes one version (version > 0) or every version (version 0)
	// of a model and returns how many versions it removed; ErrNotFound when
	// there is nothing to remove. Unreadable versions are removed too. The
	// removed version numbers are never assigned again.
	Delete(ctx context.Context, name string, version int64) (int64, error)
	// Close releases the store's resources. Calls after Close fail with
	// ErrClosed.
	Close() error
}

// Errors returned by stores, wrapped with context; test with errors.Is.
var (
	// ErrNotFound: the model or version does not exist.
	ErrNotFound = errors.New("not found")
	// ErrCorrupt: a stored version cannot be read back intact (truncated,
	// checksum mismatch, or a document that no longer validates). Corrupt
	// versions are never returned as models.
	ErrCorrupt = errors.New("stored model is corrupt")
	// ErrInvalid: an argument is unusable: a bad name, negative version,
	// malformed page token, or a model that fails validation.
	ErrInvalid = errors.New("invalid argument")
	// ErrClosed: the store has been closed.
	ErrClosed = errors.New("store is closed")
)

// Page sizes of List and Versions.
const (
	// DefaultPageSize is used when pageSize is 0.
	DefaultPageSize = 100
	// MaxPageSize caps pageSize.
	MaxPageSize = 1000
)

// ValidateName checks a model id: 1 to 128 characters, each an ASCII
// letter, digit, '.', '_' or '-', and neither "." nor "..". The error wraps
// ErrInvalid.
func ValidateName(id string) error {
	if err := modeldoc.ValidateID(id); err != nil {
		return fmt.Errorf("%w: %w", ErrInvalid, err)
	}
	return nil
}

// ParseName accepts "models/{id}" or a bare "{id}" and returns the id,
// checked with ValidateName. The error wraps ErrInvalid.
func ParseName(s string) (id string, err error) {
	id, err = modeldoc.ParseName(s)
	if err != nil {
		return "", fmt.Errorf("%w: %w", ErrInvalid, err)
	}
	return id, nil
}

// PageSize applies the page-size rules of List and Versions: 0 means
// DefaultPageSize, more than MaxPageSize means MaxPageSize, negative is an
// error wrapping ErrInvalid.
func PageSize(n int) (int, error) {
	switch {
	case n < 0:
		return 0, fmt.Errorf("%w: page size %d is negative", ErrInvalid, n)
	case n == 0:
		return DefaultPageSize, nil
	case n > MaxPageSize:
		return MaxPageSize, nil
	}
	return n, nil
}

// Page tokens are opaque to callers. Inside they are base64url (no padding)
// of "m1:{id}" for List (the last id returned) and "v1:{id}:{version}" for
// Versions (the last version returned). Implementations of Store share them
// so that tokens survive a change of backend.

// ListToken returns the List page token that continues after model id.
func ListToken(id string) string {
	return base64.RawURLEncoding.EncodeToString([]byte("m1:" + id))
}

// ParseListToken returns the id a List page token continues after ("" for
// an empty token). The error wraps ErrInvalid.
func ParseListToken(tok string) (string, error) {
	if tok == "" {
		return "", nil
	}
	b, err := base64.RawURLEncoding.DecodeString(tok)
	rest, ok := strings.CutPrefix(string(b), "m1:")
	if err != nil || !ok || modeldoc.ValidateID(rest) != nil {
		return "", fmt.Errorf("%w: page token %q is not one this store issued for listing models", ErrInvalid, tok)
	}
	return rest, nil
}

// VersionsToken returns the Versions page token that continues after
// version v of model id.
func VersionsToken(id string, v int64) string {
	return base64.RawURLEncoding.EncodeToString([]byte("v1:" + id + ":" + strconv.FormatInt(v, 10)))
}

// ParseVersionsToken returns the version a Versions page token for model
// id continues after (0 for an empty token). A token issued for another
// model is rejected. The error wraps ErrInvalid.
func ParseVersionsToken(id, tok string) (int64, error) {
	if tok == "" {
		return 0, nil
	}
	bad := fmt.Errorf("%w: page token %q is not one this store issued for the versions of models/%s", ErrInvalid, tok, id)
	b, err := base64.RawURLEncoding.DecodeString(tok)
	if err != nil {
		return 0, bad
	}
	rest, ok := strings.CutPrefix(string(b), "v1:"+id+":")
	if !ok {
		return 0, bad
	}
	v, err := strconv.ParseInt(rest, 10, 64)
	if err != nil || v < 1 {
		return 0, bad
	}
	return v, nil
}
