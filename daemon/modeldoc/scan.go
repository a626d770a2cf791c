package modeldoc

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"strconv"
	"strings"
)

// freeKeyObjects are the paths of objects whose keys are data, not field
// names.
var freeKeyObjects = map[string]bool{"fit_report.settings": true}

// scan walks the document's tokens before it is decoded into structs and
// rejects what encoding/json would let through silently: null values
// (which it turns into zeros), repeated keys (it keeps the last) and field
// names that only match a known field when case is ignored. Its errors name
// the path of the offending value.
func scan(b []byte) error {
	return walk(b, true, nil)
}

// pathAt returns the path of the value that ends at or after byte offset
// off (or whose opening bracket ends there), for turning the byte offsets in
// encoding/json's type errors into paths.
func pathAt(b []byte, off int64) string {
	found := ""
	_ = walk(b, false, func(stack []*scanFrame, at int64) bool {
		if at >= off {
			found = path(stack)
			return true
		}
		return false
	})
	return found
}

// walk reads the tokens of b keeping track of the path. With strict set it
// returns an error for null values, repeated keys and keys that cannot be
// field names. visit, when not nil, is called with the path of each value
// and the input offset just after its last token, and, for an object or
// array, also just after its opening bracket; walk stops when it returns true.
func walk(b []byte, strict bool, visit func(stack []*scanFrame, at int64) bool) error {
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.UseNumber()
	var stack []*scanFrame
	done := func() {
		if n := len(stack); n > 0 {
			top := stack[n-1]
			if top.object {
				top.wantKey = true
			} else {
				top.index++
			}
		}
	}
	for {
		tok, err := dec.Token()
		if errors.Is(err, io.EOF) {
			return nil
		}
		if err != nil {
			return jsonError(err, nil)
		}
		if n := len(stack); n > 0 && stack[n-1].object && stack[n-1].wantKey {
			top := stack[n-1]
			if tok == json.Delim('}') {
				stack = stack[:n-1]
				if visit != nil && visit(stack, dec.InputOffset()) {
					return nil
				}
				done()
				continue
			}
			key, _ := tok.(string)
			if strict && !top.free && !fieldName(key) {
				return fmt.Errorf("%sunknown field %q", prefix(stack), key)
			}
			if strict && top.keys[key] {
				top.key = key
				return fmt.Errorf("%s: the field appears more than once", path(stack))
			}
			top.keys[key] = true
			top.key = key
			top.wantKey = false
			continue
		}
		switch t := tok.(type) {
		case json.Delim:
			switch t {
			case '{', '[':
				if visit != nil && visit(stack, dec.InputOffset()) {
					return nil
				}
				f := &scanFrame{}
				if t == '{' {
					f = &scanFrame{object: true, wantKey: true, keys: map[string]bool{}, free: freeKeyObjects[path(stack)]}
				}
				stack = append(stack, f)
			default: // ']'; '}' is handled with the keys
				stack = stack[:len(stack)-1]
				if visit != nil && visit(stack, dec.InputOffset()) {
					return nil
				}
				done()
			}
		default:
			if tok == nil && strict {
				return fmt.Errorf("%s: null is not allowed (leave an optional field out instead)", path(stack))
			}
			if visit != nil && visit(stack, dec.InputOffset()) {
				return nil
			}
			done()
		}
	}
}

type scanFrame struct {
	object  bool
	wantKey bool
	free    bool
	key     string
	index   int
	keys    map[string]bool
}

// path renders the location of the current value, e.g. "components[1].mean[0]".
func path(stack []*scanFrame) string {
	var sb strings.Builder
	for _, f := range stack {
		if f.object {
			if sb.Len() > 0 {
				sb.WriteByte('.')
			}
			sb.WriteString(f.key)
		} else {
			sb.WriteString("[" + strconv.Itoa(f.index) + "]")
		}
	}
	if sb.Len() == 0 {
		return "document"
	}
	return sb.String()
}

// prefix is the path of the object being read followed by ": ", or "" at
// the top level.
func prefix(stack []*scanFrame) string {
	if len(stack) <= 1 {
		return ""
	}
	return path(stack[:len(stack)-1]) + ": "
}

// fieldName reports whether s can be one of the document's field names,
// which are lower-case ASCII letters, digits and underscores.
func fieldName(s string) bool {
	if s == "" {
		return false
	}
	for i := 0; i < len(s); i++ {
		c := s[i]
		if !(c >= 'a' && c <= 'z' || c >= '0' && c <= '9' || c == '_') {
			return false
		}
	}
	return true
}
