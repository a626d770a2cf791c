package daemon

import (
	"context"
	"fmt"
	"log/slog"
	"time"

	"github.com/mixd-dev/mixd/daemon/store"
)

// storeOpenTimeout bounds connecting to a shared store and migrating its
// schema at start-up.
const storeOpenTimeout = 30 * time.Second

// openSharedStore opens the PostgreSQL store at url (Config.StoreURL).
func openSharedStore(ctx context.Context, url string, log *slog.Logger) (store.Store, error) {
	if !store.IsPostgresURL(url) {
		return nil, fmt.Errorf("store %q: want a postgres:// or postgresql:// URL (or no store URL, for the directory store)", store.RedactURL(url))
	}
	ctx, cancel := context.WithTimeout(ctx, storeOpenTimeout)
	defer cancel()
	ps, err := store.OpenPostgres(ctx, url, store.PgLogger(log))
	if err != nil {
		return nil, err
	}
	log.Info("model store: PostgreSQL", "where", ps.Where(), "schema_version", store.SchemaVersion())
	return ps, nil
}
