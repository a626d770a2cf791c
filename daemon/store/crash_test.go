package store_test

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"log/slog"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/mixd-dev/mixd/daemon/store"
	"github.com/mixd-dev/mixd/daemon/store/storetest"
)

// Environment of the writer process the crash tests start (this test
// binary, re-executed).
const (
	envWriterDir   = "MIXD_STORE_TEST_WRITER_DIR"
	envWriterModel = "MIXD_STORE_TEST_WRITER_MODEL"
	envWriterCount = "MIXD_STORE_TEST_WRITER_COUNT"
	envWriterBase  = "MIXD_STORE_TEST_WRITER_BASE"
)

func TestMain(m *testing.M) {
	if dir := os.Getenv(envWriterDir); dir != "" {
		os.Exit(runWriter(dir))
	}
	os.Exit(m.Run())
}

// runWriter is the writer process: it creates versions of one model in a
// loop (deleting the oldest now and then) and prints a line to stdout after
// each operation the store acknowledged:
//
//	created <version> <variant>
//	deleting <version>   (before a delete; not an acknowledgement)
//	deleted <version>
func runWriter(dir string) int {
	model := os.Getenv(envWriterModel)
	count, _ := strconv.Atoi(os.Getenv(envWriterCount)) // 0: until killed
	base, _ := strconv.Atoi(os.Getenv(envWriterBase))
	s, err := store.OpenDir(dir, store.WithLogger(slog.New(slog.NewTextHandler(os.Stderr, nil))))
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		return 2
	}
	ctx := context.Background()
	for i := 0; count == 0 || i < count; i++ {
		variant := base + i
		m, err := s.Create(ctx, storetest.Model(model, variant))
		if err != nil {
			fmt.Fprintln(os.Stderr, err)
			return 2
		}
		fmt.Fprintf(os.Stdout, "created %d %d\n", m.Version, variant)
		if count == 0 && i%4 == 3 {
			vs, _, err := s.Versions(ctx, model, 1, "")
			if err != nil {
				fmt.Fprintln(os.Stderr, err)
				return 2
			}
			// Announce the delete first: a kill between the delete and its
			// acknowledgement may leave the version gone, which is allowed.
			fmt.Fprintf(os.Stdout, "deleting %d\n", vs[0].Version)
			if _, err := s.Delete(ctx, model, vs[0].Version); err != nil {
				fmt.Fprintln(os.Stderr, err)
				return 2
			}
			fmt.Fprintf(os.Stdout, "deleted %d\n", vs[0].Version)
		}
	}
	return 0
}

// writer is a running writer process.
type writer struct {
	cmd   *exec.Cmd
	lines chan string
}

func startWriter(t *testing.T, dir, model string, count, base int) *writer {
	t.Helper()
	cmd := exec.Command(os.Args[0], "-test.run=^$")
	cmd.Env = append(os.Environ(),
		envWriterDir+"="+dir, envWriterModel+"="+model,
		envWriterCount+"="+strconv.Itoa(count), envWriterBase+"="+strconv.Itoa(base))
	var stderr strings.Builder
	cmd.Stderr = &stderr
	out, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	w := &writer{cmd: cmd, lines: make(chan string, 1024)}
	go func() {
		sc := bufio.NewScanner(out)
		for sc.Scan() {
			w.lines <- sc.Text()
		}
		close(w.lines)
	}()
	t.Cleanup(func() {
		_ = cmd.Process.Kill()
		_ = cmd.Wait()
		if t.Failed() && stderr.Len() > 0 {
			t.Logf("writer stderr:\n%s", stderr.String())
		}
	})
	return w
}

// acks is what a writer acknowledged.
type acks struct {
	created map[int64]int // version -> variant
	order   []int64       // created versions in order of acknowledgement
	deleted map[int64]bool
	// deleting holds versions whose delete was started but perhaps not
	// acknowledged: after a crash they may be present (intact) or gone.
	deleting map[int64]bool
}

func (a *acks) add(t *testing.T, line string) {
	t.Helper()
	f := strings.Fields(line)
	switch {
	case len(f) == 3 && f[0] == "created":
		v, _ := strconv.ParseInt(f[1], 10, 64)
		variant, _ := strconv.Atoi(f[2])
		if _, dup := a.created[v]; dup {
			t.Errorf("version %d acknowledged twice", v)
		}
		a.created[v] = variant
		a.order = append(a.order, v)
	case len(f) == 2 && f[0] == "deleting":
		v, _ := strconv.ParseInt(f[1], 10, 64)
		a.deleting[v] = true
	case len(f) == 2 && f[0] == "deleted":
		v, _ := strconv.ParseInt(f[1], 10, 64)
		a.deleted[v] = true
	default:
		t.Fatalf("writer printed %q", line)
	}
}

// TestCrashLosesNothingAcknowledged kills a writer process with SIGKILL at
// random moments, several times over the same directory, and checks after
// each kill that every acknowledged version is present and intact, every
// acknowledged delete stuck, nothing corrupt or half-written is visible, and
// version numbers keep increasing across the restarts.
func TestCrashLosesNothingAcknowledged(t *testing.T) {
	if testing.Short() {
		t.Skip("starts and kills writer processes")
	}
	dir := t.TempDir()
	const model = "pump-station-7"
	rng := rand.New(rand.NewPCG(uint64(time.Now().UnixNano()), 7))
	all := &acks{created: map[int64]int{}, deleted: map[int64]bool{}, deleting: map[int64]bool{}}
	for round := range 5 {
		w := startWriter(t, dir, model, 0, 1000*round)
		// Let it acknowledge a few operations, then kill it at a random moment.
		wantAcks := 3 + rng.IntN(15)
		for got := 0; got < wantAcks; got++ {
			select {
			case line, ok := <-w.lines:
				if !ok {
					t.Fatalf("round %d: writer stopped early", round)
				}
				all.add(t, line)
			case <-time.After(60 * time.Second):
				t.Fatalf("round %d: writer acknowledged nothing for a minute", round)
			}
		}
		time.Sleep(time.Duration(rng.IntN(3000)) * time.Microsecond)
		if err := w.cmd.Process.Signal(syscall.SIGKILL); err != nil {
			t.Fatal(err)
		}
		for line := range w.lines { // acknowledgements printed before the kill
			all.add(t, line)
		}
		err := w.cmd.Wait()
		var exit *exec.ExitError
		if !errors.As(err, &exit) || exit.ProcessState.Sys().(syscall.WaitStatus).Signal() != syscall.SIGKILL {
			t.Fatalf("round %d: writer ended with %v, want killed by SIGKILL", round, err)
		}
		checkAfterCrash(t, dir, model, all)
	}
}

func checkAfterCrash(t *testing.T, dir, model string, all *acks) {
	t.Helper()
	s := openDir(t, dir)
	defer s.Close()
	// Acknowledged versions increase strictly: no number was handed out twice.
	for i := 1; i < len(all.order); i++ {
		if all.order[i] <= all.order[i-1] {
			t.Errorf("version %d acknowledged after version %d", all.order[i], all.order[i-1])
		}
	}
	for v, variant := range all.created {
		m, err := s.Get(bg, model, v)
		if all.deleted[v] {
			if !errors.Is(err, store.ErrNotFound) {
				t.Errorf("version %d: delete was acknowledged but Get gives %v", v, err)
			}
			continue
		}
		if all.deleting[v] && errors.Is(err, store.ErrNotFound) {
			continue // its delete was under way when the writer was killed
		}
		if err != nil {
			t.Errorf("acknowledged version %d lost: %v", v, err)
			continue
		}
		if !sameContent(m, storetest.Model(model, variant)) {
			t.Errorf("acknowledged version %d does not hold variant %d", v, variant)
		}
	}
	// Nothing half-written: every version file present reads back intact
	// (unacknowledged ones may exist, complete), and no temporary file
	// survives reopening.
	ents, err := os.ReadDir(filepath.Join(dir, "models", model))
	if err != nil {
		t.Fatal(err)
	}
	var present []int64
	for _, e := range ents {
		name := e.Name()
		if name == "high-water" {
			continue
		}
		if strings.HasPrefix(name, ".tmp-") {
			t.Errorf("temporary file %s survived reopening", name)
			continue
		}
		v, err := strconv.ParseInt(strings.TrimSuffix(name, ".json"), 10, 64)
		if err != nil {
			t.Errorf("unexpected file %s", name)
			continue
		}
		if _, err := s.Get(bg, model, v); err != nil {
			t.Errorf("version file %s does not read back: %v", name, err)
		}
		present = append(present, v)
	}
	vs, _, err := s.Versions(bg, model, store.MaxPageSize, "")
	if err != nil {
		t.Fatal(err)
	}
	var listed []int64
	for _, m := range vs {
		listed = append(listed, m.Version)
	}
	slices.Sort(present)
	if !slices.Equal(listed, present) {
		t.Errorf("Versions lists %v, the directory holds %v", listed, present)
	}
	// The next version is above everything ever acknowledged.
	m, err := s.Create(bg, storetest.Model(model, -1))
	if err != nil {
		t.Fatal(err)
	}
	if top := slices.Max(all.order); m.Version <= top {
		t.Errorf("Create after the crash gave version %d, not above the acknowledged %d", m.Version, top)
	}
	if _, err := s.Delete(bg, model, m.Version); err != nil {
		t.Fatal(err)
	}
	all.order = append(all.order, m.Version)
}

// TestWriterProcessesShareVersions runs two writer processes on the same
// model at once; their acknowledged versions must not overlap.
func TestWriterProcessesShareVersions(t *testing.T) {
	if testing.Short() {
		t.Skip("starts writer processes")
	}
	dir := t.TempDir()
	openDir(t, dir).Close() // create the layout before both start
	const n = 12
	ws := []*writer{startWriter(t, dir, "pumps", n, 0), startWriter(t, dir, "pumps", n, 100)}
	all := &acks{created: map[int64]int{}, deleted: map[int64]bool{}, deleting: map[int64]bool{}}
	for _, w := range ws {
		for line := range w.lines {
			all.add(t, line)
		}
		if err := w.cmd.Wait(); err != nil {
			t.Fatalf("writer: %v", err)
		}
	}
	if len(all.created) != 2*n {
		t.Fatalf("%d distinct versions acknowledged, want %d", len(all.created), 2*n)
	}
	s := openDir(t, dir)
	for v, variant := range all.created {
		m, err := s.Get(bg, "pumps", v)
		if err != nil || !sameContent(m, storetest.Model("pumps", variant)) {
			t.Errorf("version %d: %v", v, err)
		}
	}
}
