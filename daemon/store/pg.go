package store

import (
	"context"
	"crypto/sha256"
	"embed"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"log/slog"
	"math"
	"net"
	"path"
	"sort"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"syscall"
	"time"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgconn"
	"github.com/jackc/pgx/v5/pgxpool"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/types/known/timestamppb"

	"github.com/mixd-dev/mixd/daemon/modeldoc"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// PgStore is a Store in a PostgreSQL database, for several daemons
// (replicas) that serve the same models. It also implements Watcher and
// JobStore.
//
// Tables live in the connection's current schema (the first schema of its
// search_path, "public" by default; set another with the connection
// string parameter search_path). OpenPostgres creates them and applies
// the migrations embedded in the binary (pgschema/*.sql), in order, each
// recorded in the table mixd_schema_versions; it refuses a database whose
// schema is newer than the binary. Concurrent start-ups are serialized by
// an advisory lock.
//
// Model versions are immutable rows (a trigger refuses updates) holding
// the model document and its SHA-256, checked on every read: a row failing
// the checksum, decoding or validation is corrupt (ErrCorrupt), never
// served, and skipped by newest-version reads, List and Versions, as in
// DirStore. Version numbers come from a per-model high-water row that
// Create increments under its row lock, so concurrent writers on any
// number of daemons never share or reuse a number.
//
// Every Create and Delete sends a notification on the channel
// NotifyChannel in the same transaction; Changes delivers them.
//
// When the database cannot be reached, calls fail with errors wrapping
// ErrUnavailable; the connection pool reconnects by itself on later calls.
type PgStore struct {
	pool   *pgxpool.Pool
	conn   *pgx.ConnConfig // for the notification connections
	schema string
	where  string // host:port/database, for messages (no credentials)
	log    *slog.Logger

	closed  atomic.Bool
	done    chan struct{} // closed by Close
	watches sync.WaitGroup
}

var (
	_ Store     = (*PgStore)(nil)
	_ Watcher   = (*PgStore)(nil)
	_ JobStore  = (*PgStore)(nil)
	_ io.Closer = (*PgStore)(nil)
)

// NotifyChannel is the PostgreSQL notification channel of model and job
// changes. Payloads are JSON objects naming the schema, so daemons using
// different schemas of one database ignore each other.
const NotifyChannel = "mixd_changes"

// Defaults of OpenPostgres.
const (
	// DefaultPgConnectTimeout bounds one connection attempt when the
	// connection string sets no connect_timeout.
	DefaultPgConnectTimeout = 5 * time.Second
	// pgListenIdle is how long the notification connection waits before it
	// checks that the server still answers.
	pgListenIdle = 10 * time.Second
	// pgBackoffMin and pgBackoffMax bound the wait between reconnection
	// attempts of the notification connection.
	pgBackoffMin = 100 * time.Millisecond
	pgBackoffMax = 5 * time.Second
)

//go:embed pgschema/*.sql
var pgMigrations embed.FS

// migrationLockKey is the first key of the advisory lock taken while the
// schema is created or migrated (the second is the schema's hash).
const migrationLockKey = 0x6d697864 // "mixd"

// PgOption configures OpenPostgres.
type PgOption func(*PgStore)

// PgLogger sets where PgStore reports corrupt rows it skips and lost
// notification connections; the default is slog.Default().
func PgLogger(l *slog.Logger) PgOption {
	return func(s *PgStore) {
		if l != nil {
			s.log = l
		}
	}
}

// IsPostgresURL reports whether s is a PostgreSQL connection URL
// (postgres:// or postgresql://), the form the daemon's --store accepts.
func IsPostgresURL(s string) bool {
	return strings.HasPrefix(s, "postgres://") || strings.HasPrefix(s, "postgresql://")
}

// RedactURL hides the password of a connection URL (user:password@host)
// for a message: "postgres://u:secret@db/x" becomes
// "postgres://u:xxxxx@db/x". A string without one is returned as it is.
func RedactURL(s string) string {
	start := 0
	if i := strings.Index(s, "://"); i >= 0 {
		start = i + 3
	}
	at := strings.LastIndex(s, "@")
	if at < start {
		return s
	}
	if colon := strings.Index(s[start:at], ":"); colon >= 0 {
		return s[:start+colon+1] + "xxxxx" + s[at:]
	}
	return s
}

// OpenPostgres connects to the database named by connString (a
// postgres:// URL or a keyword/value string, as libpq accepts), creates or
// migrates mixd's tables, and returns the store. The database must be
// reachable: OpenPostgres fails (wrapping ErrUnavailable) when it is not.
func OpenPostgres(ctx context.Context, connString string, opts ...PgOption) (*PgStore, error) {
	cfg, err := pgxpool.ParseConfig(connString)
	if err != nil {
		// pgconn redacts passwords in its parse errors.
		return nil, fmt.Errorf("open postgres store: %w: %w", ErrInvalid, err)
	}
	cc := cfg.ConnConfig
	if cc.ConnectTimeout == 0 {
		cc.ConnectTimeout = DefaultPgConnectTimeout
	}
	if _, ok := cc.RuntimeParams["application_name"]; !ok {
		cc.RuntimeParams["application_name"] = "mixd"
	}
	s := &PgStore{
		conn:  cc.Copy(),
		where: fmt.Sprintf("%s/%s", net.JoinHostPort(cc.Host, strconv.Itoa(int(cc.Port))), cc.Database),
		log:   slog.Default(),
		done:  make(chan struct{}),
	}
	for _, o := range opts {
		o(s)
	}
	s.pool, err = pgxpool.NewWithConfig(ctx, cfg)
	if err != nil {
		return nil, fmt.Errorf("open postgres store %s: %w", s.where, s.dbError(ctx, err))
	}
	if err := s.migrate(ctx); err != nil {
		s.pool.Close()
		return nil, fmt.Errorf("open postgres store %s: %w", s.where, err)
	}
	return s, nil
}

// Where returns "host:port/database (schema S)", for logs; it holds no
// credentials.
func (s *PgStore) Where() string { return fmt.Sprintf("%s (schema %s)", s.where, s.schema) }

// SchemaVersion is the number of migrations this build applies.
func SchemaVersion() int {
	names, _ := fs.Glob(pgMigrations, "pgschema/*.sql")
	return len(names)
}

// migrate creates the schema version table and applies the missing
// migrations in one transaction, under an advisory lock.
func (s *PgStore) migrate(ctx context.Context) error {
	names, err := fs.Glob(pgMigrations, "pgschema/*.sql")
	if err != nil {
		return err
	}
	sort.Strings(names)
	for i, n := range names { // 0001_x.sql, 0002_y.sql ...: numbered without gaps
		if want := fmt.Sprintf("%04d_", i+1); !strings.HasPrefix(path.Base(n), want) {
			return fmt.Errorf("embedded migration %s is out of sequence (want a name starting %s)", n, want)
		}
	}
	err = pgx.BeginFunc(ctx, s.pool, func(tx pgx.Tx) error {
		if err := tx.QueryRow(ctx, `SELECT current_schema()`).Scan(&s.schema); err != nil {
			return fmt.Errorf("find the current schema: %w", err)
		}
		if s.schema == "" {
			return fmt.Errorf("%w: the connection has no current schema (check search_path)", ErrInvalid)
		}
		if _, err := tx.Exec(ctx, `SELECT pg_advisory_xact_lock($1, hashtext(current_schema()))`, int32(migrationLockKey)); err != nil {
			return fmt.Errorf("lock the schema for migration: %w", err)
		}
		if _, err := tx.Exec(ctx, `CREATE TABLE IF NOT EXISTS mixd_schema_versions (
			version    integer PRIMARY KEY,
			name       text NOT NULL,
			applied_at timestamptz NOT NULL DEFAULT now())`); err != nil {
			return fmt.Errorf("create mixd_schema_versions: %w", err)
		}
		var have int
		if err := tx.QueryRow(ctx, `SELECT coalesce(max(version), 0) FROM mixd_schema_versions`).Scan(&have); err != nil {
			return fmt.Errorf("read the schema version: %w", err)
		}
		if have > len(names) {
			return fmt.Errorf("the database schema %s is at version %d, newer than this build of mixd knows (%d): use a newer mixd", s.schema, have, len(names))
		}
		for i := have; i < len(names); i++ {
			sql, err := pgMigrations.ReadFile(names[i])
			if err != nil {
				return err
			}
			if _, err := tx.Exec(ctx, string(sql)); err != nil {
				return fmt.Errorf("apply migration %s: %w", path.Base(names[i]), err)
			}
			if _, err := tx.Exec(ctx, `INSERT INTO mixd_schema_versions (version, name) VALUES ($1, $2)`, i+1, path.Base(names[i])); err != nil {
				return fmt.Errorf("record migration %s: %w", path.Base(names[i]), err)
			}
			s.log.Info("store: applied schema migration", "schema", s.schema, "migration", path.Base(names[i]))
		}
		return nil
	})
	return s.dbError(ctx, err)
}

// Create implements Store.
func (s *PgStore) Create(ctx context.Context, m *mixdv1.Model) (*mixdv1.Model, error) {
	if err := s.live(); err != nil {
		return nil, err
	}
	if m == nil {
		return nil, fmt.Errorf("create model: %w: model is nil", ErrInvalid)
	}
	id, err := ParseName(m.GetName())
	if err != nil {
		return nil, fmt.Errorf("create model: %w", err)
	}
	name := modeldoc.NamePrefix + id
	if err := ctx.Err(); err != nil {
		return nil, fmt.Errorf("create %s: %w", name, err)
	}
	c := proto.Clone(m).(*mixdv1.Model)
	c.Name, c.Version, c.CreateTime = name, 0, nil
	// Validate before touching the database.
	if _, err := modeldoc.Encode(c); err != nil {
		return nil, fmt.Errorf("create %s: %w: %w", name, ErrInvalid, err)
	}
	var out *mixdv1.Model
	err = pgx.BeginFunc(ctx, s.pool, func(tx pgx.Tx) error {
		var v int64
		if err := tx.QueryRow(ctx, `INSERT INTO mixd_models (id, high_water) VALUES ($1, 1)
			ON CONFLICT (id) DO UPDATE SET high_water = mixd_models.high_water + 1
			RETURNING high_water`, id).Scan(&v); err != nil {
			return err
		}
		c.Version = v
		now := time.Now()
		c.CreateTime = timestamppb.New(now)
		doc, err := modeldoc.Encode(c)
		if err != nil {
			return fmt.Errorf("%w: %w", ErrInvalid, err)
		}
		back, err := modeldoc.Decode(doc)
		if err != nil {
			return fmt.Errorf("the encoded model does not read back (a bug): %w", err)
		}
		sum := sha256.Sum256(doc)
		if _, err := tx.Exec(ctx, `INSERT INTO mixd_model_versions (id, version, create_time, sha256, document)
			VALUES ($1, $2, $3, $4, $5)`, id, v, now, hex.EncodeToString(sum[:]), doc); err != nil {
			return err
		}
		if err := s.notify(ctx, tx, Change{Kind: ChangeModelCreated, Name: name, Version: v}); err != nil {
			return err
		}
		out = back
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("create %s: %w", name, s.dbError(ctx, err))
	}
	return out, nil
}

// Get implements Store.
func (s *PgStore) Get(ctx context.Context, name string, version int64) (*mixdv1.Model, error) {
	if err := s.live(); err != nil {
		return nil, err
	}
	id, err := ParseName(name)
	if err != nil {
		return nil, fmt.Errorf("get model: %w", err)
	}
	if version < 0 {
		return nil, fmt.Errorf("get models/%s: %w: version %d is negative", id, ErrInvalid, version)
	}
	if err := ctx.Err(); err != nil {
		return nil, fmt.Errorf("get models/%s: %w", id, err)
	}
	if version > 0 {
		var sum string
		var doc []byte
		err := s.pool.QueryRow(ctx, `SELECT sha256, document FROM mixd_model_versions WHERE id = $1 AND version = $2`,
			id, version).Scan(&sum, &doc)
		if errors.Is(err, pgx.ErrNoRows) {
			return nil, fmt.Errorf("get models/%s version %d: %w", id, version, ErrNotFound)
		}
		if err != nil {
			return nil, fmt.Errorf("get models/%s version %d: %w", id, version, s.dbError(ctx, err))
		}
		m, err := s.decodeRow(id, version, sum, doc)
		if err != nil {
			return nil, fmt.Errorf("get models/%s version %d: %w", id, version, err)
		}
		return m, nil
	}
	m, err := s.newest(ctx, id, math.MaxInt64)
	if err != nil {
		return nil, fmt.Errorf("get models/%s: %w", id, err)
	}
	return m, nil
}

// newest returns the newest readable version of model id below version
// below; ErrNotFound when there is none, ErrCorrupt when every one is
// unreadable.
func (s *PgStore) newest(ctx context.Context, id string, below int64) (*mixdv1.Model, error) {
	var firstCorrupt error
	corrupt := 0
	for {
		var (
			v   int64
			sum string
			doc []byte
		)
		err := s.pool.QueryRow(ctx, `SELECT version, sha256, document FROM mixd_model_versions
			WHERE id = $1 AND version < $2 ORDER BY version DESC LIMIT 1`, id, below).Scan(&v, &sum, &doc)
		if errors.Is(err, pgx.ErrNoRows) {
			if firstCorrupt != nil {
				return nil, fmt.Errorf("no readable version (%d corrupt; the newest: %w)", corrupt, firstCorrupt)
			}
			return nil, ErrNotFound
		}
		if err != nil {
			return nil, s.dbError(ctx, err)
		}
		m, err := s.decodeRow(id, v, sum, doc)
		if err == nil {
			return m, nil
		}
		s.log.Warn("store: skipping corrupt model version", "model", "models/"+id, "version", v, "error", err)
		if firstCorrupt == nil {
			firstCorrupt = err
		}
		corrupt++
		below = v
	}
}

// List implements Store.
func (s *PgStore) List(ctx context.Context, pageSize int, pageToken string) ([]*mixdv1.Model, string, error) {
	if err := s.live(); err != nil {
		return nil, "", err
	}
	size, err := PageSize(pageSize)
	if err != nil {
		return nil, "", fmt.Errorf("list models: %w", err)
	}
	after, err := ParseListToken(pageToken)
	if err != nil {
		return nil, "", fmt.Errorf("list models: %w", err)
	}
	if err := ctx.Err(); err != nil {
		return nil, "", fmt.Errorf("list models: %w", err)
	}
	out := []*mixdv1.Model{}
	for len(out) <= size {
		type row struct {
			id       string
			version  int64
			sum      string
			document []byte
		}
		rows, err := s.pool.Query(ctx, `SELECT DISTINCT ON (id) id, version, sha256, document
			FROM mixd_model_versions WHERE id > $1 ORDER BY id, version DESC LIMIT $2`, after, size+1-len(out))
		if err != nil {
			return nil, "", fmt.Errorf("list models: %w", s.dbError(ctx, err))
		}
		batch, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (row, error) {
			var x row
			err := r.Scan(&x.id, &x.version, &x.sum, &x.document)
			return x, err
		})
		if err != nil {
			return nil, "", fmt.Errorf("list models: %w", s.dbError(ctx, err))
		}
		if len(batch) == 0 {
			break
		}
		for _, r := range batch {
			m, err := s.decodeRow(r.id, r.version, r.sum, r.document)
			if err != nil {
				s.log.Warn("store: skipping corrupt model version", "model", "models/"+r.id, "version", r.version, "error", err)
				m, err = s.newest(ctx, r.id, r.version)
			}
			switch {
			case err == nil:
				out = append(out, m)
			case errors.Is(err, ErrNotFound), errors.Is(err, ErrCorrupt):
			default:
				return nil, "", fmt.Errorf("list models: models/%s: %w", r.id, err)
			}
			after = r.id
		}
	}
	if len(out) > size {
		return out[:size], ListToken(idOf(out[size-1])), nil
	}
	return out, "", nil
}

// Versions implements Store.
func (s *PgStore) Versions(ctx context.Context, name string, pageSize int, pageToken string) ([]*mixdv1.Model, string, error) {
	if err := s.live(); err != nil {
		return nil, "", err
	}
	id, err := ParseName(name)
	if err != nil {
		return nil, "", fmt.Errorf("list versions: %w", err)
	}
	size, err := PageSize(pageSize)
	if err != nil {
		return nil, "", fmt.Errorf("list versions of models/%s: %w", id, err)
	}
	after, err := ParseVersionsToken(id, pageToken)
	if err != nil {
		return nil, "", fmt.Errorf("list versions of models/%s: %w", id, err)
	}
	if err := ctx.Err(); err != nil {
		return nil, "", fmt.Errorf("list versions of models/%s: %w", id, err)
	}
	out := []*mixdv1.Model{}
	for len(out) <= size {
		type row struct {
			version  int64
			sum      string
			document []byte
		}
		rows, err := s.pool.Query(ctx, `SELECT version, sha256, document FROM mixd_model_versions
			WHERE id = $1 AND version > $2 ORDER BY version LIMIT $3`, id, after, size+1-len(out))
		if err != nil {
			return nil, "", fmt.Errorf("list versions of models/%s: %w", id, s.dbError(ctx, err))
		}
		batch, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (row, error) {
			var x row
			err := r.Scan(&x.version, &x.sum, &x.document)
			return x, err
		})
		if err != nil {
			return nil, "", fmt.Errorf("list versions of models/%s: %w", id, s.dbError(ctx, err))
		}
		if len(batch) == 0 {
			break
		}
		for _, r := range batch {
			m, err := s.decodeRow(id, r.version, r.sum, r.document)
			if err != nil {
				s.log.Warn("store: skipping corrupt model version", "model", "models/"+id, "version", r.version, "error", err)
			} else {
				out = append(out, m)
			}
			after = r.version
		}
	}
	if len(out) == 0 {
		var exists bool
		if err := s.pool.QueryRow(ctx, `SELECT EXISTS (SELECT 1 FROM mixd_model_versions WHERE id = $1)`, id).Scan(&exists); err != nil {
			return nil, "", fmt.Errorf("list versions of models/%s: %w", id, s.dbError(ctx, err))
		}
		if !exists {
			return nil, "", fmt.Errorf("list versions of models/%s: %w", id, ErrNotFound)
		}
	}
	if len(out) > size {
		return out[:size], VersionsToken(id, out[size-1].Version), nil
	}
	return out, "", nil
}

// Delete implements Store.
func (s *PgStore) Delete(ctx context.Context, name string, version int64) (int64, error) {
	if err := s.live(); err != nil {
		return 0, err
	}
	id, err := ParseName(name)
	if err != nil {
		return 0, fmt.Errorf("delete model: %w", err)
	}
	what := "models/" + id
	if version > 0 {
		what += " version " + strconv.FormatInt(version, 10)
	}
	if version < 0 {
		return 0, fmt.Errorf("delete %s: %w: version %d is negative", what, ErrInvalid, version)
	}
	if err := ctx.Err(); err != nil {
		return 0, fmt.Errorf("delete %s: %w", what, err)
	}
	var n int64
	err = pgx.BeginFunc(ctx, s.pool, func(tx pgx.Tx) error {
		// The model row's lock orders this delete with creates of the model.
		var hw int64
		if err := tx.QueryRow(ctx, `SELECT high_water FROM mixd_models WHERE id = $1 FOR UPDATE`, id).Scan(&hw); err != nil {
			if errors.Is(err, pgx.ErrNoRows) {
				return ErrNotFound
			}
			return err
		}
		tag, err := tx.Exec(ctx, `DELETE FROM mixd_model_versions WHERE id = $1 AND ($2::bigint = 0 OR version = $2::bigint)`, id, version)
		if err != nil {
			return err
		}
		if n = tag.RowsAffected(); n == 0 {
			return ErrNotFound
		}
		return s.notify(ctx, tx, Change{Kind: ChangeModelDeleted, Name: modeldoc.NamePrefix + id, Version: version})
	})
	if err != nil {
		return 0, fmt.Errorf("delete %s: %w", what, s.dbError(ctx, err))
	}
	return n, nil
}

// Close implements Store: it stops the notification connections and
// closes the connection pool, waiting for calls in progress.
func (s *PgStore) Close() error {
	if s.closed.Swap(true) {
		return nil
	}
	close(s.done)
	s.watches.Wait()
	s.pool.Close()
	return nil
}

func (s *PgStore) live() error {
	if s.closed.Load() {
		return fmt.Errorf("postgres store %s: %w", s.where, ErrClosed)
	}
	return nil
}

// decodeRow checks and decodes one version row.
func (s *PgStore) decodeRow(id string, v int64, sum string, doc []byte) (*mixdv1.Model, error) {
	corrupt := func(format string, args ...any) error {
		return fmt.Errorf("%w: models/%s version %d (table %s.mixd_model_versions): %s", ErrCorrupt, id, v, s.schema, fmt.Sprintf(format, args...))
	}
	got := sha256.Sum256(doc)
	if hex.EncodeToString(got[:]) != sum {
		return nil, corrupt("checksum mismatch: the row says sha256 %s, the document hashes to %s", sum, hex.EncodeToString(got[:]))
	}
	m, err := modeldoc.Decode(doc)
	if err != nil {
		return nil, corrupt("%v", err)
	}
	if want := modeldoc.NamePrefix + id; m.Name != want || m.Version != v {
		return nil, corrupt("holds %s version %d", m.Name, m.Version)
	}
	return m, nil
}

// dbError classifies an error from the database: the caller's context
// ending stays a context error; failures to reach the server, and the
// server going away, wrap ErrUnavailable; anything else is returned as is.
func (s *PgStore) dbError(ctx context.Context, err error) error {
	if err == nil {
		return nil
	}
	if errors.Is(err, ErrNotFound) || errors.Is(err, ErrInvalid) || errors.Is(err, ErrCorrupt) ||
		errors.Is(err, ErrJobEnded) || errors.Is(err, ErrUnavailable) {
		return err
	}
	if cerr := ctx.Err(); cerr != nil {
		if errors.Is(err, cerr) {
			return err
		}
		return fmt.Errorf("%w (%v)", cerr, err)
	}
	if s.closed.Load() {
		return fmt.Errorf("%w (%v)", ErrClosed, err)
	}
	if unreachable(err) {
		return fmt.Errorf("%w: postgres %s: %w", ErrUnavailable, s.where, err)
	}
	return err
}

// unreachable reports whether err means the database server could not be
// reached, went away, or refuses connections for now.
func unreachable(err error) bool {
	var ce *pgconn.ConnectError
	if errors.As(err, &ce) {
		return true
	}
	var pe *pgconn.PgError
	if errors.As(err, &pe) {
		switch {
		case strings.HasPrefix(pe.Code, "08"): // connection exception
			return true
		case pe.Code == "57P01", pe.Code == "57P02", pe.Code == "57P03", pe.Code == "57P05": // shutdown, crash, cannot connect now, idle timeout
			return true
		case pe.Code == "53300": // too many connections
			return true
		}
		return false
	}
	var ne net.Error
	switch {
	case errors.Is(err, pgconn.ErrConnClosed), errors.Is(err, io.EOF), errors.Is(err, io.ErrUnexpectedEOF),
		errors.Is(err, net.ErrClosed), errors.Is(err, syscall.ECONNREFUSED), errors.Is(err, syscall.ECONNRESET),
		errors.Is(err, syscall.EPIPE), errors.As(err, &ne):
		return true
	}
	return pgconn.SafeToRetry(err) || pgconn.Timeout(err)
}
