package main

import (
	"flag"
	"fmt"
	"time"

	"github.com/mixd-dev/mixd/daemon"
	"github.com/mixd-dev/mixd/daemon/store"
)

// storeURL is the --store flag: empty (the directory store) or a
// postgres:// URL. It is checked by checkStoreURL once every source is
// applied, not when set: the flag package's own error for a refused value
// would print the value, password and all.
type storeURL struct{ url *string }

func (s storeURL) String() string {
	if s.url == nil {
		return ""
	}
	return *s.url
}

func (s storeURL) Set(v string) error {
	*s.url = v
	return nil
}

// checkStoreURL refuses a --store value (from the command line, MIXD_STORE
// or the config file) that is not a PostgreSQL URL, showing it without its
// password.
func checkStoreURL(v string) error {
	if v != "" && !store.IsPostgresURL(v) {
		return fmt.Errorf("--store %q: want a postgres:// or postgresql:// URL (leave it empty for the directory store of --data-dir)", store.RedactURL(v))
	}
	return nil
}

// addStoreFlags registers the shared-store and replica flags of serve.
func addStoreFlags(fs *flag.FlagSet, cfg *daemon.Config) {
	fs.Var(storeURL{&cfg.StoreURL}, "store", "PostgreSQL model store shared by replicas, as a postgres:// URL (prefer MIXD_STORE, or a password in PGPASSWORD or ~/.pgpass, to keep it out of the process list); empty: the directory of --data-dir")
	fs.StringVar(&cfg.Replica.ID, "replica-id", "", "name of this daemon in the shared fit-job table (with --store); empty: hostname and a random suffix")
	fs.DurationVar(&cfg.Replica.Timeout, "replica-timeout", daemon.DefaultReplicaTimeout, "with --store: a replica whose heartbeat is older than this is presumed dead and its unfinished fit jobs are marked FAILED (UNAVAILABLE)")
	fs.DurationVar(&cfg.Replica.Recheck, "replica-recheck", daemon.DefaultRecheck, "with --store: while change notifications from the database are down, cached models older than this are confirmed with the database on use")
}

// checkStoreFlags validates the store URL and the replica durations.
func checkStoreFlags(cfg *daemon.Config) error {
	if err := checkStoreURL(cfg.StoreURL); err != nil {
		return err
	}
	for _, d := range []struct {
		flag string
		v    time.Duration
	}{{"replica-timeout", cfg.Replica.Timeout}, {"replica-recheck", cfg.Replica.Recheck}} {
		if d.v <= 0 {
			return fmt.Errorf("--%s is %v, must be positive", d.flag, d.v)
		}
	}
	return nil
}
