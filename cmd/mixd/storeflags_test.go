package main

import (
	"bytes"
	"net"
	"strings"
	"testing"
)

func TestStoreFlags(t *testing.T) {
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	closed := l.Addr().String() // nobody listens here once closed
	l.Close()
	for _, c := range []struct {
		args []string
		code int
		msg  string
	}{
		{[]string{"serve", "--store", "mysql://db/mixd"}, exitUsage, "want a postgres:// or postgresql:// URL"},
		{[]string{"serve", "--store", "./models"}, exitUsage, "want a postgres:// or postgresql:// URL"},
		// A refused value is shown without its password.
		{[]string{"serve", "--store", "mysql://mixd:s3cret@db/mixd"}, exitUsage, `--store "mysql://mixd:xxxxx@db/mixd": want a postgres://`},
		{[]string{"serve", "--store", "mixd:s3cret@db:5432/mixd"}, exitUsage, "want a postgres:// or postgresql:// URL"},
		{[]string{"serve", "--replica-timeout", "0s"}, exitUsage, "--replica-timeout is 0s, must be positive"},
		{[]string{"serve", "--replica-recheck", "-1s"}, exitUsage, "--replica-recheck is -1s, must be positive"},
		// The database must be reachable at start-up; the password is not shown.
		{[]string{"serve", "--listen", "127.0.0.1:0", "--store", "postgres://mixd:s3cret@" + closed + "/mixd?sslmode=disable&connect_timeout=2"},
			exitError, "store unavailable"},
	} {
		var stdout, stderr bytes.Buffer
		code := run(c.args, &stdout, &stderr)
		if code != c.code || !strings.Contains(stderr.String(), c.msg) {
			t.Errorf("mixd %v: exit %d, stderr %q; want exit %d containing %q", c.args, code, stderr.String(), c.code, c.msg)
		}
		if strings.Contains(stderr.String(), "s3cret") {
			t.Errorf("mixd %v showed the database password: %q", c.args, stderr.String())
		}
	}
}

// TestStoreFromEnvironmentRedacted: a refused MIXD_STORE is named and shown
// without its password, like the flag.
func TestStoreFromEnvironmentRedacted(t *testing.T) {
	t.Setenv("MIXD_STORE", "mysql://mixd:s3cret@db/mixd")
	var stdout, stderr bytes.Buffer
	code := run([]string{"serve", "--listen", "127.0.0.1:0"}, &stdout, &stderr)
	if code != exitUsage || !strings.Contains(stderr.String(), "mysql://mixd:xxxxx@db/mixd") || strings.Contains(stderr.String(), "s3cret") {
		t.Fatalf("exit %d, stderr %q", code, stderr.String())
	}
}
