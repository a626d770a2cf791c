package daemon

import (
	"context"
	"errors"
	"fmt"
	"sync/atomic"
	"testing"
	"time"

	"github.com/mixd-dev/mixd/daemon/store"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// flakyStore makes a memStore's reads fail as an unreachable database
// would, or hang, on demand.
type flakyStore struct {
	*memStore
	down  atomic.Bool
	hang  atomic.Pointer[chan struct{}]
	loads atomic.Int64
}

func (f *flakyStore) get(ctx context.Context, name string, v int64) (*mixdv1.Model, error) {
	f.loads.Add(1)
	if h := f.hang.Load(); h != nil {
		select {
		case <-*h:
		case <-ctx.Done():
			return nil, ctx.Err()
		}
	}
	if f.down.Load() {
		return nil, fmt.Errorf("get %s: %w: connection refused", name, store.ErrUnavailable)
	}
	return f.memStore.Get(ctx, name, v)
}

// replicaCache returns a cache in replica mode whose notifications flow,
// over a flaky memStore holding models/a version 1.
func replicaCache(t *testing.T) (*modelCache, *flakyStore) {
	t.Helper()
	f := &flakyStore{memStore: newMemStore()}
	mustCreate(t, f.memStore, "models/a")
	c := newModelCache(1<<30, f.get, buildModel)
	c.enableReplica(time.Hour)
	c.listening()
	return c, f
}

func mustGet(t *testing.T, c *modelCache, name string, v int64) *loadedModel {
	t.Helper()
	lm, err := c.get(context.Background(), name, v)
	if err != nil {
		t.Fatalf("get(%s, %d): %v", name, v, err)
	}
	return lm
}

// While notifications flow, cached entries are served without asking the
// store, even when it is unreachable.
func TestReplicaCacheTrustsCacheWhileListening(t *testing.T) {
	c, f := replicaCache(t)
	mustGet(t, c, "models/a", 0)
	mustGet(t, c, "models/a", 1)
	f.down.Store(true)
	before := f.loads.Load()
	for range 3 {
		if lm := mustGet(t, c, "models/a", 0); lm.version() != 1 {
			t.Fatalf("newest = %d", lm.version())
		}
	}
	if n := f.loads.Load() - before; n != 0 {
		t.Fatalf("%d store reads while notifications flow; want none", n)
	}
}

// With notifications lost, entries are confirmed after the recheck period;
// an unreachable store leaves the cached answer in service, and the next
// confirmation waits another period.
func TestReplicaCacheServesCachedModelsWhileStoreIsDown(t *testing.T) {
	c, f := replicaCache(t)
	mustGet(t, c, "models/a", 0)
	c.lost(20 * time.Millisecond)
	time.Sleep(30 * time.Millisecond)
	f.down.Store(true)
	before := f.loads.Load()
	for _, v := range []int64{0, 1} {
		if lm := mustGet(t, c, "models/a", v); lm.version() != 1 {
			t.Fatalf("version %d: served %d", v, lm.version())
		}
	}
	if n := f.loads.Load() - before; n != 2 {
		t.Fatalf("%d confirmations tried; want 2 (newest pointer and version 1)", n)
	}
	mustGet(t, c, "models/a", 0)
	mustGet(t, c, "models/a", 1)
	if n := f.loads.Load() - before; n != 2 {
		t.Fatalf("%d confirmations within one recheck period; want no new ones", n)
	}
	// A model never cached cannot be served without the store.
	if _, err := c.get(context.Background(), "models/b", 0); !errors.Is(err, store.ErrUnavailable) {
		t.Fatalf("uncached model with the store down: %v, want ErrUnavailable", err)
	}
}

// A confirmation that finds the model deleted, or a newer version, wins.
func TestReplicaCacheConfirmationSeesChanges(t *testing.T) {
	c, f := replicaCache(t)
	mustGet(t, c, "models/a", 0)
	c.lost(10 * time.Millisecond)
	mustCreate(t, f.memStore, "models/a") // version 2, unheard of
	time.Sleep(20 * time.Millisecond)
	if lm := mustGet(t, c, "models/a", 0); lm.version() != 2 {
		t.Fatalf("newest after confirmation = %d, want 2", lm.version())
	}
	if _, err := f.memStore.Delete(context.Background(), "models/a", 1); err != nil {
		t.Fatal(err)
	}
	time.Sleep(20 * time.Millisecond)
	if _, err := c.get(context.Background(), "models/a", 1); !errors.Is(err, store.ErrNotFound) {
		t.Fatalf("deleted version after confirmation: %v, want not found", err)
	}
	if n, _, _ := c.stats(); n != 1 {
		t.Fatalf("%d models cached; want only version 2", n)
	}
}

// A store that does not answer delays a call by at most recheckWait.
func TestReplicaCacheSlowStoreFallsBack(t *testing.T) {
	c, f := replicaCache(t)
	mustGet(t, c, "models/a", 1)
	c.lost(time.Millisecond)
	time.Sleep(5 * time.Millisecond)
	h := make(chan struct{})
	f.hang.Store(&h)
	defer close(h)
	start := time.Now()
	if lm := mustGet(t, c, "models/a", 1); lm.version() != 1 {
		t.Fatal("wrong model")
	}
	if d := time.Since(start); d < recheckWait/2 || d > 5*recheckWait {
		t.Fatalf("served after %v; want about recheckWait (%v)", d, recheckWait)
	}
}

// Notifications of new versions move known newest pointers; unknown ones
// stay unknown; reconnecting empties the cache.
func TestReplicaCacheNotifications(t *testing.T) {
	c, f := replicaCache(t)
	mustGet(t, c, "models/a", 0)
	mustCreate(t, f.memStore, "models/a")
	c.noteCreated("models/a", 2)
	c.noteCreated("models/a", 1) // late and older: ignored
	if lm := mustGet(t, c, "models/a", 0); lm.version() != 2 {
		t.Fatalf("newest after the notification = %d, want 2", lm.version())
	}
	c.noteCreated("models/unknown", 5)
	c.mu.Lock()
	_, known := c.newest["models/unknown"]
	c.mu.Unlock()
	if known {
		t.Fatal("a notification about an uncached model created a newest pointer")
	}
	// A local add never makes an unknown newest version known in replica mode.
	c.listening()
	c.add(mustGet(t, c, "models/a", 1))
	c.mu.Lock()
	_, known = c.newest["models/a"]
	c.mu.Unlock()
	if known {
		t.Fatal("add set the newest pointer of a model whose newest version was unknown")
	}
	if n, _, _ := c.stats(); n != 1 {
		t.Fatalf("%d cached after listening and one add; want 1", n)
	}
	c.listening()
	if n, _, _ := c.stats(); n != 0 {
		t.Fatalf("%d cached after reconnecting; want the cache emptied", n)
	}
}
