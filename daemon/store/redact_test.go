package store

import "testing"

func TestRedactURL(t *testing.T) {
	for _, c := range []struct{ in, want string }{
		{"postgres://mixd:s3cret@db:5432/mixd?sslmode=disable", "postgres://mixd:xxxxx@db:5432/mixd?sslmode=disable"},
		{"postgresql://mixd@db/mixd", "postgresql://mixd@db/mixd"},
		{"postgres://db/mixd", "postgres://db/mixd"},
		{"mysql://u:p@h/x", "mysql://u:xxxxx@h/x"},
		{"u:p:q@host", "u:xxxxx@host"},
		// The last '@' ends the user part: a password may contain '@'.
		{"postgres://u:p@ss@db/x", "postgres://u:xxxxx@db/x"},
		{"./models", "./models"},
		{"", ""},
	} {
		if got := RedactURL(c.in); got != c.want {
			t.Errorf("RedactURL(%q) = %q, want %q", c.in, got, c.want)
		}
	}
}
