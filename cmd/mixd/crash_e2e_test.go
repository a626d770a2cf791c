package main_test

// The daemon killed with SIGKILL while it writes models, then restarted on
// the same data directory.

import (
	"context"
	"fmt"
	"math/rand/v2"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"google.golang.org/protobuf/proto"

	mixdclient "github.com/mixd-dev/mixd/clients/go"
	"github.com/mixd-dev/mixd/daemon/modeldoc"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// ackedModel is a model version the daemon acknowledged, as it returned it.
type ackedModel struct {
	id    string
	model *mixdv1.Model
}

// TestKilledDuringModelWrites imports and fits small models from several
// clients at once, SIGKILLs the daemon at a random moment while they run,
// and restarts it on the same data directory: every acknowledged version is
// there and equal to what was acknowledged, and every version served
// decodes and validates (none half-written).
func TestKilledDuringModelWrites(t *testing.T) {
	seed := uint64(time.Now().UnixNano())
	t.Logf("seed %d", seed)
	rng := rand.New(rand.NewPCG(seed, 2))
	dataDir := t.TempDir()
	d := startDaemon(t, dataDir, false)
	c := d.client()
	ctx := context.Background()

	// Three different documents to import (so that a version holding
	// another version's content would be noticed).
	data, header := pumps(t)
	var docs [][]byte
	for k := 1; k <= 3; k++ {
		if _, err := c.Fit(ctx, "base", data, mixdclient.FitOptions{Components: k, Seed: 7, FeatureNames: header}, nil); err != nil {
			t.Fatal(err)
		}
		doc, err := c.ExportModel(ctx, "base", int64(k))
		if err != nil {
			t.Fatal(err)
		}
		docs = append(docs, doc)
	}
	baseBefore := snapshot(t, c)

	var (
		mu     sync.Mutex
		acked  []ackedModel
		wg     sync.WaitGroup
		first  = make(chan struct{})
		once   sync.Once
		stopAt = time.Now().Add(20 * time.Second) // bound in case the kill never comes
	)
	record := func(id string, m *mixdv1.Model) {
		mu.Lock()
		acked = append(acked, ackedModel{id, m})
		mu.Unlock()
		once.Do(func() { close(first) })
	}
	const importers, fitters = 6, 2
	for w := range importers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			id := fmt.Sprintf("imported-%d", w)
			for i := 0; time.Now().Before(stopAt); i++ {
				m, err := c.ImportModel(ctx, docs[(w+i)%len(docs)], id)
				if err != nil {
					return // the daemon is gone
				}
				record(id, m)
			}
		}()
	}
	for w := range fitters {
		wg.Add(1)
		go func() {
			defer wg.Done()
			id := fmt.Sprintf("fitted-%d", w)
			for i := 0; time.Now().Before(stopAt); i++ {
				m, err := c.Fit(ctx, id, uniformData(200, 2, uint64(100*w+i)),
					mixdclient.FitOptions{Components: 1 + i%2, Seed: uint64(i + 1), MaxIterations: 20}, nil)
				if err != nil {
					return
				}
				record(id, m)
			}
		}()
	}
	select {
	case <-first:
	case <-time.After(30 * time.Second):
		t.Fatal("no model write acknowledged within 30s")
	}
	time.Sleep(time.Duration(50+rng.IntN(1200)) * time.Millisecond)
	d.stop(syscall.SIGKILL)
	wg.Wait()
	mu.Lock()
	defer mu.Unlock()
	fits := 0
	for _, a := range acked {
		if strings.HasPrefix(a.id, "fitted-") {
			fits++
		}
	}
	t.Logf("%d model versions acknowledged before SIGKILL (%d of them fits)", len(acked), fits)

	d2 := startDaemon(t, dataDir, false)
	c2 := d2.client()
	for _, a := range acked {
		got, err := c2.GetModel(ctx, a.id, a.model.GetVersion())
		if err != nil {
			t.Errorf("acknowledged %s version %d after restart: %v", a.id, a.model.GetVersion(), err)
			continue
		}
		if !proto.Equal(got, a.model) {
			t.Errorf("%s version %d differs from what was acknowledged", a.id, a.model.GetVersion())
		}
	}
	// Everything served is whole: each listed version exports to a document
	// that decodes and validates, and its parameters build a model.
	after := snapshot(t, c2)
	newest := map[string]int64{}
	for _, m := range after {
		doc, err := c2.ExportModel(ctx, m.GetName(), m.GetVersion())
		if err != nil {
			t.Errorf("export %s version %d: %v", m.GetName(), m.GetVersion(), err)
			continue
		}
		dm, err := modeldoc.Decode(doc)
		if err != nil {
			t.Errorf("%s version %d does not decode: %v", m.GetName(), m.GetVersion(), err)
			continue
		}
		if !proto.Equal(dm.GetParameters(), m.GetParameters()) {
			t.Errorf("%s version %d: exported parameters differ from the served ones", m.GetName(), m.GetVersion())
		}
		inProcess(t, m)
		id := strings.TrimPrefix(m.GetName(), "models/")
		newest[id] = max(newest[id], m.GetVersion())
	}
	var base []*mixdv1.Model
	for _, m := range after {
		if m.GetName() == "models/base" {
			base = append(base, m)
		}
	}
	if !sameModels(base, baseBefore) {
		t.Error("the models written before the writers started changed")
	}
	// Versions continue after the highest one on disk: a new write takes
	// no acknowledged number.
	for id, v := range newest {
		if id == "base" {
			continue
		}
		m, err := c2.ImportModel(ctx, docs[0], id)
		if err != nil {
			t.Fatalf("import into %s after restart: %v", id, err)
		}
		if m.GetVersion() <= v {
			t.Errorf("import into %s after restart got version %d, want above %d", id, m.GetVersion(), v)
		}
	}
}
