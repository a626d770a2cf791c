package store

import (
	"context"
	"errors"
	"fmt"
	"io"
	"net"
	"syscall"
	"testing"

	"github.com/jackc/pgx/v5/pgconn"
)

// Which database errors mean "unreachable, retry later". The SQLSTATE
// classes are those of the PostgreSQL manual, appendix "PostgreSQL Error
// Codes" (08 connection exception, 57P01 admin_shutdown, 57P02
// crash_shutdown, 57P03 cannot_connect_now, 53300 too_many_connections,
// 23505 unique_violation, 42P01 undefined_table).
func TestUnreachable(t *testing.T) {
	for _, c := range []struct {
		err  error
		want bool
	}{
		{&pgconn.ConnectError{}, true},
		{fmt.Errorf("query: %w", &pgconn.PgError{Code: "08006"}), true},
		{&pgconn.PgError{Code: "57P01"}, true},
		{&pgconn.PgError{Code: "57P02"}, true},
		{&pgconn.PgError{Code: "57P03"}, true},
		{&pgconn.PgError{Code: "53300"}, true},
		{&pgconn.PgError{Code: "23505"}, false},
		{&pgconn.PgError{Code: "42P01"}, false},
		{io.ErrUnexpectedEOF, true},
		{fmt.Errorf("read: %w", io.EOF), true},
		{pgconn.ErrConnClosed, true},
		{&net.OpError{Op: "dial", Net: "tcp", Err: syscall.ECONNREFUSED}, true},
		{fmt.Errorf("write: %w", syscall.EPIPE), true},
		{errors.New("cannot scan NULL into *string"), false},
	} {
		if got := unreachable(c.err); got != c.want {
			t.Errorf("unreachable(%v) = %v, want %v", c.err, got, c.want)
		}
	}
	s := &PgStore{where: "127.0.0.1:5432/mixd"}
	ctx := context.Background()
	if err := s.dbError(ctx, io.ErrUnexpectedEOF); !errors.Is(err, ErrUnavailable) {
		t.Errorf("dbError(EOF) = %v, want ErrUnavailable", err)
	}
	if err := s.dbError(ctx, ErrNotFound); err != ErrNotFound {
		t.Errorf("dbError(ErrNotFound) = %v, want it unchanged", err)
	}
	cctx, cancel := context.WithCancel(ctx)
	cancel()
	if err := s.dbError(cctx, io.ErrUnexpectedEOF); !errors.Is(err, context.Canceled) || errors.Is(err, ErrUnavailable) {
		t.Errorf("dbError with the caller's context cancelled = %v, want context.Canceled", err)
	}
}
