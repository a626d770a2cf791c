package store

import (
	"errors"
	"strings"
	"testing"
)

// FuzzParseJobsToken: ListFitJobs page tokens come from callers. A token
// is refused with ErrInvalid or names a positive sequence number, and the
// token made for that number reads back to it.
func FuzzParseJobsToken(f *testing.F) {
	for _, s := range []string{"", jobsToken(1), jobsToken(1 << 40), "j1:5", "bogus", "ajE6LTE", "ajE6MA"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, tok string) {
		seq, err := parseJobsToken(tok)
		if err != nil {
			if !errors.Is(err, ErrInvalid) {
				t.Fatalf("parseJobsToken(%q): %v, want ErrInvalid", tok, err)
			}
			return
		}
		if tok == "" {
			if seq != 0 {
				t.Fatalf("empty token gave %d", seq)
			}
			return
		}
		if seq < 1 {
			t.Fatalf("parseJobsToken(%q) = %d", tok, seq)
		}
		if back, err := parseJobsToken(jobsToken(seq)); err != nil || back != seq {
			t.Fatalf("round trip of %d: %d, %v", seq, back, err)
		}
	})
}

// FuzzParseNote: notification payloads come from the database (anyone who
// may NOTIFY on the channel). A payload of another schema, an unknown kind
// or malformed JSON is ignored; a known one yields its kind.
func FuzzParseNote(f *testing.F) {
	for _, s := range []string{
		`{"schema":"public","kind":"model-created","model":"models/pumps","version":3}`,
		`{"schema":"public","kind":"model-deleted","model":"models/pumps"}`,
		`{"schema":"other","kind":"model-created","model":"models/pumps","version":3}`,
		`{"schema":"public","kind":"job-cancel-requested","job":"fitJobs/1","owner":"a"}`,
		`{"schema":"public","kind":"listening"}`,
		`not json`, ``, `{}`,
	} {
		f.Add(s)
	}
	s := &PgStore{schema: "public"}
	f.Fuzz(func(t *testing.T, payload string) {
		c, ok := s.parseNote(payload)
		if !ok {
			return
		}
		if _, known := noteKinds[c.Kind.String()]; !known {
			t.Fatalf("parseNote(%q) gave kind %v, which notifications do not carry", payload, c.Kind)
		}
		if !strings.Contains(payload, "public") {
			t.Fatalf("parseNote accepted %q without this store's schema", payload)
		}
	})
}
