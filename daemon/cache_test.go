package daemon

import (
	"context"
	"errors"
	"sync"
	"testing"
	"time"

	"github.com/mixd-dev/mixd/daemon/store"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// cacheOver returns a cache reading from st with the daemon's real builder.
func cacheOver(st *memStore, budget int64) *modelCache {
	return newModelCache(budget, st.Get, buildModel)
}

func mustCreate(t *testing.T, st *memStore, name string) *mixdv1.Model {
	t.Helper()
	m, err := st.Create(context.Background(), refModel(name))
	if err != nil {
		t.Fatal(err)
	}
	return m
}

func TestCacheEvictsLeastRecentlyUsed(t *testing.T) {
	st := newMemStore()
	for _, n := range []string{"models/a", "models/b", "models/c"} {
		mustCreate(t, st, n)
	}
	probe := cacheOver(st, 1<<30)
	lm, err := probe.get(context.Background(), "models/a", 1)
	if err != nil {
		t.Fatal(err)
	}
	// Room for exactly two models of this size.
	c := cacheOver(st, 2*lm.size+lm.size/2)
	ctx := context.Background()
	get := func(name string) {
		t.Helper()
		if _, err := c.get(ctx, name, 1); err != nil {
			t.Fatal(err)
		}
	}
	get("models/a")
	get("models/b")
	get("models/a") // a is now the most recently used
	get("models/c") // evicts b
	n, bytes, loads := c.stats()
	if n != 2 || loads != 3 || bytes != 2*lm.size {
		t.Fatalf("after a b a c: %d models, %d bytes, %d loads; want 2, %d, 3", n, bytes, loads, 2*lm.size)
	}
	get("models/a")
	get("models/c")
	if _, _, loads = c.stats(); loads != 3 {
		t.Fatalf("a and c should be cached; loads = %d", loads)
	}
	get("models/b")
	if _, _, loads = c.stats(); loads != 4 {
		t.Fatalf("b should have been evicted; loads = %d", loads)
	}
}

func TestCacheSkipsModelLargerThanBudget(t *testing.T) {
	st := newMemStore()
	mustCreate(t, st, "models/a")
	c := cacheOver(st, 100)
	for range 2 {
		if _, err := c.get(context.Background(), "models/a", 0); err != nil {
			t.Fatal(err)
		}
	}
	if n, bytes, loads := c.stats(); n != 0 || bytes != 0 || loads != 2 {
		t.Fatalf("%d models, %d bytes, %d loads; want 0, 0, 2", n, bytes, loads)
	}
}

func TestCacheSingleFlight(t *testing.T) {
	st := newMemStore()
	mustCreate(t, st, "models/a")
	release := make(chan struct{})
	entered := make(chan struct{}, 100)
	st.getHook = func() {
		entered <- struct{}{}
		<-release
	}
	c := cacheOver(st, 1<<30)
	const callers = 50
	var wg sync.WaitGroup
	results := make([]*loadedModel, callers)
	errs := make([]error, callers)
	for i := range callers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			results[i], errs[i] = c.get(context.Background(), "models/a", 0)
		}()
	}
	<-entered
	// Give every caller time to join the flight before the load ends.
	waitFor(t, "callers to wait", func() bool {
		c.mu.Lock()
		defer c.mu.Unlock()
		return len(c.flights) == 1
	})
	time.Sleep(20 * time.Millisecond)
	close(release)
	wg.Wait()
	for i := range callers {
		if errs[i] != nil || results[i] != results[0] {
			t.Fatalf("caller %d: %v (same model: %v)", i, errs[i], results[i] == results[0])
		}
	}
	if st.getCount() != 1 {
		t.Fatalf("store read %d times, want 1", st.getCount())
	}
}

func TestCacheWaiterCancelDoesNotFailOthers(t *testing.T) {
	st := newMemStore()
	mustCreate(t, st, "models/a")
	release := make(chan struct{})
	st.getHook = func() { <-release }
	c := cacheOver(st, 1<<30)
	ctx, cancel := context.WithCancel(context.Background())
	first := make(chan error, 1)
	go func() {
		_, err := c.get(ctx, "models/a", 0)
		first <- err
	}()
	second := make(chan error, 1)
	waitFor(t, "the load to start", func() bool { _, _, l := c.stats(); return l == 1 })
	go func() {
		_, err := c.get(context.Background(), "models/a", 0)
		second <- err
	}()
	cancel()
	if err := <-first; !errors.Is(err, context.Canceled) {
		t.Fatalf("cancelled caller got %v", err)
	}
	close(release)
	if err := <-second; err != nil {
		t.Fatalf("other caller got %v", err)
	}
}

func TestCacheNewestPointer(t *testing.T) {
	st := newMemStore()
	mustCreate(t, st, "models/a")
	mustCreate(t, st, "models/a")
	c := cacheOver(st, 1<<30)
	ctx := context.Background()
	lm, err := c.get(ctx, "models/a", 0)
	if err != nil || lm.version() != 2 {
		t.Fatalf("newest: %v %v", lm, err)
	}
	if _, err := c.get(ctx, "models/a", 0); err != nil {
		t.Fatal(err)
	}
	if st.getCount() != 1 {
		t.Fatalf("newest resolved from the store %d times, want 1", st.getCount())
	}
	// A version stored by this process becomes the newest at once.
	v3 := mustCreate(t, st, "models/a")
	m3, err := buildModel(v3)
	if err != nil {
		t.Fatal(err)
	}
	c.add(newLoaded(v3, m3))
	if lm, _ := c.get(ctx, "models/a", 0); lm.version() != 3 || st.getCount() != 1 {
		t.Fatalf("after add: version %d, %d store reads", lm.version(), st.getCount())
	}
	// Deleting forgets the pointer and the versions.
	if _, err := st.Delete(ctx, "models/a", 3); err != nil {
		t.Fatal(err)
	}
	c.forget("models/a", 3)
	if lm, _ := c.get(ctx, "models/a", 0); lm.version() != 2 {
		t.Fatalf("after delete: version %d, want 2", lm.version())
	}
	if _, err := st.Delete(ctx, "models/a", 0); err != nil {
		t.Fatal(err)
	}
	c.forget("models/a", 0)
	if _, err := c.get(ctx, "models/a", 2); !errors.Is(err, store.ErrNotFound) {
		t.Fatalf("after deleting all: %v", err)
	}
}

func TestCacheLoadRacingDeleteDoesNotInsert(t *testing.T) {
	st := newMemStore()
	mustCreate(t, st, "models/a")
	release := make(chan struct{})
	st.getHook = func() { <-release }
	c := cacheOver(st, 1<<30)
	done := make(chan struct{})
	go func() {
		c.get(context.Background(), "models/a", 0)
		close(done)
	}()
	waitFor(t, "the load to start", func() bool { _, _, l := c.stats(); return l == 1 })
	c.forget("models/a", 0) // a delete lands while the read is in flight
	close(release)
	<-done
	if n, _, _ := c.stats(); n != 0 {
		t.Fatalf("a load that raced a delete was cached")
	}
}

func TestCacheUnservableModel(t *testing.T) {
	st := newMemStore()
	bad := refModel("models/bad")
	bad.Parameters.Components[0].Weight = 0.9 // weights no longer sum to 1
	if _, err := st.Create(context.Background(), bad); err != nil {
		t.Fatal(err)
	}
	c := cacheOver(st, 1<<30)
	_, err := c.get(context.Background(), "models/bad", 0)
	if !errors.Is(err, errUnservable) {
		t.Fatalf("got %v, want errUnservable", err)
	}
}
