package daemon

import (
	"container/list"
	"context"
	"errors"
	"fmt"
	"runtime"
	"sync"
	"time"

	"github.com/mixd-dev/mixd/fitters/mixture"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// DefaultCacheBytes is the default byte budget of the model cache (256 MiB).
const DefaultCacheBytes = 256 << 20

// cacheLoadTimeout bounds one store read made on behalf of all waiters.
const cacheLoadTimeout = time.Minute

// errUnservable marks a stored model that the store returned intact but that
// fails validation when built for serving (mapped to DATA_LOSS).
var errUnservable = errors.New("stored model cannot be served")

// loadedModel is a model ready to serve: its stored form, its built
// *mixture.Model (factorisations precomputed once) and its training
// quantiles (nil when the model has none or they are unusable).
type loadedModel struct {
	pb        *mixdv1.Model
	m         *mixture.Model
	quantiles *mixdv1.DensityQuantiles
	size      int64
}

// name is "models/{id}".
func (l *loadedModel) name() string { return l.pb.GetName() }

// version is the stored version.
func (l *loadedModel) version() int64 { return l.pb.GetVersion() }

// estimateSize is the approximate memory held by a cached model: the stored
// parameters, the model's copy of them, its Cholesky factors (packed
// triangles) and its scratch workspaces (one per CPU, 128 rows each), plus a
// fixed overhead.
func estimateSize(pb *mixdv1.Model, k, d int) int64 {
	k64, d64 := int64(k), int64(d)
	size := int64(4096)
	size += 2 * k64 * d64 * d64 * 8       // covariances (stored, copied)
	size += k64 * d64 * (d64 + 1) / 2 * 8 // factors
	size += 4 * k64 * d64 * 8             // means and per-component vectors
	size += int64(runtime.GOMAXPROCS(0)) * 128 * (d64 + 3*k64 + 3) * 8
	size += int64(len(pb.GetReport().GetTrainingQuantiles().GetLevels())) * 16
	size += int64(len(pb.GetReport().GetHistory())) * 8
	for _, f := range pb.GetParameters().GetFeatureNames() {
		size += int64(len(f)) + 16
	}
	return size
}

// cacheKey identifies a model version; version 0 in a flight key means
// "the newest, not yet resolved".
type cacheKey struct {
	name    string
	version int64
}

// flight is one load shared by every concurrent request for the same key.
type flight struct {
	done chan struct{}
	val  *loadedModel
	err  error
}

// modelCache holds built models within a byte budget, least recently used
// evicted first. Concurrent requests for the same uncached model share one
// load. It also remembers the newest version of each model it has seen, so
// that "version 0" requests do not read the store; the daemon keeps that
// pointer right by calling add after every store.Create and forget after
// every store.Delete. When other daemons write the same store (replica
// mode, replica_cache.go), their changes arrive as notifications, and
// entries are confirmed with the store again while notifications are down.
type modelCache struct {
	load  func(ctx context.Context, name string, version int64) (*mixdv1.Model, error)
	build func(*mixdv1.Model) (*mixture.Model, error)

	mu      sync.Mutex
	budget  int64
	used    int64
	lru     list.List // of *loadedModel, front = most recently used
	items   map[cacheKey]*list.Element
	newest  map[string]int64
	flights map[cacheKey]*flight
	epoch   uint64 // bumped by add and forget; stale loads do not insert
	loads   int    // number of store loads started (for tests and metrics)
	hits    uint64 // gets answered from the cache (for metrics)
	misses  uint64 // gets that waited for a load (for metrics)

	// Replica mode (replica_cache.go); checked is nil outside it.
	recheck time.Duration          // > 0: entries confirmed longer ago are confirmed again on use
	checked map[cacheKey]time.Time // last confirmation by the store; version 0: the newest pointer
}

// newModelCache returns an empty cache with the given byte budget.
func newModelCache(budget int64, load func(context.Context, string, int64) (*mixdv1.Model, error), build func(*mixdv1.Model) (*mixture.Model, error)) *modelCache {
	return &modelCache{
		load:    load,
		build:   build,
		budget:  budget,
		items:   map[cacheKey]*list.Element{},
		newest:  map[string]int64{},
		flights: map[cacheKey]*flight{},
	}
}

// get returns the model version (0 = newest), loading it once however many
// callers ask at the same time. A caller whose ctx ends stops waiting; the
// load itself goes on for the others.
func (c *modelCache) get(ctx context.Context, name string, version int64) (*loadedModel, error) {
	c.mu.Lock()
	v := version
	var fallback *loadedModel // replica mode: a cached answer due for confirmation
	if v == 0 {
		v = c.newest[name]
		if v != 0 && c.dueLocked(cacheKey{name, 0}) {
			fallback, v = c.itemLocked(name, v), 0
		}
	}
	if v != 0 {
		if e, ok := c.items[cacheKey{name, v}]; ok {
			if version != 0 && c.dueLocked(cacheKey{name, v}) {
				fallback = e.Value.(*loadedModel)
			} else {
				c.lru.MoveToFront(e)
				c.hits++
				c.mu.Unlock()
				return e.Value.(*loadedModel), nil
			}
		}
	}
	c.misses++
	key := cacheKey{name, v}
	f, ok := c.flights[key]
	if !ok {
		f = &flight{done: make(chan struct{})}
		c.flights[key] = f
		c.loads++
		go c.fill(key, f, c.epoch)
	}
	c.mu.Unlock()
	if fallback != nil {
		return waitOrFallback(ctx, f, fallback)
	}
	select {
	case <-f.done:
		return f.val, f.err
	case <-ctx.Done():
		return nil, ctx.Err()
	}
}

// fill performs one load for key and publishes it to the flight's waiters.
func (c *modelCache) fill(key cacheKey, f *flight, epoch uint64) {
	ctx, cancel := context.WithTimeout(context.Background(), cacheLoadTimeout)
	defer cancel()
	var lm *loadedModel
	pb, err := c.load(ctx, key.name, key.version)
	if err == nil {
		if lm = c.reuse(pb); lm == nil {
			lm, err = c.prepare(pb)
		}
	}
	c.mu.Lock()
	delete(c.flights, key)
	if err == nil && c.epoch == epoch {
		c.insertLocked(lm)
		if key.version == 0 {
			c.newest[key.name] = lm.version()
		}
	}
	c.confirmLocked(key, lm, err, epoch)
	c.mu.Unlock()
	f.val, f.err = lm, err
	close(f.done)
}

// prepare builds a loadedModel from a stored model.
func (c *modelCache) prepare(pb *mixdv1.Model) (*loadedModel, error) {
	m, err := c.build(pb)
	if err != nil {
		return nil, fmt.Errorf("%w: %s version %d: %w", errUnservable, pb.GetName(), pb.GetVersion(), err)
	}
	return newLoaded(pb, m), nil
}

// newLoaded wraps a stored model and its built form.
func newLoaded(pb *mixdv1.Model, m *mixture.Model) *loadedModel {
	lm := &loadedModel{pb: pb, m: m, size: estimateSize(pb, m.K(), m.Dim())}
	if q := pb.GetReport().GetTrainingQuantiles(); validQuantiles(q) == nil {
		lm.quantiles = q
	}
	return lm
}

// add puts a model that was just stored into the cache and makes it the
// newest version of its name when it is newer than what the cache knew.
// In replica mode an unknown newest version stays unknown: another daemon
// may have written a newer one meanwhile.
func (c *modelCache) add(lm *loadedModel) {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.epoch++
	c.insertLocked(lm)
	if cur := c.newest[lm.name()]; lm.version() > cur && (cur != 0 || c.checked == nil) {
		c.newest[lm.name()] = lm.version()
	}
	if c.checked != nil {
		c.checked[cacheKey{lm.name(), lm.version()}] = time.Now()
	}
}

// forget drops a model version (0: every version) and the newest pointer
// of its name. Loads in flight when forget is called do not insert.
func (c *modelCache) forget(name string, version int64) {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.epoch++
	delete(c.newest, name)
	delete(c.checked, cacheKey{name, 0})
	for k, e := range c.items {
		if k.name == name && (version == 0 || k.version == version) {
			c.removeLocked(e)
		}
	}
}

// insertLocked adds lm, evicting least recently used models to stay within
// the budget. A model larger than the whole budget is not cached.
func (c *modelCache) insertLocked(lm *loadedModel) {
	key := cacheKey{lm.name(), lm.version()}
	if e, ok := c.items[key]; ok {
		c.removeLocked(e)
	}
	if lm.size > c.budget {
		return
	}
	for c.used+lm.size > c.budget {
		c.removeLocked(c.lru.Back())
	}
	c.items[key] = c.lru.PushFront(lm)
	c.used += lm.size
}

func (c *modelCache) removeLocked(e *list.Element) {
	lm := c.lru.Remove(e).(*loadedModel)
	delete(c.items, cacheKey{lm.name(), lm.version()})
	delete(c.checked, cacheKey{lm.name(), lm.version()})
	c.used -= lm.size
}

// stats returns the number of cached models, their estimated bytes and the
// number of store loads started so far.
func (c *modelCache) stats() (models int, bytes int64, loads int) {
	c.mu.Lock()
	defer c.mu.Unlock()
	return len(c.items), c.used, c.loads
}

// counters returns the cache's hit and miss counts and its byte budget.
func (c *modelCache) counters() (hits, misses uint64, budget int64) {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.hits, c.misses, c.budget
}

// validQuantiles checks stored training quantiles: at least two levels,
// increasing within [0, 1], and as many finite, non-decreasing log-densities.
func validQuantiles(q *mixdv1.DensityQuantiles) error {
	l, v := q.GetLevels(), q.GetLogDensities()
	if len(l) == 0 && len(v) == 0 {
		return errors.New("no training quantiles")
	}
	if len(l) < 2 || len(l) != len(v) {
		return fmt.Errorf("training_quantiles: %d levels and %d log-densities; want the same number, at least 2", len(l), len(v))
	}
	for i := range l {
		if !(l[i] >= 0 && l[i] <= 1) {
			return fmt.Errorf("training_quantiles.levels[%d] = %v is outside [0, 1]", i, l[i])
		}
		if v[i]-v[i] != 0 {
			return fmt.Errorf("training_quantiles.log_densities[%d] = %v is not finite", i, v[i])
		}
		if i > 0 && !(l[i] > l[i-1]) {
			return fmt.Errorf("training_quantiles.levels[%d] = %v does not increase", i, l[i])
		}
		if i > 0 && v[i] < v[i-1] {
			return fmt.Errorf("training_quantiles.log_densities[%d] = %v decreases", i, v[i])
		}
	}
	return nil
}
