package main_test

// End-to-end test of the status page in a real browser: Debian's chromium
// package in headless mode, started with its networking features off, loads
// /status from a real daemon while a fit runs.
//
// Without a chromium binary the test skips, except under CI (CI=true),
// where it fails: .ci/test installs the package. The screenshot is saved
// under $MIXD_ARTIFACTS when set (CI keeps it), else in a temporary
// directory; its path is logged.

import (
	"bytes"
	"context"
	"errors"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	mixdclient "github.com/mixd-dev/mixd/clients/go"
)

// chromiumBinary returns the path of Debian's chromium, or "" when none is
// installed.
func chromiumBinary() string {
	if fi, err := os.Stat("/usr/bin/chromium"); err == nil && !fi.IsDir() && fi.Mode()&0o111 != 0 {
		return "/usr/bin/chromium"
	}
	if p, err := exec.LookPath("chromium"); err == nil {
		return p
	}
	return ""
}

// chromiumFlags start headless chromium without sandbox (tests may run as
// root), GPU, QUIC, first-run screens, background networking, component
// updates or sync, in its own profile directory.
func chromiumFlags(profile string) []string {
	return []string{
		"--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
		"--disable-background-networking", "--disable-component-update", "--disable-sync",
		"--user-data-dir=" + profile,
	}
}

// runChromium runs chromium with args and returns its standard output. The
// browser runs in its own process group, which is killed when it takes
// longer than 90 s, so no helper process outlives the call.
func runChromium(t *testing.T, chromium, profile string, args ...string) string {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 90*time.Second)
	defer cancel()
	cmd := exec.CommandContext(ctx, chromium, append(chromiumFlags(profile), args...)...)
	cmd.SysProcAttr = &syscall.SysProcAttr{Setpgid: true}
	cmd.Cancel = func() error { return syscall.Kill(-cmd.Process.Pid, syscall.SIGKILL) }
	cmd.WaitDelay = 5 * time.Second
	cmd.Env = append(os.Environ(), "HOME="+profile)
	var out, errb bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errb
	err := cmd.Run()
	// Headless chromium may leave helper processes (zygote, crashpad) in
	// its group for a moment after it exits: end them.
	_ = syscall.Kill(-cmd.Process.Pid, syscall.SIGKILL)
	if err != nil {
		if errors.Is(ctx.Err(), context.DeadlineExceeded) {
			t.Fatalf("chromium %s did not finish within 90s\nstderr: %s", strings.Join(args, " "), errb.String())
		}
		t.Fatalf("chromium %s: %v\nstderr: %s", strings.Join(args, " "), err, errb.String())
	}
	return out.String()
}

// progressRe finds the start and iteration in a progress cell of the page
// ("K=8, start 1, iteration 37, objective ...").
var progressRe = regexp.MustCompile(`start (\d+), iteration (\d+)`)

// jobProgress returns the start and iteration the page shows for the fit
// of model, from the table row naming it.
func jobProgress(t *testing.T, dom, model string) (start, iter int) {
	t.Helper()
	for _, row := range strings.Split(dom, "<tr>") {
		if !strings.Contains(row, "<td>"+model+"</td>") {
			continue
		}
		m := progressRe.FindStringSubmatch(row)
		if m == nil {
			continue
		}
		start, _ = strconv.Atoi(m[1])
		iter, _ = strconv.Atoi(m[2])
		return start, iter
	}
	t.Fatalf("the page shows no progress for a fit of model %q:\n%s", model, dom)
	return 0, 0
}

// pngSignature starts every PNG file (RFC 2083, section 3.1).
var pngSignature = []byte{0x89, 'P', 'N', 'G', '\r', '\n', 0x1a, '\n'}

// TestStatusPageInChromium loads the status page in headless chromium
// twice during a running fit, checks that the page names the model and the
// job and that the fit's progress moved on between the loads, and saves a
// screenshot.
func TestStatusPageInChromium(t *testing.T) {
	chromium := chromiumBinary()
	if chromium == "" {
		if os.Getenv("CI") == "true" {
			t.Fatal("no chromium binary (/usr/bin/chromium or chromium on PATH) under CI: .ci/test installs Debian's chromium package")
		}
		t.Skip("no chromium binary (/usr/bin/chromium or chromium on PATH): install Debian's chromium package to run this test")
	}
	d := startDaemon(t, t.TempDir(), true, "--metrics-listen", "127.0.0.1:0", "--status-page")
	metricsAddr := statusLine(t, d, "mixd: metrics on ")
	if !strings.HasPrefix(metricsAddr, "127.0.0.1:") {
		t.Fatalf("metrics listener on %q, want 127.0.0.1", metricsAddr)
	}
	url := "http://" + metricsAddr + "/status"
	c := d.client()

	// A stored model from the demo data, so the page has a picture.
	data, header := pumps(t)
	if _, err := c.Fit(context.Background(), "pumps", data, mixdclient.FitOptions{Components: 3, Seed: 7, FeatureNames: header}, nil); err != nil {
		t.Fatal(err)
	}
	errc := startLongFit(t, c, "long")

	profile := t.TempDir()
	first := runChromium(t, chromium, profile, "--dump-dom", url)
	for _, want := range []string{"<title>mixd status</title>", "<td>long</td>", "<td>pumps</td>", "<td>em</td>", "<svg"} {
		if !strings.Contains(first, want) {
			t.Errorf("first load lacks %s:\n%s", want, first)
		}
	}
	s1, i1 := jobProgress(t, first, "long")
	time.Sleep(3 * time.Second)
	second := runChromium(t, chromium, profile, "--dump-dom", url)
	s2, i2 := jobProgress(t, second, "long")
	if s2 < s1 || (s2 == s1 && i2 <= i1) {
		t.Errorf("progress did not move on between loads 3s apart: start %d iteration %d, then start %d iteration %d", s1, i1, s2, i2)
	}
	t.Logf("progress: start %d iteration %d, then start %d iteration %d", s1, i1, s2, i2)

	dir := os.Getenv("MIXD_ARTIFACTS")
	if dir == "" {
		dir = t.TempDir()
	} else if err := os.MkdirAll(dir, 0o755); err != nil {
		t.Fatalf("artefact directory: %v", err)
	}
	shot, err := filepath.Abs(filepath.Join(dir, "status-page.png"))
	if err != nil {
		t.Fatal(err)
	}
	_ = os.Remove(shot) // a file left by an earlier run must not pass the checks
	runChromium(t, chromium, profile, "--screenshot="+shot, "--window-size=1280,900", "--hide-scrollbars", url)
	b, err := os.ReadFile(shot)
	if err != nil {
		t.Fatalf("no screenshot: %v", err)
	}
	if len(b) <= len(pngSignature) || !bytes.HasPrefix(b, pngSignature) {
		t.Fatalf("screenshot %s is not a PNG (%d bytes)", shot, len(b))
	}
	t.Logf("screenshot of the status page: %s (%d bytes)", shot, len(b))

	// The fit still runs: the daemon is killed at cleanup, which ends it.
	select {
	case err := <-errc:
		t.Errorf("the long fit ended during the test: %v", err)
	default:
	}
}
