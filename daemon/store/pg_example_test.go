package store_test

import (
	"context"
	"fmt"
	"log"
	"os"

	"github.com/mixd-dev/mixd/daemon/store"
	"github.com/mixd-dev/mixd/daemon/store/storetest"
)

// Several daemons share one PostgreSQL store: what one writes, the others
// read at once and hear about through Changes. (Not run by go test: it
// needs a database; see pg_test.go for the tests.)
func ExampleOpenPostgres() {
	ctx := context.Background()
	s, err := store.OpenPostgres(ctx, os.Getenv("MIXD_STORE"))
	if err != nil {
		log.Fatal(err) // wraps store.ErrUnavailable when the database cannot be reached
	}
	defer s.Close()

	changes := s.Changes(ctx)
	if c := <-changes; c.Kind != store.ChangeListening {
		log.Fatalf("notifications are not flowing: %v", c.Err)
	}
	m, err := s.Create(ctx, storetest.Model("pump-station-7", 1))
	if err != nil {
		log.Fatal(err)
	}
	c := <-changes // every daemon on the store, this one included, hears of it
	fmt.Println(c.Kind, c.Name, c.Version == m.Version)
}
