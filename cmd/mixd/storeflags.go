package main

import (
	"flag"
	"fmt"
	"time"

	"github.com/mixd-dev/mixd/daemon"
	"github.com/mixd-dev/mixd/daemon/store"
)

// storeURL is the --store flag: empty (the directory store) or a
// postgres:// URL. It is checked when set, so a bad value is a usage error
// whether it comes from the command line, MIXD_STORE or the config file.
type storeURL struct{ url *string }

func (s storeURL) String() string {
	if s.url == nil {
		return ""
	}
	return *s.url
}

func (s storeURL) Set(v string) error {
	if v != "" && !store.IsPostgresURL(v) {
		return fmt.Errorf("want a postgres:// or postgresql:// URL (leave it empty for the directory store of --data-dir)")
	}
	*s.url = v
	return nil
}

// addStoreFlags registers the shared-store and replica flags of serve.
func addStoreFlags(fs *flag.FlagSet, cfg *daemon.Config) {
	fs.Var(storeURL{&cfg.StoreURL}, "store", "PostgreSQL model store shared by replicas, as a postgres:// URL (prefer MIXD_STORE, or a password in PGPASSWORD or ~/.pgpass, to keep it out of the process list); empty: the directory of --data-dir")
	fs.StringVar(&cfg.Replica.ID, "replica-id", "", "name of this daemon in the shared fit-job table (with --store); empty: hostname and a random suffix")
	fs.DurationVar(&cfg.Replica.Timeout, "replica-timeout", daemon.DefaultReplicaTimeout, "with --store: a replica whose heartbeat is older than this is presumed dead and its unfinished fit jobs are marked FAILED (UNAVAILABLE)")
	fs.DurationVar(&cfg.Replica.Recheck, "replica-recheck", daemon.DefaultRecheck, "with --store: while change notifications from the database are down, cached models older than this are confirmed with the database on use")
}

// checkStoreFlags validates the replica durations.
func checkStoreFlags(cfg *daemon.Config) error {
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
