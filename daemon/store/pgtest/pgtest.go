// Package pgtest gives tests a PostgreSQL database to run against: the
// server named by the environment variable MIXD_TEST_POSTGRES (a
// postgres:// URL), one fresh schema per test.
//
// Tests that need PostgreSQL skip, saying so, when the variable is unset.
// `bash .ci/test` always sets it: .ci/postgres.sh starts a throw-away
// server on 127.0.0.1 for the run.
package pgtest

import (
	"context"
	"crypto/rand"
	"encoding/hex"
	"net/url"
	"os"
	"strings"
	"testing"
	"time"

	"github.com/jackc/pgx/v5"
)

// Environment variables read by the tests.
const (
	// EnvURL names the PostgreSQL server the tests use.
	EnvURL = "MIXD_TEST_POSTGRES"
	// EnvRestartURL names a second server that a test may stop and start
	// (with EnvPgCtl and EnvPgData) without disturbing tests running at
	// the same time on the first.
	EnvRestartURL = "MIXD_TEST_POSTGRES_RESTART"
	// EnvPgCtl is the command that runs pg_ctl for the EnvRestartURL
	// server, split on spaces (for example
	// "runuser -u postgres -- /usr/lib/postgresql/15/bin/pg_ctl").
	EnvPgCtl = "MIXD_TEST_PG_CTL"
	// EnvPgData is the data directory of the EnvRestartURL server.
	EnvPgData = "MIXD_TEST_PG_DATA"
)

// URL returns the server URL from EnvURL, or skips the test.
func URL(t testing.TB) string {
	t.Helper()
	u := os.Getenv(EnvURL)
	if u == "" {
		t.Skipf("%s is not set: skipping this PostgreSQL test (bash .ci/test sets it through .ci/postgres.sh; or point it at a server, e.g. postgres://postgres@127.0.0.1:5432/postgres?sslmode=disable)", EnvURL)
	}
	return u
}

// Schema creates an empty schema with a random name on the server at
// base and returns base with search_path set to it. The schema and
// everything in it are dropped when the test ends.
func Schema(t testing.TB, base string) string {
	t.Helper()
	var b [6]byte
	if _, err := rand.Read(b[:]); err != nil {
		t.Fatal(err)
	}
	name := "mixd_test_" + hex.EncodeToString(b[:])
	exec(t, base, "CREATE SCHEMA "+name)
	t.Cleanup(func() { exec(t, base, "DROP SCHEMA "+name+" CASCADE") })
	return WithParam(t, base, "search_path", name)
}

// WithParam returns the URL u with the query parameter key set to value.
func WithParam(t testing.TB, u, key, value string) string {
	t.Helper()
	p, err := url.Parse(u)
	if err != nil {
		t.Fatalf("%s is not a URL: %v", EnvURL, err)
	}
	q := p.Query()
	q.Set(key, value)
	p.RawQuery = q.Encode()
	return p.String()
}

// Exec runs SQL statements on the server at u.
func Exec(t testing.TB, u string, sql string) {
	t.Helper()
	exec(t, u, sql)
}

func exec(t testing.TB, u, sql string) {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	c, err := pgx.Connect(ctx, u)
	if err != nil {
		t.Fatalf("connect to the test database: %v", err)
	}
	defer c.Close(ctx)
	if _, err := c.Exec(ctx, sql); err != nil {
		t.Fatalf("%s: %v", strings.SplitN(sql, "\n", 2)[0], err)
	}
}
