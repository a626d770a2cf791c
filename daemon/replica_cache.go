package daemon

import (
	"context"
	"errors"
	"time"

	"github.com/mixd-dev/mixd/daemon/store"
)

// The model cache in replica mode: several daemons write one shared store,
// and each hears of the others' writes through the store's change
// notifications (store.Watcher).
//
//   - A model version created anywhere moves a known newest pointer up
//     (noteCreated); an unknown one stays unknown and is read from the store
//     on first use. A version deleted anywhere is dropped with its newest
//     pointer (forget). Any version is loaded from the store on a cache miss
//     (read-through), so a version acknowledged by one daemon is servable
//     from every other at once when asked for by number.
//   - While notifications flow, cached entries stay valid without asking
//     the store. When the notification connection is lost (lost), every
//     newest pointer and cached version confirmed by the store longer than
//     the recheck period ago is confirmed again on its next use; while that
//     confirmation runs (at most recheckWait) or when the store cannot be
//     reached, the cached answer is served, so cached models keep serving
//     while the database is down. When notifications flow again
//     (listening), the cache is emptied, since changes may have been missed.

// recheckWait bounds how long a call waits for the store to confirm a
// cached answer before it is served unconfirmed.
const recheckWait = time.Second

// enableReplica turns on replica mode; entries are rechecked after period
// until the first listening call.
func (c *modelCache) enableReplica(period time.Duration) {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.recheck = period
	if c.checked == nil {
		c.checked = map[cacheKey]time.Time{}
	}
}

// listening records that notifications flow (again): the cache is emptied
// and entries need no rechecking until lost is called.
func (c *modelCache) listening() {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.epoch++
	c.recheck = 0
	clear(c.newest)
	for c.lru.Len() > 0 {
		c.removeLocked(c.lru.Back())
	}
	clear(c.checked)
}

// lost records that notifications may be missed: entries confirmed longer
// than period ago are confirmed again on use.
func (c *modelCache) lost(period time.Duration) {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.recheck = period
}

// noteCreated records that version v of model name was written (by any
// daemon).
func (c *modelCache) noteCreated(name string, v int64) {
	c.mu.Lock()
	defer c.mu.Unlock()
	cur := c.newest[name]
	if cur >= v {
		return
	}
	c.epoch++ // a newest-version load in flight may predate v
	if cur != 0 {
		c.newest[name] = v
	}
}

// dueLocked reports whether the entry of key (version 0: the newest
// pointer) must be confirmed by the store before it is used.
func (c *modelCache) dueLocked(key cacheKey) bool {
	if c.recheck <= 0 {
		return false
	}
	return time.Since(c.checked[key]) > c.recheck
}

// itemLocked returns the cached version v of name, or nil.
func (c *modelCache) itemLocked(name string, v int64) *loadedModel {
	if e, ok := c.items[cacheKey{name, v}]; ok {
		return e.Value.(*loadedModel)
	}
	return nil
}

// reuse returns the cached built model of pb's name and version (replica
// mode only: versions never change, so a confirmation needs no rebuild).
func (c *modelCache) reuse(pb interface {
	GetName() string
	GetVersion() int64
}) *loadedModel {
	c.mu.Lock()
	defer c.mu.Unlock()
	if c.checked == nil {
		return nil
	}
	return c.itemLocked(pb.GetName(), pb.GetVersion())
}

// confirmLocked records the outcome of a load for key in replica mode: a
// success confirms what was loaded; "not found" drops what the cache held;
// a failure to reach the store postpones the next confirmation of what the
// cache holds by another recheck period.
func (c *modelCache) confirmLocked(key cacheKey, lm *loadedModel, err error, epoch uint64) {
	if c.checked == nil || c.epoch != epoch {
		return
	}
	now := time.Now()
	switch {
	case err == nil:
		c.checked[cacheKey{key.name, lm.version()}] = now
		if key.version == 0 {
			c.checked[key] = now
		}
	case errors.Is(err, store.ErrNotFound):
		c.epoch++
		if key.version == 0 {
			delete(c.newest, key.name)
			delete(c.checked, key)
		}
		for k, e := range c.items {
			if k.name == key.name && (key.version == 0 || k.version == key.version) {
				c.removeLocked(e)
			}
		}
	case !definitive(err):
		if key.version == 0 {
			if _, ok := c.newest[key.name]; ok {
				c.checked[key] = now
			}
		} else if _, ok := c.items[key]; ok {
			c.checked[key] = now
		}
	}
}

// definitive reports whether a load error is the store's answer about the
// model (absent, corrupt, unservable) rather than a failure to get one.
func definitive(err error) bool {
	return errors.Is(err, store.ErrNotFound) || errors.Is(err, store.ErrCorrupt) ||
		errors.Is(err, errUnservable) || errors.Is(err, store.ErrInvalid)
}

// waitOrFallback waits for the confirmation load f; the cached fallback
// is served when the store cannot answer, or does not within recheckWait.
func waitOrFallback(ctx context.Context, f *flight, fallback *loadedModel) (*loadedModel, error) {
	t := time.NewTimer(recheckWait)
	defer t.Stop()
	select {
	case <-f.done:
		if f.err != nil && !definitive(f.err) {
			return fallback, nil
		}
		return f.val, f.err
	case <-t.C:
		return fallback, nil
	case <-ctx.Done():
		return nil, ctx.Err()
	}
}
