package store_test

import (
	"context"
	"fmt"
	"os"

	"github.com/mixd-dev/mixd/daemon/store"
	"github.com/mixd-dev/mixd/daemon/store/storetest"
)

func ExampleOpenDir() {
	dir, err := os.MkdirTemp("", "mixd-store-example")
	if err != nil {
		fmt.Println(err)
		return
	}
	defer os.RemoveAll(dir)

	s, err := store.OpenDir(dir)
	if err != nil {
		fmt.Println(err)
		return
	}
	defer s.Close()
	ctx := context.Background()
	for i := range 3 {
		m, err := s.Create(ctx, storetest.Model("pump-station-4", i))
		if err != nil {
			fmt.Println(err)
			return
		}
		fmt.Println("created", m.Name, "version", m.Version)
	}
	n, _ := s.Delete(ctx, "pump-station-4", 3)
	fmt.Println("deleted", n)
	m, _ := s.Create(ctx, storetest.Model("pump-station-4", 9))
	fmt.Println("created version", m.Version, "(3 is not reused)")
	newest, _ := s.Get(ctx, "models/pump-station-4", 0)
	fmt.Println("newest", newest.Version)
	_, err = s.Get(ctx, "pump-station-4", 3)
	fmt.Println(err != nil)
	// Output:
	// created models/pump-station-4 version 1
	// created models/pump-station-4 version 2
	// created models/pump-station-4 version 3
	// deleted 1
	// created version 4 (3 is not reused)
	// newest 4
	// true
}
