package main_test

// End-to-end tests: they build the real mixd and mixctl binaries, start
// `mixd serve` on 127.0.0.1 port 0 or a Unix socket in a temporary
// directory, and talk to it over gRPC through the Go client and through
// mixctl. Built-in fitters run as real child processes of the daemon.
//
// The fit of 1 000 000 × 32 rows runs only with MIXD_LARGE=1 (CI runs it
// in a separate step without the race detector).

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"slices"
	"sort"
	"strconv"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	mixdclient "github.com/mixd-dev/mixd/clients/go"
	"github.com/mixd-dev/mixd/fitters/mixture"
	"github.com/mixd-dev/mixd/fitters/pbconv"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// listeningPrefix starts the line mixd prints once it accepts connections
// (daemon.ListeningPrefix; repeated here so the test reads the binary's
// output the way a script would).
const listeningPrefix = "mixd: listening on "

var (
	buildOnce sync.Once
	buildErr  error
	binDir    string
)

func TestMain(m *testing.M) {
	code := m.Run()
	if binDir != "" {
		_ = os.RemoveAll(binDir)
	}
	os.Exit(code)
}

// bin returns the path of a binary built once per test run: "mixd",
// "mixctl" or "pumpsgen".
func bin(t *testing.T, name string) string {
	t.Helper()
	if runtime.GOOS != "linux" {
		t.Skip("end-to-end tests read /proc and need Linux")
	}
	buildOnce.Do(func() {
		goTool, err := exec.LookPath("go")
		if err != nil {
			buildErr = fmt.Errorf("go tool not found: %w", err)
			return
		}
		if binDir, err = os.MkdirTemp("", "mixd-e2e-"); err != nil {
			buildErr = err
			return
		}
		for _, b := range []struct{ out, pkg string }{
			{"mixd", "."}, {"mixctl", "../mixctl"}, {"pumpsgen", "../../testdata/pumps/gen"},
		} {
			args := []string{"build"}
			if os.Getenv("MIXD_E2E_RACE") == "1" {
				args = append(args, "-race")
			}
			args = append(args, "-o", filepath.Join(binDir, b.out), b.pkg)
			cmd := exec.Command(goTool, args...)
			if out, err := cmd.CombinedOutput(); err != nil {
				buildErr = fmt.Errorf("go build %s: %v\n%s", b.pkg, err, out)
				return
			}
		}
	})
	if buildErr != nil {
		t.Fatal(buildErr)
	}
	return filepath.Join(binDir, name)
}

// syncBuffer collects a process's log.
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

// daemonProc is a running `mixd serve`.
type daemonProc struct {
	t       *testing.T
	cmd     *exec.Cmd
	addr    string // as printed: host:port or unix:/path
	dataDir string
	log     *syncBuffer
	done    chan struct{}
	waitErr error
}

// startDaemon starts mixd on dataDir, on a Unix socket when unix is true
// and on 127.0.0.1 port 0 otherwise, and waits for its listening line.
func startDaemon(t *testing.T, dataDir string, unix bool, extra ...string) *daemonProc {
	t.Helper()
	listen := "127.0.0.1:0"
	if unix {
		// Socket paths are limited to about 100 bytes: use a short directory.
		dir, err := os.MkdirTemp("", "mixd")
		if err != nil {
			t.Fatal(err)
		}
		t.Cleanup(func() { os.RemoveAll(dir) })
		listen = "unix:" + filepath.Join(dir, "s.sock")
	}
	args := append([]string{"serve", "--listen", listen, "--data-dir", dataDir, "--shutdown-timeout", "3s"}, extra...)
	cmd := exec.Command(bin(t, "mixd"), args...)
	stderr, err := cmd.StderrPipe()
	if err != nil {
		t.Fatal(err)
	}
	d := &daemonProc{t: t, cmd: cmd, dataDir: dataDir, log: &syncBuffer{}, done: make(chan struct{})}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	addrCh := make(chan string, 1)
	go func() {
		sc := bufio.NewScanner(stderr)
		sc.Buffer(make([]byte, 1<<16), 1<<20)
		found := false
		for sc.Scan() {
			line := sc.Text()
			fmt.Fprintln(d.log, line)
			if !found && strings.HasPrefix(line, listeningPrefix) {
				found = true
				addrCh <- strings.TrimSpace(strings.TrimPrefix(line, listeningPrefix))
			}
		}
		_, _ = io.Copy(d.log, stderr)
		d.waitErr = cmd.Wait()
		close(d.done)
	}()
	t.Cleanup(func() {
		d.kill()
		if t.Failed() {
			t.Logf("mixd log:\n%s", d.log.String())
		}
	})
	select {
	case d.addr = <-addrCh:
	case <-d.done:
		t.Fatalf("mixd exited before listening: %v\n%s", d.waitErr, d.log.String())
	case <-time.After(30 * time.Second):
		t.Fatalf("mixd did not print its listening line within 30s\n%s", d.log.String())
	}
	if unix && !strings.HasPrefix(d.addr, "unix:") {
		t.Fatalf("listening line names %q, want a unix: address", d.addr)
	}
	return d
}

// kill ends the daemon with SIGKILL if it still runs, and waits for it.
func (d *daemonProc) kill() {
	select {
	case <-d.done:
		return
	default:
	}
	_ = d.cmd.Process.Signal(syscall.SIGKILL)
	<-d.done
}

// stop sends sig and waits for the daemon to exit.
func (d *daemonProc) stop(sig syscall.Signal) {
	d.t.Helper()
	if err := d.cmd.Process.Signal(sig); err != nil {
		d.t.Fatalf("signal mixd: %v", err)
	}
	select {
	case <-d.done:
	case <-time.After(30 * time.Second):
		d.t.Fatalf("mixd did not exit within 30s of %v\n%s", sig, d.log.String())
	}
}

// client dials the daemon.
func (d *daemonProc) client(opts ...mixdclient.Option) *mixdclient.Client {
	d.t.Helper()
	c, err := mixdclient.Dial(d.addr, opts...)
	if err != nil {
		d.t.Fatal(err)
	}
	d.t.Cleanup(func() { _ = c.Close() })
	return c
}

// mixctl runs the mixctl binary against the daemon and returns its exit
// code, standard output and standard error.
func (d *daemonProc) mixctl(stdin string, args ...string) (int, string, string) {
	d.t.Helper()
	cmd := exec.Command(bin(d.t, "mixctl"), append([]string{"--addr", d.addr}, args...)...)
	cmd.Dir = "../.." // the repository root, as in the quickstart
	cmd.Stdin = strings.NewReader(stdin)
	var out, errb bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errb
	err := cmd.Run()
	code := 0
	var ee *exec.ExitError
	switch {
	case errors.As(err, &ee):
		code = ee.ExitCode()
	case err != nil:
		d.t.Fatalf("run mixctl: %v", err)
	}
	return code, out.String(), errb.String()
}

// mustMixctl runs mixctl and fails the test unless it exits 0.
func (d *daemonProc) mustMixctl(args ...string) string {
	d.t.Helper()
	code, out, errOut := d.mixctl("", args...)
	if code != 0 {
		d.t.Fatalf("mixctl %s: exit %d\nstderr: %s", strings.Join(args, " "), code, errOut)
	}
	return out
}

// children returns the process ids whose parent is pid, by scanning
// /proc/*/stat (field 4 is the parent id).
func children(pid int) []int {
	ents, err := os.ReadDir("/proc")
	if err != nil {
		return nil
	}
	var out []int
	for _, e := range ents {
		id, err := strconv.Atoi(e.Name())
		if err != nil {
			continue
		}
		b, err := os.ReadFile(filepath.Join("/proc", e.Name(), "stat"))
		if err != nil {
			continue
		}
		s := string(b)
		i := strings.LastIndexByte(s, ')')
		if i < 0 {
			continue
		}
		f := strings.Fields(s[i+1:])
		if len(f) < 2 {
			continue
		}
		if ppid, _ := strconv.Atoi(f[1]); ppid == pid && f[0] != "Z" {
			out = append(out, id)
		}
	}
	return out
}

// alive reports whether pid is a live (not zombie) process.
func alive(pid int) bool {
	b, err := os.ReadFile(fmt.Sprintf("/proc/%d/stat", pid))
	if err != nil {
		return false
	}
	s := string(b)
	i := strings.LastIndexByte(s, ')')
	return i >= 0 && !strings.HasPrefix(strings.TrimSpace(s[i+1:]), "Z")
}

// waitGone waits until none of pids is alive.
func waitGone(t *testing.T, pids []int, within time.Duration) {
	t.Helper()
	deadline := time.Now().Add(within)
	for {
		var left []int
		for _, p := range pids {
			if alive(p) {
				left = append(left, p)
			}
		}
		if len(left) == 0 {
			return
		}
		if time.Now().After(deadline) {
			for _, p := range left {
				_ = syscall.Kill(p, syscall.SIGKILL) // do not leave them behind
			}
			t.Fatalf("plugin processes %v still alive %v after the daemon exited", left, within)
		}
		time.Sleep(50 * time.Millisecond)
	}
}

// repoFile returns the path of a file in the repository.
func repoFile(parts ...string) string {
	return filepath.Join(append([]string{"..", ".."}, parts...)...)
}

// pumps reads testdata/pumps/stations.csv.
func pumps(t *testing.T) (mixdclient.Matrix, []string) {
	t.Helper()
	b, err := os.ReadFile(repoFile("testdata", "pumps", "stations.csv"))
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSpace(string(b)), "\n")
	header := strings.Split(lines[0], ",")
	m := mixdclient.Matrix{Cols: len(header)}
	for _, l := range lines[1:] {
		for _, f := range strings.Split(l, ",") {
			v, err := strconv.ParseFloat(f, 64)
			if err != nil {
				t.Fatal(err)
			}
			m.Values = append(m.Values, v)
		}
		m.Rows++
	}
	return m, header
}

// faultRows returns the 1-based rows labelled as faults in labels.csv.
func faultRows(t *testing.T) map[int]string {
	t.Helper()
	b, err := os.ReadFile(repoFile("testdata", "pumps", "labels.csv"))
	if err != nil {
		t.Fatal(err)
	}
	out := map[int]string{}
	for _, l := range strings.Split(strings.TrimSpace(string(b)), "\n")[1:] {
		f := strings.Split(l, ",")
		if f[2] == "1" {
			row, _ := strconv.Atoi(f[0])
			out[row] = f[1]
		}
	}
	return out
}

// uniformData returns rows×cols values uniform in [0, 1): data without
// cluster structure, on which EM converges slowly (for long fits).
func uniformData(rows, cols int, seed uint64) mixdclient.Matrix {
	rng := rand.New(rand.NewPCG(seed, 1))
	m := mixdclient.Matrix{Rows: rows, Cols: cols, Values: make([]float64, rows*cols)}
	for i := range m.Values {
		m.Values[i] = rng.Float64()
	}
	return m
}

// longFit are options for a fit that runs far longer than any test waits.
var longFit = mixdclient.FitOptions{Components: 8, Seed: 1, MaxIterations: 100000, Tolerance: 1e-300, Restarts: 1000}

// startLongFit starts a long fit and waits for its first progress event.
// The returned channel yields the fit's error.
func startLongFit(t *testing.T, c *mixdclient.Client, model string) <-chan error {
	t.Helper()
	progressed := make(chan struct{})
	var once sync.Once
	errc := make(chan error, 1)
	go func() {
		_, err := c.Fit(context.Background(), model, uniformData(50000, 4, 3), longFit,
			func(*mixdv1.FitProgress) { once.Do(func() { close(progressed) }) })
		errc <- err
	}()
	select {
	case <-progressed:
	case err := <-errc:
		t.Fatalf("long fit ended before its first progress event: %v", err)
	case <-time.After(60 * time.Second):
		t.Fatal("no progress from the long fit within 60s")
	}
	return errc
}

// close reports whether got equals want within 1e-12, relative to the size
// of want (absolute below 1).
func closeTo(got, want float64) bool {
	return math.Abs(got-want) <= 1e-12*math.Max(1, math.Abs(want))
}

func checkClose(t *testing.T, what string, got, want []float64) {
	t.Helper()
	if len(got) != len(want) {
		t.Fatalf("%s: %d values, want %d", what, len(got), len(want))
	}
	for i := range got {
		if !closeTo(got[i], want[i]) {
			t.Fatalf("%s[%d] = %.17g, in-process model gives %.17g", what, i, got[i], want[i])
		}
	}
}

// inProcess rebuilds the served model from the parameters the daemon
// returned.
func inProcess(t *testing.T, m *mixdv1.Model) *mixture.Model {
	t.Helper()
	p, err := pbconv.ParamsFromProto(m.GetParameters())
	if err != nil {
		t.Fatal(err)
	}
	mm, err := mixture.New(p)
	if err != nil {
		t.Fatal(err)
	}
	return mm
}

// TestPumpsDataReproducible checks that the committed demo data is what
// the committed generator writes.
func TestPumpsDataReproducible(t *testing.T) {
	dir := t.TempDir()
	labels := filepath.Join(dir, "labels.csv")
	cmd := exec.Command(bin(t, "pumpsgen"), "-seed", "7", "-rows", "3000", "-labels", labels)
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("generator: %v", err)
	}
	want, err := os.ReadFile(repoFile("testdata", "pumps", "stations.csv"))
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(out, want) {
		t.Error("testdata/pumps/stations.csv differs from the generator's output; regenerate it (see testdata/pumps/README.md)")
	}
	gotLabels, _ := os.ReadFile(labels)
	wantLabels, err := os.ReadFile(repoFile("testdata", "pumps", "labels.csv"))
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(gotLabels, wantLabels) {
		t.Error("testdata/pumps/labels.csv differs from the generator's output")
	}
}

// TestRoundTripMatchesInProcessModel fits through the daemon (over a Unix
// socket) and checks that everything the daemon computes with the stored
// model equals what the in-process model built from the returned
// parameters computes, to 1e-12, through the unary and streaming paths.
func TestRoundTripMatchesInProcessModel(t *testing.T) {
	d := startDaemon(t, t.TempDir(), true)
	c := d.client()
	ctx := context.Background()
	data, header := pumps(t)

	var events int
	model, err := c.Fit(ctx, "pumps", data, mixdclient.FitOptions{Components: 3, Seed: 7, FeatureNames: header},
		func(*mixdv1.FitProgress) { events++ })
	if err != nil {
		t.Fatal(err)
	}
	if events == 0 {
		t.Error("the fit reported no progress")
	}
	if model.GetName() != "models/pumps" || model.GetVersion() != 1 {
		t.Errorf("model %s version %d, want models/pumps version 1", model.GetName(), model.GetVersion())
	}
	if got := model.GetReport().GetTrainingRows(); got != int64(data.Rows) {
		t.Errorf("training_rows %d, want %d", got, data.Rows)
	}
	if !slices.Equal(model.GetParameters().GetFeatureNames(), header) {
		t.Errorf("feature names %v, want %v", model.GetParameters().GetFeatureNames(), header)
	}
	mm := inProcess(t, model)
	k := mm.K()

	// What the daemon stored is what it returned.
	stored, err := c.GetModel(ctx, "pumps", 0)
	if err != nil {
		t.Fatal(err)
	}
	if !proto.Equal(stored, model) {
		t.Error("GetModel differs from the model the fit returned")
	}

	wantLD := make([]float64, data.Rows)
	wantComp := make([]float64, data.Rows*k)
	wantPost := make([]float64, data.Rows*k)
	wantLabels := make([]int, data.Rows)
	wantMax := make([]float64, data.Rows)
	if err := mm.LogDensity(data.Values, wantLD); err != nil {
		t.Fatal(err)
	}
	if err := mm.ComponentLogDensity(data.Values, wantComp); err != nil {
		t.Fatal(err)
	}
	if err := mm.Posteriors(data.Values, nil, wantPost, nil); err != nil {
		t.Fatal(err)
	}
	if err := mm.Assign(data.Values, wantLabels, wantMax); err != nil {
		t.Fatal(err)
	}
	wantLL, err := mm.LogLikelihood(data.Values, nil)
	if err != nil {
		t.Fatal(err)
	}

	// The unary path (3000×3 fits in one message) and the streaming path
	// (a client whose chunks hold 100 rows).
	small := d.client(mixdclient.WithChunkBytes(100 * 3 * 8))
	for _, tc := range []struct {
		name string
		c    *mixdclient.Client
	}{{"unary", c}, {"stream", small}} {
		t.Run(tc.name, func(t *testing.T) {
			sr, err := tc.c.Score(ctx, "pumps", data, mixdclient.ScoreOptions{ComponentLogDensities: true})
			if err != nil {
				t.Fatal(err)
			}
			checkClose(t, "log_densities", sr.LogDensities, wantLD)
			checkClose(t, "component_log_densities", sr.ComponentLogDensities.Values, wantComp)
			if !closeTo(sr.LogLikelihood, wantLL) && math.Abs(sr.LogLikelihood-wantLL) > 1e-9*math.Abs(wantLL) {
				t.Errorf("log_likelihood %.17g, in-process %.17g", sr.LogLikelihood, wantLL)
			}
			if sr.Version != 1 || sr.Model != "models/pumps" {
				t.Errorf("scored by %s version %d", sr.Model, sr.Version)
			}
			// Percentiles against the empirical ranks of the training rows
			// themselves (the definition: the share of training rows with a
			// lower log-density). The stored grid has steps of at most 1%,
			// so interpolation stays within about one percentage point.
			order := make([]int, data.Rows)
			for i := range order {
				order[i] = i
			}
			sort.Slice(order, func(a, b int) bool { return wantLD[order[a]] < wantLD[order[b]] })
			for rank, i := range order {
				want := 100 * float64(rank) / float64(data.Rows-1)
				if p := sr.Percentiles[i]; p < 0 || p > 100 || math.Abs(p-want) > 1.5 {
					t.Fatalf("row %d: percentile %.3f, empirical rank gives %.3f", i+1, p, want)
				}
			}

			cr, err := tc.c.Classify(ctx, "pumps", data, mixdclient.ClassifyOptions{MinPosterior: 0.9, Posteriors: true})
			if err != nil {
				t.Fatal(err)
			}
			if !slices.Equal(cr.Components, wantLabels) {
				t.Fatal("components differ from the in-process assignment")
			}
			checkClose(t, "max_posteriors", cr.MaxPosteriors, wantMax)
			checkClose(t, "posteriors", cr.Posteriors.Values, wantPost)
			for i, ok := range cr.Confident {
				if ok != (wantMax[i] >= 0.9) {
					t.Fatalf("row %d: confident %v with max posterior %v and threshold 0.9", i+1, ok, wantMax[i])
				}
			}
		})
	}

	// Sample: unary (≤ 4096 rows) and streamed (more) both equal the
	// in-process sampler with the same seed.
	for _, n := range []int{500, 10000} {
		res, err := c.Sample(ctx, "pumps", n, mixdclient.SampleOptions{Seed: 11})
		if err != nil {
			t.Fatal(err)
		}
		wantX, wantK := mm.Sample(n, 11)
		checkClose(t, fmt.Sprintf("sample(%d) rows", n), res.Rows.Values, wantX)
		if !slices.Equal(res.Components, wantK) {
			t.Fatalf("sample(%d): components differ from the in-process sampler", n)
		}
	}

	// Export and import make a new version that serves the same values.
	doc, err := c.ExportModel(ctx, "pumps", 1)
	if err != nil {
		t.Fatal(err)
	}
	imp, err := c.ImportModel(ctx, doc, "pumps-copy")
	if err != nil {
		t.Fatal(err)
	}
	if imp.GetName() != "models/pumps-copy" || !proto.Equal(imp.GetParameters(), model.GetParameters()) {
		t.Errorf("imported %s with different parameters", imp.GetName())
	}
	sr, err := c.Score(ctx, "pumps-copy", data, mixdclient.ScoreOptions{})
	if err != nil {
		t.Fatal(err)
	}
	checkClose(t, "imported model log_densities", sr.LogDensities, wantLD)
}

// TestQuickstart runs the mixctl commands of the README quickstart against
// the pumps data and checks their exit codes and outputs.
func TestQuickstart(t *testing.T) {
	d := startDaemon(t, t.TempDir(), false)

	out := d.mustMixctl("fit", "--model", "pumps", "--components-range", "1:6", "--seed", "7", "testdata/pumps/stations.csv")
	for _, want := range []string{"models/pumps", "training rows", "3000", "choice of K"} {
		if !strings.Contains(out, want) {
			t.Errorf("fit output lacks %q:\n%s", want, out)
		}
	}
	out = d.mustMixctl("models")
	if !strings.Contains(out, "models/pumps") || !strings.HasPrefix(out, "MODEL") {
		t.Errorf("models output:\n%s", out)
	}
	d.mustMixctl("show", "pumps")
	jsonOut := d.mustMixctl("models", "--format", "json")
	var listed []struct {
		Name    string `json:"name"`
		Version string `json:"version"` // int64 travels as a string in protobuf JSON
	}
	if err := json.Unmarshal([]byte(jsonOut), &listed); err != nil || len(listed) != 1 ||
		listed[0].Name != "models/pumps" || listed[0].Version != "1" {
		t.Errorf("models --format json (%v):\n%s", err, jsonOut)
	}

	// classify: one line per row plus the header.
	out = d.mustMixctl("classify", "--model", "pumps", "--min-posterior", "0.9", "testdata/pumps/stations.csv")
	lines := strings.Split(strings.TrimSpace(out), "\n")
	if len(lines) != 3001 || lines[0] != "row,component,max_posterior,confident" {
		t.Fatalf("classify printed %d lines, header %q", len(lines), lines[0])
	}

	// score --below 1: the rows rarer than 99% of the training data. The
	// generator's fault readings lie far from every operating regime, so
	// most of them should be among those rows (a check of the demo data
	// and of the scores, not a claim about real pumps).
	out = d.mustMixctl("score", "--model", "pumps", "--with-input", "--below", "1", "testdata/pumps/stations.csv")
	lines = strings.Split(strings.TrimSpace(out), "\n")
	if lines[0] != "row,flow_lps,motor_current_a,vibration_mm_s,log_density,percentile" {
		t.Fatalf("score header %q", lines[0])
	}
	faults := faultRows(t)
	found := 0
	for _, l := range lines[1:] {
		row, _ := strconv.Atoi(strings.SplitN(l, ",", 2)[0])
		if _, ok := faults[row]; ok {
			found++
		}
	}
	if len(lines)-1 > 60 || found < 12 {
		t.Errorf("score --below 1 printed %d rows containing %d of the %d fault rows", len(lines)-1, found, len(faults))
	}

	// JSON lines.
	out = d.mustMixctl("score", "--model", "pumps", "--format", "jsonl", "--components", "testdata/pumps/stations.csv")
	if n := strings.Count(out, "\n"); n != 3000 || !strings.HasPrefix(out, `{"row":1,"log_density":`) {
		t.Errorf("score --format jsonl printed %d lines starting %.60q", n, out)
	}

	// sample: header of feature names plus component.
	out = d.mustMixctl("sample", "--model", "pumps", "--count", "5", "--seed", "3")
	lines = strings.Split(strings.TrimSpace(out), "\n")
	if len(lines) != 6 || lines[0] != "flow_lps,motor_current_a,vibration_mm_s,component" {
		t.Errorf("sample output:\n%s", out)
	}
	if again := d.mustMixctl("sample", "--model", "pumps", "--count", "5", "--seed", "3"); again != out {
		t.Error("sample with the same seed gave different rows")
	}

	d.mustMixctl("fitters")
	doc := filepath.Join(t.TempDir(), "pumps.json")
	d.mustMixctl("export", "pumps", "--output", doc)
	if out := d.mustMixctl("import", doc, "--name", "pumps-restored"); !strings.Contains(out, "models/pumps-restored version 1") {
		t.Errorf("import output %q", out)
	}
	if out := d.mustMixctl("versions", "pumps"); strings.Count(out, "models/pumps ") != 1 {
		t.Errorf("versions output:\n%s", out)
	}
	if out := d.mustMixctl("delete", "pumps-restored"); !strings.Contains(out, "deleted 1 version") {
		t.Errorf("delete output %q", out)
	}
	if code, _, errOut := d.mixctl("", "show", "pumps-restored"); code != 3 || !strings.Contains(errOut, "(NOT_FOUND)") {
		t.Errorf("show after delete: exit %d, %s", code, errOut)
	}
}

// TestDetachedJobs starts fits as jobs with mixctl, watches one to the end
// and cancels another.
func TestDetachedJobs(t *testing.T) {
	d := startDaemon(t, t.TempDir(), false)
	out := d.mustMixctl("fit", "--detach", "--model", "pumps", "--components", "3", "--seed", "7", "testdata/pumps/stations.csv")
	job := strings.TrimSpace(out)
	if !strings.HasPrefix(job, "fitJobs/") {
		t.Fatalf("fit --detach printed %q, want a job name", out)
	}
	code, out, errOut := d.mixctl("", "watch", job)
	if code != 0 || !strings.Contains(out, "models/pumps") {
		t.Fatalf("watch: exit %d\n%s\n%s", code, out, errOut)
	}
	if !strings.Contains(errOut, "iteration") {
		t.Errorf("watch showed no progress on stderr: %q", errOut)
	}
	if out := d.mustMixctl("job", job); !strings.Contains(out, "succeeded") {
		t.Errorf("job output:\n%s", out)
	}
	if out := d.mustMixctl("jobs"); !strings.Contains(out, job) {
		t.Errorf("jobs output:\n%s", out)
	}

	// A long fit, cancelled.
	c := d.client()
	long, err := c.StartFit(context.Background(), "slow", uniformData(50000, 4, 5), longFit)
	if err != nil {
		t.Fatal(err)
	}
	out = d.mustMixctl("cancel", long.GetName())
	if !strings.Contains(out, long.GetName()) {
		t.Errorf("cancel output %q", out)
	}
	code, _, errOut = d.mixctl("", "watch", "--quiet", long.GetName())
	if code != 7 {
		t.Errorf("watch of a cancelled job: exit %d, want 7\n%s", code, errOut)
	}
	if code, _, errOut := d.mixctl("", "cancel", long.GetName()); code != 8 {
		t.Errorf("cancelling an ended job: exit %d, want 8 (FAILED_PRECONDITION)\n%s", code, errOut)
	}
	if _, err := c.GetModel(context.Background(), "slow", 0); status.Code(err) != codes.NotFound {
		t.Errorf("a cancelled fit stored a model: %v", err)
	}

	// Ctrl-C on `mixctl fit` cancels the fit and exits 7.
	csvPath := filepath.Join(t.TempDir(), "uniform.csv")
	var b strings.Builder
	b.WriteString("a,b,c,d\n")
	u := uniformData(50000, 4, 9)
	for i := range u.Rows {
		r := u.Row(i)
		fmt.Fprintf(&b, "%v,%v,%v,%v\n", r[0], r[1], r[2], r[3])
	}
	if err := os.WriteFile(csvPath, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command(bin(t, "mixctl"), "--addr", d.addr, "fit", "--model", "interrupted", "--components", "8",
		"--max-iterations", "100000", "--tolerance", "1e-300", "--restarts", "1000", csvPath)
	stderr, err := cmd.StderrPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	sc := bufio.NewScanner(stderr)
	var seen []string
	for sc.Scan() {
		seen = append(seen, sc.Text())
		if strings.Contains(sc.Text(), "iteration") {
			break
		}
	}
	if err := cmd.Process.Signal(os.Interrupt); err != nil {
		t.Fatal(err)
	}
	go io.Copy(io.Discard, stderr)
	err = cmd.Wait()
	var ee *exec.ExitError
	if !errors.As(err, &ee) || ee.ExitCode() != 7 {
		t.Fatalf("mixctl fit after SIGINT: %v, want exit 7 (stderr so far %q)", err, seen)
	}
	t0 := time.Now()
	deadline := t0.Add(20 * time.Second)
	for {
		jobs, err := c.ListJobs(context.Background())
		if err != nil {
			t.Fatal(err)
		}
		state := mixdv1.FitJobState_FIT_JOB_STATE_UNSPECIFIED
		for _, j := range jobs {
			if j.GetModel() == "models/interrupted" {
				state = j.GetState()
			}
		}
		if state == mixdv1.FitJobState_FIT_JOB_STATE_CANCELLED {
			t.Logf("the interrupted fit's job was cancelled %v after mixctl exited", time.Since(t0).Round(time.Millisecond))
			break
		}
		if time.Now().After(deadline) {
			t.Fatalf("the interrupted fit's job is %v, want CANCELLED", state)
		}
		time.Sleep(100 * time.Millisecond)
	}
}

// snapshot is every stored model version, for checking that failed
// requests change nothing.
func snapshot(t *testing.T, c *mixdclient.Client) []*mixdv1.Model {
	t.Helper()
	ctx := context.Background()
	ms, err := c.ListModels(ctx)
	if err != nil {
		t.Fatal(err)
	}
	var all []*mixdv1.Model
	for _, m := range ms {
		vs, err := c.ListVersions(ctx, m.GetName())
		if err != nil {
			t.Fatal(err)
		}
		all = append(all, vs...)
	}
	return all
}

func sameModels(a, b []*mixdv1.Model) bool {
	return slices.EqualFunc(a, b, func(x, y *mixdv1.Model) bool { return proto.Equal(x, y) })
}

// TestErrorPaths checks the code and message of every kind of bad request
// and that none of them changes what is stored.
func TestErrorPaths(t *testing.T) {
	d := startDaemon(t, t.TempDir(), false, "--max-components", "50")
	c := d.client()
	svc := c.Service()
	ctx := context.Background()
	data, header := pumps(t)
	if _, err := c.Fit(ctx, "pumps", data, mixdclient.FitOptions{Components: 3, Seed: 7, FeatureNames: header}, nil); err != nil {
		t.Fatal(err)
	}
	done, err := c.StartFit(ctx, "pumps", data, mixdclient.FitOptions{Components: 2, Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := c.WatchJob(ctx, done.GetName(), nil, nil); err != nil {
		t.Fatal(err)
	}
	before := snapshot(t, c)
	if len(before) != 2 {
		t.Fatalf("%d stored versions, want 2", len(before))
	}

	good := mixdclient.Matrix{Rows: 2, Cols: 3, Values: []float64{40, 37, 2.3, 18, 22, 1.5}}
	fit := func(model string, m mixdclient.Matrix, o mixdclient.FitOptions) error {
		_, err := c.Fit(ctx, model, m, o, nil)
		return err
	}
	tiny := mixdclient.Matrix{Rows: 4, Cols: 1, Values: []float64{1, 1, 2, 2}}
	tests := []struct {
		name     string
		call     func() error
		code     codes.Code
		contains string
	}{
		{"get unknown model", func() error { _, err := c.GetModel(ctx, "nope", 0); return err }, codes.NotFound, "nope"},
		{"get unknown version", func() error { _, err := c.GetModel(ctx, "pumps", 99); return err }, codes.NotFound, "99"},
		{"score unknown model", func() error { _, err := c.Score(ctx, "nope", good, mixdclient.ScoreOptions{}); return err }, codes.NotFound, "nope"},
		{"score values do not match shape", func() error {
			_, err := svc.Score(ctx, &mixdv1.ScoreRequest{Model: "pumps", Rows: &mixdv1.Matrix{Rows: 2, Cols: 3, Values: []float64{1, 2, 3, 4, 5}}})
			return err
		}, codes.InvalidArgument, "rows"},
		{"score little_endian length", func() error {
			_, err := svc.Score(ctx, &mixdv1.ScoreRequest{Model: "pumps", Rows: &mixdv1.Matrix{Rows: 1, Cols: 3, LittleEndian: make([]byte, 20)}})
			return err
		}, codes.InvalidArgument, "rows"},
		{"score wrong width", func() error {
			_, err := c.Score(ctx, "pumps", mixdclient.Matrix{Rows: 1, Cols: 2, Values: []float64{1, 2}}, mixdclient.ScoreOptions{})
			return err
		}, codes.InvalidArgument, "cols"},
		{"score NaN", func() error {
			_, err := c.Score(ctx, "pumps", mixdclient.Matrix{Rows: 2, Cols: 3, Values: []float64{1, 2, 3, 4, math.NaN(), 6}}, mixdclient.ScoreOptions{})
			return err
		}, codes.InvalidArgument, "row"},
		{"score stream second chunk wrong width", func() error {
			st, err := svc.ScoreStream(ctx)
			if err != nil {
				return err
			}
			_ = st.Send(&mixdv1.ScoreStreamRequest{Model: "pumps", Rows: good.ToProto()})
			_ = st.Send(&mixdv1.ScoreStreamRequest{Rows: &mixdv1.Matrix{Rows: 1, Cols: 2, Values: []float64{1, 2}}})
			_ = st.CloseSend()
			for {
				if _, err := st.Recv(); err != nil {
					if err == io.EOF {
						return nil
					}
					return err
				}
			}
		}, codes.InvalidArgument, "cols"},
		{"classify min_posterior above 1", func() error {
			_, err := c.Classify(ctx, "pumps", good, mixdclient.ClassifyOptions{MinPosterior: 2})
			return err
		}, codes.InvalidArgument, "min_posterior"},
		{"sample negative count", func() error {
			_, err := svc.Sample(ctx, &mixdv1.SampleRequest{Model: "pumps", Count: -1})
			return err
		}, codes.InvalidArgument, "count"},
		{"sample unknown model", func() error { _, err := c.Sample(ctx, "nope", 3, mixdclient.SampleOptions{}); return err }, codes.NotFound, "nope"},
		{"fit unknown fitter", func() error { return fit("x", data, mixdclient.FitOptions{Fitter: "nosuch", Components: 2}) }, codes.InvalidArgument, "nosuch"},
		{"fit unknown option", func() error {
			return fit("x", data, mixdclient.FitOptions{Components: 2, Options: map[string]string{"zap": "1"}})
		}, codes.InvalidArgument, "zap"},
		{"fit bad option value", func() error {
			return fit("x", data, mixdclient.FitOptions{Components: 2, Options: map[string]string{"min_component_rows": "-3"}})
		}, codes.InvalidArgument, "min_component_rows"},
		{"fit bad model id", func() error { return fit("no/slash", data, mixdclient.FitOptions{Components: 2}) }, codes.InvalidArgument, "model"},
		{"fit NaN in data", func() error {
			bad := mixdclient.Matrix{Rows: 3, Cols: 1, Values: []float64{1, math.NaN(), 3}}
			return fit("x", bad, mixdclient.FitOptions{Components: 1})
		}, codes.InvalidArgument, "row"},
		{"fit negative tolerance", func() error { return fit("x", data, mixdclient.FitOptions{Components: 2, Tolerance: -1}) }, codes.InvalidArgument, "tolerance"},
		{"fit too many components", func() error { return fit("x", data, mixdclient.FitOptions{Components: 51}) }, codes.ResourceExhausted, "50"},
		{"fit family the fitter lacks", func() error {
			return fit("x", data, mixdclient.FitOptions{Components: 2, Family: mixdv1.Family_FAMILY_STUDENT_T})
		}, codes.Unimplemented, "student"},
		{"fit more components than distinct rows", func() error { return fit("x", tiny, mixdclient.FitOptions{Components: 3}) }, codes.FailedPrecondition, ""},
		{"fit feature names count", func() error {
			return fit("x", data, mixdclient.FitOptions{Components: 2, FeatureNames: []string{"a"}})
		}, codes.InvalidArgument, "feature_names"},
		{"fit expected rows mismatch", func() error {
			st, err := svc.Fit(ctx)
			if err != nil {
				return err
			}
			_ = st.Send(&mixdv1.FitRequest{Spec: &mixdv1.FitSpec{Model: "x", Components: 1, ExpectedRows: 10}, Chunk: &mixdv1.FitChunk{Data: good.ToProto()}})
			_ = st.CloseSend()
			for {
				if _, err := st.Recv(); err != nil {
					if err == io.EOF {
						return nil
					}
					return err
				}
			}
		}, codes.InvalidArgument, "expected_rows"},
		{"import garbage", func() error { _, err := c.ImportModel(ctx, []byte(`{"format":"something else"}`), ""); return err }, codes.InvalidArgument, "format"},
		{"delete unknown model", func() error { _, err := c.DeleteModel(ctx, "nope", 0); return err }, codes.NotFound, "nope"},
		{"delete unknown version", func() error { _, err := c.DeleteModel(ctx, "pumps", 42); return err }, codes.NotFound, "42"},
		{"unknown job", func() error { _, _, err := c.GetJob(ctx, "fitJobs/none"); return err }, codes.NotFound, "none"},
		{"cancel ended job", func() error { _, err := c.CancelJob(ctx, done.GetName()); return err }, codes.FailedPrecondition, ""},
		{"bad page token", func() error {
			_, err := svc.ListModels(ctx, &mixdv1.ListModelsRequest{PageToken: "garbage!"})
			return err
		}, codes.InvalidArgument, "page token"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			err := tt.call()
			st := mixdclient.StatusOf(err)
			if st.Code() != tt.code {
				t.Fatalf("code %v (%v), want %v", st.Code(), err, tt.code)
			}
			if !strings.Contains(strings.ToLower(st.Message()), strings.ToLower(tt.contains)) {
				t.Errorf("message %q does not name %q", st.Message(), tt.contains)
			}
		})
	}
	if after := snapshot(t, c); !sameModels(before, after) {
		t.Fatalf("failed requests changed the store: %d versions before, %d after", len(before), len(after))
	}

	// The same through mixctl: exit codes and the daemon's message.
	dir := t.TempDir()
	twoCols := filepath.Join(dir, "two.csv")
	if err := os.WriteFile(twoCols, []byte("a,b\n1,2\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	cli := []struct {
		args     []string
		code     int
		contains string
	}{
		{[]string{"show", "nope"}, 3, "(NOT_FOUND)"},
		{[]string{"show", "pumps", "--version", "99"}, 3, "(NOT_FOUND)"},
		{[]string{"score", "--model", "nope", twoCols}, 3, "(NOT_FOUND)"},
		{[]string{"score", "--model", "pumps", twoCols}, 4, "has 2 columns, the model has 3 features"},
		{[]string{"score", "--model", "pumps", "--version", "1", twoCols}, 4, `no column named "flow_lps"`},
		{[]string{"fit", "--model", "x", "--fitter", "nosuch", "--components", "2", "testdata/pumps/stations.csv"}, 4, "nosuch"},
		{[]string{"fit", "--model", "x", "--components", "2", "--option", "zap=1", "testdata/pumps/stations.csv"}, 4, "zap"},
		{[]string{"fit", "--model", "x", "--components", "2", "--family", "student_t", "testdata/pumps/stations.csv"}, 10, "(UNIMPLEMENTED)"},
		{[]string{"fit", "--model", "x", "testdata/pumps/stations.csv"}, 2, "--components"},
		{[]string{"fit", "--model", "x", "--components", "51", "testdata/pumps/stations.csv"}, 9, "(RESOURCE_EXHAUSTED)"},
		{[]string{"delete", "nope"}, 3, "(NOT_FOUND)"},
		{[]string{"job", "none"}, 3, "(NOT_FOUND)"},
		{[]string{"import", twoCols}, 4, "(INVALID_ARGUMENT)"},
	}
	for _, tt := range cli {
		code, out, errOut := d.mixctl("", tt.args...)
		if code != tt.code || !strings.Contains(errOut, tt.contains) {
			t.Errorf("mixctl %s: exit %d, stderr %q; want exit %d and %q", strings.Join(tt.args, " "), code, errOut, tt.code, tt.contains)
		}
		if out != "" {
			t.Errorf("mixctl %s wrote %q to stdout", strings.Join(tt.args, " "), out)
		}
	}
	if after := snapshot(t, c); !sameModels(before, after) {
		t.Fatal("failed mixctl commands changed the store")
	}
}

// TestFitterKilledDuringFit kills the fitter process with SIGKILL while it
// fits: that fit fails with UNAVAILABLE, the daemon stays up, and the next
// fit (in a relaunched fitter) succeeds.
func TestFitterKilledDuringFit(t *testing.T) {
	d := startDaemon(t, t.TempDir(), false)
	c := d.client()
	errc := startLongFit(t, c, "doomed")
	kids := children(d.cmd.Process.Pid)
	if len(kids) == 0 {
		t.Fatal("no child process of the daemon while a fit runs")
	}
	for _, p := range kids {
		if err := syscall.Kill(p, syscall.SIGKILL); err != nil {
			t.Fatalf("kill fitter %d: %v", p, err)
		}
	}
	select {
	case err := <-errc:
		if status.Code(err) != codes.Unavailable {
			t.Fatalf("fit with a killed fitter: %v, want UNAVAILABLE", err)
		}
		if msg := mixdclient.StatusOf(err).Message(); len(msg) < 10 {
			t.Errorf("unhelpful message %q", msg)
		}
	case <-time.After(30 * time.Second):
		t.Fatal("the fit did not end within 30s of its fitter being killed")
	}
	waitGone(t, kids, 5*time.Second)
	select {
	case <-d.done:
		t.Fatalf("the daemon exited: %v", d.waitErr)
	default:
	}
	if _, err := c.GetModel(context.Background(), "doomed", 0); status.Code(err) != codes.NotFound {
		t.Errorf("the failed fit stored a model: %v", err)
	}
	data, _ := pumps(t)
	m, err := c.Fit(context.Background(), "pumps", data, mixdclient.FitOptions{Components: 3, Seed: 7}, nil)
	if err != nil {
		t.Fatalf("fit after the crash: %v", err)
	}
	if m.GetVersion() != 1 {
		t.Errorf("version %d", m.GetVersion())
	}
}

// TestRestartKeepsModels stops the daemon and starts a new one on the same
// data directory: every model version is still there and serves the same
// values.
func TestRestartKeepsModels(t *testing.T) {
	dataDir := t.TempDir()
	d := startDaemon(t, dataDir, false)
	c := d.client()
	ctx := context.Background()
	data, header := pumps(t)
	for _, k := range []int{2, 3} {
		if _, err := c.Fit(ctx, "pumps", data, mixdclient.FitOptions{Components: k, Seed: 7, FeatureNames: header}, nil); err != nil {
			t.Fatal(err)
		}
	}
	if _, err := c.Fit(ctx, "other", data, mixdclient.FitOptions{Components: 1, Seed: 1}, nil); err != nil {
		t.Fatal(err)
	}
	before := snapshot(t, c)
	scoreBefore, err := c.Score(ctx, "pumps", data, mixdclient.ScoreOptions{Version: 1})
	if err != nil {
		t.Fatal(err)
	}
	d.stop(syscall.SIGTERM)

	d2 := startDaemon(t, dataDir, true)
	c2 := d2.client()
	after := snapshot(t, c2)
	if len(after) != 3 || !sameModels(before, after) {
		t.Fatalf("after restart: %d versions, equal %v", len(after), sameModels(before, after))
	}
	scoreAfter, err := c2.Score(ctx, "pumps", data, mixdclient.ScoreOptions{Version: 1})
	if err != nil {
		t.Fatal(err)
	}
	checkClose(t, "log-densities after restart", scoreAfter.LogDensities, scoreBefore.LogDensities)
	checkClose(t, "percentiles after restart", scoreAfter.Percentiles, scoreBefore.Percentiles)
	// Versions continue after the restart.
	m, err := c2.Fit(ctx, "pumps", data, mixdclient.FitOptions{Components: 2, Seed: 8}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if m.GetVersion() != 3 {
		t.Errorf("new fit after restart got version %d, want 3", m.GetVersion())
	}
}

// TestNoOrphanPlugins ends the daemon while a fitter process works, by
// SIGTERM, SIGINT and SIGKILL, and checks that the fitter process goes too.
func TestNoOrphanPlugins(t *testing.T) {
	for _, sig := range []syscall.Signal{syscall.SIGTERM, syscall.SIGINT, syscall.SIGKILL} {
		t.Run(sig.String(), func(t *testing.T) {
			d := startDaemon(t, t.TempDir(), false)
			c := d.client()
			errc := startLongFit(t, c, "long")
			kids := children(d.cmd.Process.Pid)
			if len(kids) == 0 {
				t.Fatal("no child process of the daemon while a fit runs")
			}
			d.stop(sig)
			if sig != syscall.SIGKILL {
				if err := d.waitErr; err != nil {
					t.Errorf("daemon exit after %v: %v", sig, err)
				}
			}
			waitGone(t, kids, 5*time.Second)
			select {
			case err := <-errc:
				if err == nil {
					t.Error("the long fit succeeded although the daemon stopped")
				}
			case <-time.After(10 * time.Second):
				t.Error("the client's fit did not end after the daemon stopped")
			}
		})
	}
}

// TestLargeFit fits 1 000 000 × 32 rows through the streaming upload. It
// needs MIXD_LARGE=1 (a separate CI step without the race detector).
func TestLargeFit(t *testing.T) {
	if os.Getenv("MIXD_LARGE") != "1" {
		t.Skip("set MIXD_LARGE=1 to fit 1 000 000 × 32 rows")
	}
	d := startDaemon(t, t.TempDir(), false)
	c := d.client()
	const rows, cols = 1_000_000, 32
	rng := rand.New(rand.NewPCG(42, 42))
	data := mixdclient.Matrix{Rows: rows, Cols: cols, Values: make([]float64, rows*cols)}
	for i := range rows {
		shift := 0.0
		if i%2 == 1 {
			shift = 5
		}
		for j := range cols {
			data.Values[i*cols+j] = shift + rng.NormFloat64()
		}
	}
	start := time.Now()
	m, err := c.Fit(context.Background(), "large", data, mixdclient.FitOptions{
		Components: 2, MaxIterations: 5, Restarts: 1, Seed: 1,
		Structure: mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_DIAGONAL,
	}, nil)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("fit of %d×%d rows took %v", rows, cols, time.Since(start))
	if got := m.GetReport().GetTrainingRows(); got != rows {
		t.Fatalf("training_rows %d, want %d", got, rows)
	}
	if d := m.GetParameters().GetDimension(); d != cols {
		t.Fatalf("dimension %d, want %d", d, cols)
	}
	// Score the whole batch back through ScoreStream.
	sr, err := c.Score(context.Background(), "large", data, mixdclient.ScoreOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if len(sr.LogDensities) != rows {
		t.Fatalf("%d log-densities for %d rows", len(sr.LogDensities), rows)
	}
	mm := inProcess(t, m)
	want := make([]float64, 1000)
	if err := mm.LogDensity(data.Values[:1000*cols], want); err != nil {
		t.Fatal(err)
	}
	checkClose(t, "first 1000 log-densities", sr.LogDensities[:1000], want)
}

// TestOtherFittersEndToEnd fits the pump-station data by name with the
// variational and Student-t fitters over RPC (each runs as its own plugin
// process) and checks that the daemon serves the result exactly as the
// in-process model computes it. For the t mixture, Score's outlier flags
// follow the model's rule, and the training rows it flags are the 15 fault
// rows of testdata/pumps/labels.csv (the generator's own labels).
func TestOtherFittersEndToEnd(t *testing.T) {
	d := startDaemon(t, t.TempDir(), false)
	c := d.client()
	ctx := context.Background()
	data, header := pumps(t)
	faults := faultRows(t)

	for _, tc := range []struct {
		fitter     string
		components int
		family     mixture.Family
	}{
		{"vb", 6, mixture.StudentT}, // unset family: vb serves its predictive Student-t mixture
		{"tmix", 3, mixture.StudentT},
	} {
		t.Run(tc.fitter, func(t *testing.T) {
			model, err := c.Fit(ctx, "pumps-"+tc.fitter, data,
				mixdclient.FitOptions{Fitter: tc.fitter, Components: tc.components, Seed: 7, FeatureNames: header}, nil)
			if err != nil {
				t.Fatal(err)
			}
			if got := model.GetReport().GetFitter(); got != tc.fitter {
				t.Errorf("report fitter %q, want %q", got, tc.fitter)
			}
			mm := inProcess(t, model)
			if mm.Family() != tc.family {
				t.Fatalf("served family %s, want %s", mm.Family(), tc.family)
			}
			k := mm.K()
			wantLD := make([]float64, data.Rows)
			wantPost := make([]float64, data.Rows*k)
			if err := mm.LogDensity(data.Values, wantLD); err != nil {
				t.Fatal(err)
			}
			if err := mm.Posteriors(data.Values, nil, wantPost, nil); err != nil {
				t.Fatal(err)
			}
			sc, err := c.Score(ctx, model.GetName(), data, mixdclient.ScoreOptions{})
			if err != nil {
				t.Fatal(err)
			}
			checkClose(t, "log-density", sc.LogDensities, wantLD)
			cl, err := c.Classify(ctx, model.GetName(), data, mixdclient.ClassifyOptions{Posteriors: true})
			if err != nil {
				t.Fatal(err)
			}
			checkClose(t, "posteriors", cl.Posteriors.Values, wantPost)
			smp, err := c.Sample(ctx, model.GetName(), 500, mixdclient.SampleOptions{Seed: 11})
			if err != nil {
				t.Fatal(err)
			}
			wantX, wantLabels := mm.Sample(500, 11)
			checkClose(t, "sample", smp.Rows.Values, wantX)
			if !slices.Equal(smp.Components, wantLabels) {
				t.Error("sampled components differ from the in-process sampler's")
			}

			// Student-t models: the outlier statistic and flag of every row.
			level := model.GetReport().GetOutlierLevel()
			if level == 0 {
				level = mixture.DefaultOutlierLevel
			}
			wantStat := make([]float64, data.Rows)
			wantFlag := make([]bool, data.Rows)
			if err := mm.Outliers(data.Values, level, wantStat, wantFlag); err != nil {
				t.Fatal(err)
			}
			checkClose(t, "outlier statistic", sc.OutlierStatistics, wantStat)
			if !slices.Equal(sc.Outliers, wantFlag) {
				t.Fatal("outlier flags differ from the in-process rule")
			}
			if tc.fitter != "tmix" {
				return
			}
			var flagged []int
			for i, f := range sc.Outliers {
				if f {
					flagged = append(flagged, i+1)
				}
			}
			if int64(len(flagged)) != model.GetReport().GetFlaggedRows() {
				t.Errorf("Score flags %d training rows, the fit report %d", len(flagged), model.GetReport().GetFlaggedRows())
			}
			for _, row := range flagged {
				if _, ok := faults[row]; !ok {
					t.Errorf("row %d flagged but is not a fault row", row)
				}
			}
			if len(flagged) != len(faults) {
				t.Errorf("%d rows flagged, want the %d fault rows", len(flagged), len(faults))
			}
		})
	}
}
