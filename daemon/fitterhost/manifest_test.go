package fitterhost

import (
	"context"
	"errors"
	"log/slog"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"sync"
	"syscall"
	"testing"

	"github.com/mixd-dev/mixd/fitters"
)

const (
	sumA = "9f86d081884c7d659a2feaa0c55ad015a3bf4f1b2b0b822cd15d6c15b0f00a08"
	sumB = "60303ae22b998861bce3b28f33eec1be758a213c86c93c076dbe9f558c11c752"
)

func TestParseManifest(t *testing.T) {
	m, err := parseManifest([]byte("# pins\n\nalpha sha256:"+sumA+"\n  alpha  sha256:"+strings.ToUpper(sumB)+"\nbeta sha256:"+sumB+"\n"), "m")
	if err != nil {
		t.Fatal(err)
	}
	want := manifest{"alpha": {sumA, sumB}, "beta": {sumB}}
	if !reflect.DeepEqual(m, want) {
		t.Fatalf("parsed %v, want %v", m, want)
	}
	if err := m.check("alpha", sumB); err != nil {
		t.Errorf("second pin of alpha: %v", err)
	}
	if err := m.check("beta", sumA); err == nil || !strings.Contains(err.Error(), "the sha256 of beta is "+sumA+", the fitter manifest pins "+sumB) {
		t.Errorf("mismatch: %v", err)
	}
	if err := m.check("gamma", sumA); err == nil || !strings.Contains(err.Error(), "gamma is not pinned") {
		t.Errorf("unpinned: %v", err)
	}
	for _, c := range []struct{ in, msg string }{
		{"alpha " + sumA, `line 1: the digest "` + sumA + `" does not start with "sha256:"`},
		{"alpha sha256:" + sumA[:63], "line 1: the SHA-256 digest has 63 hex digits"},
		{"alpha sha256:" + strings.Repeat("g", 64), "line 1: the SHA-256 digest is not hexadecimal"},
		{"# ok\nsub/alpha sha256:" + sumA, `line 2: "sub/alpha" is not a file name`},
		{".hidden sha256:" + sumA, `".hidden" is not a file name`},
		{"alpha", "line 1: want FILE sha256:HEX, found 1 fields"},
		{"alpha sha256:" + sumA + " extra", "found 3 fields"},
	} {
		if _, err := parseManifest([]byte(c.in), "m"); err == nil || !strings.Contains(err.Error(), c.msg) {
			t.Errorf("parseManifest(%q): %v, want an error containing %q", c.in, err, c.msg)
		}
	}
	// An empty manifest pins nothing: every executable is refused.
	if m, err := parseManifest(nil, "m"); err != nil || m.check("alpha", sumA) == nil {
		t.Errorf("empty manifest: %v, %v", m, err)
	}
}

// FuzzParseManifest: no panic; every pin of an accepted manifest matches.
func FuzzParseManifest(f *testing.F) {
	f.Add([]byte("alpha sha256:" + sumA + "\n# c\nbeta sha256:" + sumB))
	f.Add([]byte("x sha256:zz"))
	f.Fuzz(func(t *testing.T, b []byte) {
		m, err := parseManifest(b, "fuzz")
		if err != nil {
			return
		}
		for name, pins := range m {
			for _, p := range pins {
				if len(p) != 64 || m.check(name, p) != nil {
					t.Fatalf("pin %q of %q does not match itself", p, name)
				}
			}
		}
	})
}

// events counts hook calls.
type events struct {
	mu                                    sync.Mutex
	launched, launchFailed, lost, refused map[string]int
}

func newEvents() *events {
	return &events{launched: map[string]int{}, launchFailed: map[string]int{}, lost: map[string]int{}, refused: map[string]int{}}
}

func (e *events) hooks() Hooks {
	count := func(m map[string]int) func(string) {
		return func(s string) { e.mu.Lock(); m[s]++; e.mu.Unlock() }
	}
	return Hooks{Launched: count(e.launched), LaunchFailed: count(e.launchFailed), Lost: count(e.lost), Refused: count(e.refused)}
}

func (e *events) get(m map[string]int, k string) int {
	e.mu.Lock()
	defer e.mu.Unlock()
	return m[k]
}

func TestManifestPinsPlugins(t *testing.T) {
	dir, mdir := t.TempDir(), t.TempDir()
	alpha, beta, gamma := filepath.Join(dir, "alpha"), filepath.Join(dir, "beta"), filepath.Join(dir, "gamma")
	writeScript(t, alpha, "ext-a", "1.0.0")
	writeScript(t, beta, "ext-b", "1.0.0")
	writeScript(t, gamma, "ext-c", "1.0.0")
	sa, _ := fileSHA256(alpha)
	manifestPath := filepath.Join(mdir, "manifest")
	if err := os.WriteFile(manifestPath, []byte("alpha sha256:"+sa+"\nbeta sha256:"+sumA+"\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	ev := newEvents()
	h := newHost(t, Config{BuiltIn: []string{"fake"}, PluginDir: dir, Manifest: manifestPath, Hooks: ev.hooks()})
	names := func() []string {
		var out []string
		for _, e := range h.List() {
			out = append(out, e.Info.Name+"@"+e.Info.Version)
		}
		return out
	}
	if got := names(); !reflect.DeepEqual(got, []string{"ext-a@1.0.0", "fake@1.0.0"}) {
		t.Fatalf("List() = %v, want only the pinned plugin and the built-in one", got)
	}
	if ev.get(ev.refused, beta) != 1 || ev.get(ev.refused, gamma) != 1 || ev.get(ev.launched, "ext-b") != 0 || ev.get(ev.launched, "ext-c") != 0 {
		t.Fatalf("refused executables were started or not counted: %+v", ev)
	}
	problems, err := h.Reload(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	if len(problems) != 2 || !strings.HasPrefix(problems[0], beta+": refused: the sha256 of beta is ") ||
		!strings.HasPrefix(problems[1], gamma+": refused: gamma is not pinned") {
		t.Fatalf("problems %q", problems)
	}

	// The pinned plugin runs. Then its process dies and the executable is
	// replaced without a reload: the relaunch is refused.
	pidfile := filepath.Join(dir, ".pid")
	if _, err := h.Fit(context.Background(), "ext-a", pumpData(10), fitters.Settings{Options: map[string]string{"pidfile": pidfile}}, nil); err != nil {
		t.Fatal(err)
	}
	launches := ev.get(ev.launched, "ext-a")
	if launches == 0 {
		t.Fatal("no launch counted")
	}
	if err := syscall.Kill(readPID(t, pidfile), syscall.SIGKILL); err != nil {
		t.Fatal(err)
	}
	writeScript(t, alpha, "ext-a", "6.6.6")
	waitFor(t, "the killed plugin to be seen as exited", func() bool {
		h.mu.Lock()
		defer h.mu.Unlock()
		e := h.byName["ext-a"]
		return e.cur == nil || e.cur.client.Exited()
	})
	_, err = h.Fit(context.Background(), "ext-a", pumpData(10), fitters.Settings{}, nil)
	if !errors.Is(err, ErrUnavailable) || !strings.Contains(err.Error(), "checksums did not match") {
		t.Fatalf("fit on a replaced pinned executable: %v", err)
	}
	if ev.get(ev.launchFailed, "ext-a") != 1 {
		t.Errorf("launch failures %+v", ev.launchFailed)
	}
	// Reload now refuses it and drops it from the list.
	if problems, err := h.Reload(context.Background()); err != nil || len(problems) != 3 || !strings.HasPrefix(problems[0], alpha+": refused") {
		t.Fatalf("Reload after the change = %q, %v", problems, err)
	}
	if got := names(); !reflect.DeepEqual(got, []string{"fake@1.0.0"}) {
		t.Fatalf("List() = %v", got)
	}
	// Pinning the new content admits it again.
	sa2, _ := fileSHA256(alpha)
	if err := os.WriteFile(manifestPath, []byte("alpha sha256:"+sa2+"\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	if _, err := h.Reload(context.Background()); err != nil {
		t.Fatal(err)
	}
	if got := names(); !reflect.DeepEqual(got, []string{"ext-a@6.6.6", "fake@1.0.0"}) {
		t.Fatalf("List() after pinning the new content = %v", got)
	}
	// A manifest that cannot be read fails Reload and changes nothing.
	if err := os.WriteFile(manifestPath, []byte("alpha nonsense\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	if _, err := h.Reload(context.Background()); err == nil || !strings.Contains(err.Error(), "line 1") {
		t.Fatalf("Reload with a broken manifest: %v", err)
	}
	if got := names(); !reflect.DeepEqual(got, []string{"ext-a@6.6.6", "fake@1.0.0"}) {
		t.Fatalf("List() after a failed reload = %v", got)
	}
	if _, err := New(Config{PluginDir: dir, Manifest: filepath.Join(mdir, "missing")}); err == nil || !strings.Contains(err.Error(), "fitter manifest") {
		t.Fatalf("New with a missing manifest: %v", err)
	}
}

// TestPluginConnectionUsesAutoMTLS checks, through go-plugin's own log,
// that the connection to a plugin is set up with automatic mutual TLS.
func TestPluginConnectionUsesAutoMTLS(t *testing.T) {
	logs := &syncBuffer{}
	h, err := New(Config{SelfExecutable: testExe(t), BuiltIn: []string{"fake"},
		Logger: slog.New(slog.NewTextHandler(logs, &slog.HandlerOptions{Level: slog.LevelDebug}))})
	if err != nil {
		t.Fatal(err)
	}
	defer h.Close()
	if _, err := h.Fit(context.Background(), "fake", pumpData(10), fitters.Settings{}, nil); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(logs.String(), "configuring client automatic mTLS") {
		t.Fatalf("no automatic mTLS in the plugin client's log:\n%s", logs.String())
	}
}
