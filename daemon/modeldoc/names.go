package modeldoc

import (
	"fmt"
	"strings"
)

// MaxIDLength is the longest model id, in bytes.
const MaxIDLength = 128

// NamePrefix starts every model resource name: "models/{id}".
const NamePrefix = "models/"

// ValidateID checks a model id: 1 to MaxIDLength characters, each an ASCII
// letter, digit, '.', '_' or '-', and neither "." nor "..".
func ValidateID(id string) error {
	if id == "" {
		return fmt.Errorf("model id is empty")
	}
	if len(id) > MaxIDLength {
		return fmt.Errorf("model id has %d characters, at most %d allowed", len(id), MaxIDLength)
	}
	if id == "." || id == ".." {
		return fmt.Errorf("model id %q is not allowed", id)
	}
	for i, c := range id {
		switch {
		case c >= 'a' && c <= 'z', c >= 'A' && c <= 'Z', c >= '0' && c <= '9', c == '.', c == '_', c == '-':
		default:
			return fmt.Errorf("model id %q: character %q at byte %d is not allowed (letters, digits, '.', '_' and '-' only)", id, c, i)
		}
	}
	return nil
}

// ParseName accepts a model resource name "models/{id}" or a bare id and
// returns the id after checking it with ValidateID.
func ParseName(s string) (string, error) {
	id := strings.TrimPrefix(s, NamePrefix)
	if err := ValidateID(id); err != nil {
		return "", err
	}
	return id, nil
}
