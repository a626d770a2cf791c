package daemon

import (
	"context"
	"encoding/base64"
	"errors"
	"io"
	"log/slog"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"github.com/mixd-dev/mixd/fitters"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// getStatus fetches url with an optional Authorization header.
func getStatus(t *testing.T, url, authz string) (*http.Response, string) {
	t.Helper()
	req, err := http.NewRequest(http.MethodGet, url, nil)
	if err != nil {
		t.Fatal(err)
	}
	if authz != "" {
		req.Header.Set("Authorization", authz)
	}
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	if err != nil {
		t.Fatal(err)
	}
	return resp, string(b)
}

// hostileModel has a feature name that would run as a script if it were
// not escaped.
func hostileModel() *mixdv1.Model {
	m := refModel("models/odd")
	m.Parameters.FeatureNames = []string{"<script>alert(1)</script>", "vibration"}
	m.Parameters.Family = mixdv1.Family_FAMILY_STUDENT_T
	for _, c := range m.Parameters.Components {
		c.DegreesOfFreedom = 4
	}
	return m
}

var urlPattern = regexp.MustCompile(`(?i)(https?:)?//[a-z0-9.-]+\.[a-z]{2,}[^\s"'<>)]*`)

// checkSelfContained fails when the page holds a script, or a URL other
// than the SVG namespace names (which are identifiers, never fetched).
func checkSelfContained(t *testing.T, page string) {
	t.Helper()
	if strings.Contains(strings.ToLower(page), "<script") {
		t.Error("the page holds a <script> element")
	}
	for _, u := range urlPattern.FindAllString(page, -1) {
		if u != "http://www.w3.org/2000/svg" && u != "http://www.w3.org/1999/xlink" {
			t.Errorf("the page refers to %q", u)
		}
	}
	for _, attr := range regexp.MustCompile(`(?i)\b(src|href)="([^"]*)"`).FindAllStringSubmatch(page, -1) {
		if !strings.HasPrefix(attr[2], "data:") {
			t.Errorf("%s=%q is not inline data", attr[1], attr[2])
		}
	}
}

func TestStatusPage(t *testing.T) {
	e := newTestEnv(t, Options{})
	for _, m := range []*mixdv1.Model{refModel("models/pumps"), hostileModel()} {
		if _, err := e.store.Create(context.Background(), m); err != nil {
			t.Fatal(err)
		}
	}
	// One failed fit, then one left running.
	e.host.setFit("em", func(context.Context, fitters.Data, fitters.Settings, func(fitters.Progress)) (*fitters.Result, error) {
		return nil, errors.New("the pump data would not separate")
	})
	failed := createJob(t, e, "broken")
	waitFor(t, "the fit to fail", func() bool {
		return jobState(t, e, failed.Name).Job.State == mixdv1.FitJobState_FIT_JOB_STATE_FAILED
	})
	started, release := make(chan struct{}, 1), make(chan struct{})
	defer close(release)
	e.host.setFit("em", blockingFit(started, release))
	createJob(t, e, "station7")
	<-started

	ts := httptest.NewServer(newStatusPage(e.srv, nil, slog.New(slog.NewTextHandler(io.Discard, nil))))
	defer ts.Close()
	resp, page := getStatus(t, ts.URL+StatusPath+"?x=current&y=flow", "")
	if dir := os.Getenv("STATUS_ARTEFACTS"); dir != "" {
		_ = os.WriteFile(filepath.Join(dir, "status.html"), []byte(page), 0o644)
	}
	if resp.StatusCode != http.StatusOK {
		t.Fatalf("status %d: %s", resp.StatusCode, page)
	}
	if ct := resp.Header.Get("Content-Type"); !strings.HasPrefix(ct, "text/html") {
		t.Errorf("Content-Type %q", ct)
	}
	if csp := resp.Header.Get("Content-Security-Policy"); !strings.Contains(csp, "default-src 'none'") {
		t.Errorf("Content-Security-Policy %q", csp)
	}
	for _, want := range []string{
		"<td>pumps</td>", "<td>odd</td>", "student_t", "gaussian", "stored only",
		"station7", "running", "iteration 1", // the running fit and its progress
		"broken", "the pump data would not separate", // the failed fit
		"pumps version 1: flow against current", // picture title on the chosen features
		"&lt;script&gt;",                        // the hostile name, escaped
	} {
		if !strings.Contains(page, want) {
			t.Errorf("the page lacks %q", want)
		}
	}
	if n := strings.Count(page, "<svg"); n != 2 {
		t.Errorf("%d pictures, want 2", n)
	}
	checkSelfContained(t, page)

	// A model filter shows one model; a cached model says so.
	if _, err := e.srv.cache.get(context.Background(), "models/pumps", 0); err != nil {
		t.Fatal(err)
	}
	_, page = getStatus(t, ts.URL+StatusPath+"?model=pumps", "")
	if !strings.Contains(page, "in memory") || strings.Contains(page, "<td>odd</td>") || strings.Count(page, "<svg") != 1 {
		t.Errorf("filtered page: in memory=%v odd=%v pictures=%d", strings.Contains(page, "in memory"),
			strings.Contains(page, "<td>odd</td>"), strings.Count(page, "<svg"))
	}
	if resp, _ := getStatus(t, ts.URL+StatusPath+"?model=nothing", ""); resp.StatusCode != http.StatusOK {
		t.Errorf("unknown model filter: status %d", resp.StatusCode)
	}
	req, _ := http.NewRequest(http.MethodPost, ts.URL+StatusPath, nil)
	if r, err := http.DefaultClient.Do(req); err != nil || r.StatusCode != http.StatusMethodNotAllowed {
		t.Errorf("POST: %v %v", r, err)
	} else {
		r.Body.Close()
	}
}

func TestStatusPageTokens(t *testing.T) {
	e := newTestEnv(t, Options{})
	if _, err := e.store.Create(context.Background(), refModel("models/pumps")); err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "tokens")
	const readTok, fullTok = "read-token-0123456789", "full-token-0123456789"
	if err := os.WriteFile(path, []byte("read "+readTok+" viewer\nfull "+fullTok+" admin\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	auth, err := newAuthenticator(path)
	if err != nil {
		t.Fatal(err)
	}
	ts := httptest.NewServer(newStatusPage(e.srv, auth, slog.New(slog.NewTextHandler(io.Discard, nil))))
	defer ts.Close()
	basic := func(user, pass string) string {
		return "Basic " + base64.StdEncoding.EncodeToString([]byte(user+":"+pass))
	}
	tests := []struct {
		name, query, authz string
		want               int
	}{
		{"no token", "", "", http.StatusUnauthorized},
		{"unknown token", "", "Bearer not-a-token-at-all-000", http.StatusUnauthorized},
		{"token in the URL", "?token=" + readTok, "", http.StatusUnauthorized},
		{"token as Basic user name", "", basic(readTok, ""), http.StatusUnauthorized},
		{"read bearer", "", "Bearer " + readTok, http.StatusOK},
		{"full bearer", "", "bearer " + fullTok, http.StatusOK},
		{"read as Basic password", "", basic("anyone", readTok), http.StatusOK},
	}
	for _, tt := range tests {
		resp, page := getStatus(t, ts.URL+StatusPath+tt.query, tt.authz)
		if resp.StatusCode != tt.want {
			t.Errorf("%s: status %d, want %d", tt.name, resp.StatusCode, tt.want)
			continue
		}
		if tt.want == http.StatusUnauthorized {
			if !strings.HasPrefix(resp.Header.Get("WWW-Authenticate"), "Basic ") || strings.Contains(page, "pumps") {
				t.Errorf("%s: refusal leaks or lacks a challenge: %q %q", tt.name, resp.Header.Get("WWW-Authenticate"), page)
			}
		} else if !strings.Contains(page, "<td>pumps</td>") {
			t.Errorf("%s: the page does not list the model", tt.name)
		}
	}
}

func TestStatusPageNeedsMetricsListener(t *testing.T) {
	err := Run(context.Background(), Config{
		StatusPage: true, Store: newMemStore(), Host: newFakeHost(),
		Logger: slog.New(slog.NewTextHandler(io.Discard, nil)), Status: io.Discard,
	})
	if err == nil || !strings.Contains(err.Error(), "--metrics-listen") {
		t.Fatalf("Run with a status page and no metrics listener: %v", err)
	}
}
