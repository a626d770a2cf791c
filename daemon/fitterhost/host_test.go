package fitterhost

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"log/slog"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"reflect"
	"runtime"
	"strconv"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"golang.org/x/sys/unix"

	"github.com/mixd-dev/mixd/fitters"
)

// wait is how long the tests wait for something that should happen at once.
const wait = 15 * time.Second

type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

func testExe(t *testing.T) string {
	t.Helper()
	exe, err := os.Executable()
	if err != nil {
		t.Fatal(err)
	}
	return exe
}

// newHost returns a host whose logs are shown when the test fails and which
// is closed when the test ends.
func newHost(t *testing.T, cfg Config) *Host {
	t.Helper()
	if cfg.SelfExecutable == "" {
		cfg.SelfExecutable = testExe(t)
	}
	logs := &syncBuffer{}
	cfg.Logger = slog.New(slog.NewTextHandler(logs, &slog.HandlerOptions{Level: slog.LevelDebug}))
	h, err := New(cfg)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		if err := h.Close(); err != nil {
			t.Error(err)
		}
		if t.Failed() {
			t.Logf("host logs:\n%s", logs.String())
		}
	})
	return h
}

// pumpData returns rows of made-up pumping-station readings (flow, motor
// current, vibration) from a fixed formula.
func pumpData(rows int) fitters.Data {
	d := fitters.Data{Rows: rows, Cols: 3, Values: make([]float64, 3*rows)}
	for i := 0; i < rows; i++ {
		x := float64(i)
		d.Values[3*i] = 40 + 5*math.Sin(x/7)
		d.Values[3*i+1] = 12 + 0.1*x/float64(rows) + math.Cos(x/3)
		d.Values[3*i+2] = 0.5 + 0.01*float64(i%17)
	}
	return d
}

func withWeightsAndLabels(d fitters.Data) (fitters.Data, []int) {
	d.Weights = make([]float64, d.Rows)
	labels := make([]int, d.Rows)
	for i := range labels {
		d.Weights[i] = 0.5 + float64(i%4)
		labels[i] = i % 3
	}
	return d, labels
}

// waitFor polls cond until it holds or the wait ends.
func waitFor(t *testing.T, what string, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(wait)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatalf("timed out waiting for %s", what)
		}
		time.Sleep(20 * time.Millisecond)
	}
}

func readPID(t *testing.T, path string) int {
	t.Helper()
	var pid int
	waitFor(t, "the plugin's pid file", func() bool {
		b, err := os.ReadFile(path)
		if err != nil {
			return false
		}
		pid, err = strconv.Atoi(string(b))
		return err == nil
	})
	return pid
}

// processGone reports whether pid no longer runs (absent, or a zombie
// waiting to be reaped).
func processGone(pid int) bool {
	b, err := os.ReadFile(fmt.Sprintf("/proc/%d/stat", pid))
	if err != nil {
		if runtime.GOOS != "linux" {
			return errors.Is(syscall.Kill(pid, 0), syscall.ESRCH)
		}
		return true
	}
	s := string(b)
	i := strings.LastIndexByte(s, ')')
	return i >= 0 && len(s) > i+2 && (s[i+2] == 'Z' || s[i+2] == 'X')
}

// fitAsync runs h.Fit in a goroutine.
func fitAsync(ctx context.Context, h *Host, name string, s fitters.Settings, progress func(fitters.Progress)) <-chan error {
	done := make(chan error, 1)
	go func() {
		_, err := h.Fit(ctx, name, pumpData(50), s, progress)
		done <- err
	}()
	return done
}

func awaitErr(t *testing.T, done <-chan error) error {
	t.Helper()
	select {
	case err := <-done:
		return err
	case <-time.After(wait):
		t.Fatal("the fit did not return")
		return nil
	}
}

func TestBuiltInRoundTrip(t *testing.T) {
	h := newHost(t, Config{BuiltIn: []string{"fake"}})
	entries := h.List()
	if len(entries) != 1 {
		t.Fatalf("List() = %+v", entries)
	}
	e := entries[0]
	if e.Info.Name != "fake" || e.Info.Version != "1.0.0" || e.Source != SourceBuiltIn || e.SHA256 != "" || len(e.Info.Structures) != 1 {
		t.Fatalf("entry = %+v", e)
	}

	d, labels := withWeightsAndLabels(pumpData(1000))
	res, err := h.Fit(context.Background(), "fake", d, fitters.Settings{Labels: labels}, nil)
	if err != nil {
		t.Fatal(err)
	}
	// The plugin ran the same code on the same data in another process.
	if want := moments(d); !reflect.DeepEqual(res.Params, want) {
		t.Errorf("params = %+v, want %+v", res.Params, want)
	}
	if got, want := res.Report.Notes[0], checksum(d, labels); got != want {
		t.Errorf("plugin saw %s, sent %s", got, want)
	}
	// One process serves every call.
	res2, err := h.Fit(context.Background(), "fake", pumpData(10), fitters.Settings{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if res2.Report.Settings["pid"] != res.Report.Settings["pid"] {
		t.Error("a second fit started a second process")
	}
	if pid, _ := strconv.Atoi(res.Report.Settings["pid"]); pid == os.Getpid() || pid == 0 {
		t.Errorf("the fit ran in process %d, not in a plugin process", pid)
	}
}

func TestLargeDataIsChunked(t *testing.T) {
	h := newHost(t, Config{BuiltIn: []string{"fake"}})
	// 90000 rows × (3 values + 1 weight) × 8 bytes + labels: about 3.2 MB,
	// two chunks of fitters.ChunkBytes.
	d, labels := withWeightsAndLabels(pumpData(90000))
	res, err := h.Fit(context.Background(), "fake", d, fitters.Settings{Labels: labels}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if got, want := res.Report.Notes[0], checksum(d, labels); got != want {
		t.Fatalf("plugin saw %s, sent %s", got, want)
	}
}

func TestProgressArrivesInOrder(t *testing.T) {
	h := newHost(t, Config{BuiltIn: []string{"fake"}})
	var got []fitters.Progress
	const n = 200
	_, err := h.Fit(context.Background(), "fake", pumpData(20), fitters.Settings{Options: map[string]string{"mode": "progress", "events": strconv.Itoa(n)}},
		func(p fitters.Progress) { got = append(got, p) })
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != n {
		t.Fatalf("%d progress events, want %d", len(got), n)
	}
	for i, p := range got {
		if p.Iteration != i+1 || p.Objective != -float64(n-i-1) || p.Components != 1 || (i > 0 && p.Elapsed < got[i-1].Elapsed) {
			t.Fatalf("event %d = %+v (previous %+v)", i, p, got[max(i-1, 0)])
		}
	}
}

func TestCancellationReachesPlugin(t *testing.T) {
	h := newHost(t, Config{BuiltIn: []string{"fake"}})
	marker := filepath.Join(t.TempDir(), "cancelled")
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	done := fitAsync(ctx, h, "fake", fitters.Settings{Options: map[string]string{"mode": "block", "marker": marker}},
		func(fitters.Progress) { cancel() })
	err := awaitErr(t, done)
	if fitters.CodeOf(err) != fitters.Canceled || !errors.Is(err, context.Canceled) {
		t.Fatalf("error = %v (code %d), want Canceled", err, fitters.CodeOf(err))
	}
	waitFor(t, "the plugin to see the cancellation", func() bool {
		_, err := os.Stat(marker)
		return err == nil
	})
	// The process survives a cancelled fit.
	if _, err := h.Fit(context.Background(), "fake", pumpData(10), fitters.Settings{}, nil); err != nil {
		t.Fatal(err)
	}
	if n := len(h.running); n != 1 {
		t.Errorf("%d processes after a cancelled fit, want 1", n)
	}
}

func TestErrorCodesRoundTrip(t *testing.T) {
	h := newHost(t, Config{BuiltIn: []string{"fake"}})
	for _, code := range []fitters.Code{fitters.InvalidArgument, fitters.FailedPrecondition, fitters.Unimplemented, fitters.Internal, fitters.Canceled, fitters.DeadlineExceeded} {
		msg := fmt.Sprintf("row 12, column 3 (vibration): problem with code %d", code)
		_, err := h.Fit(context.Background(), "fake", pumpData(5), fitters.Settings{Options: map[string]string{"mode": "fail", "code": strconv.Itoa(int(code)), "message": msg}}, nil)
		var fe *fitters.Error
		if !errors.As(err, &fe) || fe.Code != code || fe.Error() != msg || err.Error() != `fitter "fake": `+msg {
			t.Errorf("code %d: error = %v", code, err)
		}
		if errors.Is(err, ErrUnavailable) {
			t.Errorf("code %d: a fitter's own error was reported as unavailable", code)
		}
	}
	_, err := h.Fit(context.Background(), "fake", fitters.Data{Cols: 3}, fitters.Settings{}, nil)
	if fitters.CodeOf(err) != fitters.InvalidArgument || !strings.HasSuffix(err.Error(), "no rows") {
		t.Errorf("empty data: error = %v", err)
	}
}

func TestUnknownFitter(t *testing.T) {
	h := newHost(t, Config{BuiltIn: []string{"fake", "em"}})
	_, err := h.Fit(context.Background(), "nope", pumpData(5), fitters.Settings{}, nil)
	if !errors.Is(err, ErrUnknownFitter) || err.Error() != `unknown fitter "nope" (available: "em", "fake")` {
		t.Fatalf("error = %v", err)
	}
	if len(h.running) != 0 {
		t.Error("an unknown name started a process")
	}
}

func TestCrashedPluginIsRelaunched(t *testing.T) {
	h := newHost(t, Config{BuiltIn: []string{"fake"}})
	pidfile := filepath.Join(t.TempDir(), "pid")
	done := fitAsync(context.Background(), h, "fake", fitters.Settings{Options: map[string]string{"mode": "block", "pidfile": pidfile}}, nil)
	pid := readPID(t, pidfile)
	if err := syscall.Kill(pid, syscall.SIGKILL); err != nil {
		t.Fatal(err)
	}
	err := awaitErr(t, done)
	if !errors.Is(err, ErrUnavailable) || !strings.Contains(err.Error(), `fitter "fake" process exited during the fit`) {
		t.Fatalf("error = %v, want one wrapping ErrUnavailable", err)
	}
	res, err := h.Fit(context.Background(), "fake", pumpData(10), fitters.Settings{}, nil)
	if err != nil {
		t.Fatalf("fit after the crash: %v", err)
	}
	if res.Report.Settings["pid"] == strconv.Itoa(pid) {
		t.Fatal("the fit after the crash ran on the killed process")
	}
	if n := len(h.running); n != 1 {
		t.Errorf("%d processes tracked after the relaunch, want 1", n)
	}
}

// writeScript writes an executable plugin that runs this test binary as the
// fake fitter called name.
func writeScript(t *testing.T, path, name, version string) {
	t.Helper()
	script := fmt.Sprintf("#!/bin/sh\nexec %q fitter %q %q\n", testExe(t), name, version)
	if err := os.WriteFile(path+".tmp", []byte(script), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.Rename(path+".tmp", path); err != nil {
		t.Fatal(err)
	}
}

func TestReload(t *testing.T) {
	dir := t.TempDir()
	pathA := filepath.Join(dir, "alpha")
	writeScript(t, pathA, "ext-a", "1.0.0")
	if err := os.WriteFile(filepath.Join(dir, "README.txt"), []byte("not a plugin"), 0o644); err != nil {
		t.Fatal(err)
	}
	h := newHost(t, Config{BuiltIn: []string{"fake"}, PluginDir: dir})

	names := func() []string {
		var out []string
		for _, e := range h.List() {
			out = append(out, e.Info.Name+"@"+e.Info.Version)
		}
		return out
	}
	if got := names(); !reflect.DeepEqual(got, []string{"ext-a@1.0.0", "fake@1.0.0"}) {
		t.Fatalf("List() = %v", got)
	}
	for _, e := range h.List() {
		if e.Info.Name == "ext-a" {
			sum, _ := fileSHA256(pathA)
			if e.Source != pathA || e.SHA256 != sum || len(e.SHA256) != 64 {
				t.Errorf("external entry = %+v", e)
			}
		}
	}

	// New executables: one good, one claiming a built-in's name, one broken,
	// one with an invalid name.
	writeScript(t, filepath.Join(dir, "beta"), "ext-b", "1.0.0")
	writeScript(t, filepath.Join(dir, "clash"), "fake", "9.9.9")
	writeScript(t, filepath.Join(dir, "dup"), "ext-a", "2.0.0")
	if err := os.WriteFile(filepath.Join(dir, "broken"), []byte("#!/bin/sh\necho broken >&2\nexit 1\n"), 0o755); err != nil {
		t.Fatal(err)
	}
	problems, err := h.Reload(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	wantProblems := []string{
		filepath.Join(dir, "broken") + ": not a working fitter plugin",
		filepath.Join(dir, "clash") + `: fitter name "fake" is taken by a built-in fitter; ignored`,
		filepath.Join(dir, "dup") + `: fitter name "ext-a" is already provided by ` + pathA + "; ignored",
	}
	if len(problems) != len(wantProblems) {
		t.Fatalf("problems = %q", problems)
	}
	for i, p := range problems {
		if !strings.HasPrefix(p, wantProblems[i]) {
			t.Errorf("problem %d = %q, want prefix %q", i, p, wantProblems[i])
		}
	}
	if got := names(); !reflect.DeepEqual(got, []string{"ext-a@1.0.0", "ext-b@1.0.0", "fake@1.0.0"}) {
		t.Fatalf("List() after reload = %v", got)
	}
	for _, f := range []string{"clash", "dup", "broken"} {
		if err := os.Remove(filepath.Join(dir, f)); err != nil {
			t.Fatal(err)
		}
	}
	if n := len(h.running); n != 3 {
		t.Errorf("%d processes running, want 3 (fake, described by List, ext-a, ext-b; refused ones are killed)", n)
	}

	// A fit running on ext-a keeps its process when ext-a changes.
	pidfile := filepath.Join(dir, ".old.pid")
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	done := fitAsync(ctx, h, "ext-a", fitters.Settings{Options: map[string]string{"mode": "block", "pidfile": pidfile}}, nil)
	oldPID := readPID(t, pidfile)
	writeScript(t, pathA, "ext-a", "2.0.0")
	if err := os.Remove(filepath.Join(dir, "beta")); err != nil {
		t.Fatal(err)
	}
	if problems, err := h.Reload(context.Background()); err != nil || len(problems) != 0 {
		t.Fatalf("Reload = %q, %v", problems, err)
	}
	if got := names(); !reflect.DeepEqual(got, []string{"ext-a@2.0.0", "fake@1.0.0"}) {
		t.Fatalf("List() after the change = %v", got)
	}
	if processGone(oldPID) {
		t.Fatal("Reload killed the process of a running fit")
	}
	res, err := h.Fit(context.Background(), "ext-a", pumpData(10), fitters.Settings{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if res.Report.Settings["pid"] == strconv.Itoa(oldPID) {
		t.Error("a new fit ran on the replaced executable's process")
	}
	if _, err := h.Fit(context.Background(), "ext-b", pumpData(10), fitters.Settings{}, nil); !errors.Is(err, ErrUnknownFitter) {
		t.Errorf("fit on a removed plugin: error = %v", err)
	}
	cancel()
	if err := awaitErr(t, done); fitters.CodeOf(err) != fitters.Canceled {
		t.Fatalf("old fit: error = %v", err)
	}
	waitFor(t, "the replaced process to end with its last fit", func() bool { return processGone(oldPID) })
	if n := len(h.running); n != 2 {
		t.Errorf("%d processes running, want 2 (fake and the new ext-a)", n)
	}
}

func TestPluginDoesNotOutliveHost(t *testing.T) {
	if runtime.GOOS != "linux" {
		t.Skip("needs PR_SET_CHILD_SUBREAPER")
	}
	// Become the reaper of orphans so the plugin's exit status can be read:
	// killed by SIGKILL means the parent-death signal worked (the fallback
	// polling would exit with status 3).
	if err := unix.Prctl(unix.PR_SET_CHILD_SUBREAPER, 1, 0, 0, 0); err != nil {
		t.Skipf("PR_SET_CHILD_SUBREAPER: %v", err)
	}
	defer func() { _ = unix.Prctl(unix.PR_SET_CHILD_SUBREAPER, 0, 0, 0, 0) }()

	dir := t.TempDir()
	logs := &syncBuffer{}
	host := exec.Command(testExe(t), "host-helper", dir)
	host.Stderr = logs
	if err := host.Start(); err != nil {
		t.Fatal(err)
	}
	defer func() {
		_ = host.Process.Kill()
		_ = host.Wait()
		if t.Failed() {
			t.Logf("host helper output:\n%s", logs.String())
		}
	}()
	pid := readPID(t, filepath.Join(dir, "plugin.pid"))
	if err := host.Process.Signal(syscall.SIGKILL); err != nil {
		t.Fatal(err)
	}
	_ = host.Wait()

	type result struct {
		ws  syscall.WaitStatus
		err error
	}
	done := make(chan result, 1)
	go func() {
		var ws syscall.WaitStatus
		_, err := syscall.Wait4(pid, &ws, 0, nil)
		done <- result{ws, err}
	}()
	select {
	case r := <-done:
		if r.err != nil {
			t.Fatalf("wait4(%d): %v", pid, r.err)
		}
		if !r.ws.Signaled() || r.ws.Signal() != syscall.SIGKILL {
			t.Errorf("plugin ended with %v, want SIGKILL from the parent-death signal", r.ws)
		}
	case <-time.After(wait):
		_ = syscall.Kill(pid, syscall.SIGKILL)
		<-done
		t.Fatalf("plugin process %d outlived its host", pid)
	}
}

func TestClose(t *testing.T) {
	h := newHost(t, Config{BuiltIn: []string{"fake"}})
	pidfile := filepath.Join(t.TempDir(), "pid")
	done := fitAsync(context.Background(), h, "fake", fitters.Settings{Options: map[string]string{"mode": "block", "pidfile": pidfile}}, nil)
	pid := readPID(t, pidfile)
	if err := h.Close(); err != nil {
		t.Fatal(err)
	}
	if !processGone(pid) {
		// Close waits for the kill; go-plugin reaps the process.
		waitFor(t, "the plugin to end", func() bool { return processGone(pid) })
	}
	if err := awaitErr(t, done); !errors.Is(err, ErrUnavailable) {
		t.Errorf("running fit after Close: error = %v", err)
	}
	if _, err := h.Fit(context.Background(), "fake", pumpData(5), fitters.Settings{}, nil); !errors.Is(err, ErrUnavailable) {
		t.Errorf("fit after Close: error = %v", err)
	}
}

func TestNewRejectsBadConfig(t *testing.T) {
	tests := []struct {
		cfg  Config
		want string
	}{
		{Config{BuiltIn: []string{"em"}}, "SelfExecutable is required"},
		{Config{SelfExecutable: "/bin/true", BuiltIn: []string{"em", "em"}}, `built-in fitter "em" is listed twice`},
		{Config{SelfExecutable: "/bin/true", BuiltIn: []string{"no spaces"}}, `built-in fitter name "no spaces" is not valid`},
		{Config{PluginDir: filepath.Join(t.TempDir(), "missing")}, "reading the fitter plugin directory"},
	}
	for _, tt := range tests {
		if _, err := New(tt.cfg); err == nil || !strings.Contains(err.Error(), tt.want) {
			t.Errorf("New(%+v) error = %v, want %q", tt.cfg, err, tt.want)
		}
	}
}

// TestBuiltInEM runs the real EM fitter in a plugin process on two
// well-separated groups of readings and checks it finds them.
func TestBuiltInEM(t *testing.T) {
	h := newHost(t, Config{BuiltIn: []string{"em"}})
	if e := h.List(); len(e) != 1 || e[0].Info.Name != "em" || e[0].Info.Version == "" {
		t.Fatalf("List() = %+v", e)
	}
	rng := rand.New(rand.NewPCG(7, 11))
	centres := [][]float64{{20, 6, 2}, {45, 13, 0.5}}
	d := fitters.Data{Rows: 400, Cols: 3}
	for i := 0; i < d.Rows; i++ {
		c := centres[i%2]
		for j := range c {
			d.Values = append(d.Values, c[j]+0.5*rng.NormFloat64())
		}
	}
	res, err := h.Fit(context.Background(), "em", d, fitters.Settings{Components: 2, Seed: 3}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Params.Components) != 2 {
		t.Fatalf("%d components", len(res.Params.Components))
	}
	for _, c := range centres {
		found := false
		for _, comp := range res.Params.Components {
			if math.Abs(comp.Mean[0]-c[0]) < 0.5 && math.Abs(comp.Weight-0.5) < 0.05 {
				found = true
			}
		}
		if !found {
			t.Errorf("no component near %v: %+v", c, res.Params.Components)
		}
	}
}
