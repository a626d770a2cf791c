package fitterhost

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"log/slog"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/builtin"
	"github.com/mixd-dev/mixd/fitters/mixture"
	"github.com/mixd-dev/mixd/fitters/pbconv"
)

// TestMain lets the test binary play three parts:
//
//	<test binary> fitter <name> [version]   a fitter plugin (the built-in
//	                                         fitters, or the fake below)
//	<test binary> host-helper <dir>          a host that starts the fake and
//	                                         runs a fit that never ends
//	<test binary> [test flags]               the tests
func TestMain(m *testing.M) {
	if len(os.Args) >= 3 && os.Args[1] == "fitter" {
		if f, ok := builtin.New(os.Args[2]); ok {
			fitters.Serve(f)
			os.Exit(0)
		}
		version := "1.0.0"
		if len(os.Args) >= 4 {
			version = os.Args[3]
		}
		fitters.Serve(&fake{name: os.Args[2], version: version})
		os.Exit(0)
	}
	if len(os.Args) == 3 && os.Args[1] == "host-helper" {
		os.Exit(runHostHelper(os.Args[2]))
	}
	// Plugin processes built with -race would otherwise pause a second
	// when they exit (the race runtime's atexit_sleep_ms default).
	if g := os.Getenv("GORACE"); !strings.Contains(g, "atexit_sleep_ms") {
		os.Setenv("GORACE", strings.TrimSpace(g+" atexit_sleep_ms=0"))
	}
	os.Exit(m.Run())
}

// runHostHelper starts a host in this process, starts a fit that blocks in
// the fake plugin (which writes its process id to dir/plugin.pid), and waits
// to be killed.
func runHostHelper(dir string) int {
	exe, err := os.Executable()
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		return 1
	}
	h, err := New(Config{SelfExecutable: exe, BuiltIn: []string{"fake"}, Logger: slog.New(slog.NewTextHandler(os.Stderr, nil))})
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		return 1
	}
	_, err = h.Fit(context.Background(), "fake", pumpData(10), fitters.Settings{Options: map[string]string{
		"mode": "block", "pidfile": filepath.Join(dir, "plugin.pid")}}, nil)
	fmt.Fprintln(os.Stderr, "host helper: fit ended:", err)
	return 1
}

// fake is the fitter the plugin processes of these tests serve. What it does
// is chosen by Settings.Options:
//
//	mode=fit (default)  fits K=1 by weighted moments; Notes[0] is a checksum
//	                    of every value, weight and label received; Report.
//	                    Settings["pid"] is the plugin's process id
//	mode=block          reports one progress event, then waits for its
//	                    context to end; writes the file named by "marker"
//	                    when it sees that
//	mode=progress       reports "events" progress events, then fits
//	mode=fail           returns an error with Code "code" and text "message"
//	pidfile=PATH        writes the process id to PATH first
type fake struct{ name, version string }

func (f *fake) Describe(context.Context) (fitters.Info, error) {
	return fitters.Info{
		Name: f.name, Version: f.version, Description: "moment-matching test fitter",
		Families: []mixture.Family{mixture.Gaussian}, Structures: []mixture.Structure{mixture.Full},
	}, nil
}

func (f *fake) Fit(ctx context.Context, d fitters.Data, s fitters.Settings, progress func(fitters.Progress)) (*fitters.Result, error) {
	if path := s.Options["pidfile"]; path != "" {
		if err := writeFileAtomic(path, strconv.Itoa(os.Getpid())); err != nil {
			return nil, err
		}
	}
	switch s.Options["mode"] {
	case "block":
		progress(fitters.Progress{Iteration: 1})
		<-ctx.Done()
		if path := s.Options["marker"]; path != "" {
			_ = writeFileAtomic(path, "context ended: "+ctx.Err().Error())
		}
		return nil, fitters.ContextError(ctx)
	case "fail":
		code, _ := strconv.Atoi(s.Options["code"])
		return nil, fitters.Errorf(fitters.Code(code), "%s", s.Options["message"])
	case "progress":
		n, _ := strconv.Atoi(s.Options["events"])
		start := time.Now()
		for i := 1; i <= n; i++ {
			progress(fitters.Progress{Components: 1, Iteration: i, Objective: -float64(n - i), Elapsed: time.Since(start)})
		}
	}
	if d.Rows == 0 {
		return nil, fitters.Errorf(fitters.InvalidArgument, "no rows")
	}
	return &fitters.Result{
		Params: moments(d),
		Report: fitters.Report{
			Iterations: 1, Converged: true, Objective: "log_likelihood",
			Notes:    []string{checksum(d, s.Labels)},
			Settings: map[string]string{"pid": strconv.Itoa(os.Getpid())},
		},
	}, nil
}

// moments is the K=1 Gaussian with the weighted mean and covariance of d.
func moments(d fitters.Data) mixture.Params {
	mean := make([]float64, d.Cols)
	cov := make([]float64, d.Cols*d.Cols)
	weight := func(i int) float64 {
		if d.Weights == nil {
			return 1
		}
		return d.Weights[i]
	}
	var total float64
	for i := 0; i < d.Rows; i++ {
		total += weight(i)
		for j, v := range d.Row(i) {
			mean[j] += weight(i) * v
		}
	}
	for j := range mean {
		mean[j] /= total
	}
	for i := 0; i < d.Rows; i++ {
		row := d.Row(i)
		for a := range row {
			for b := range row {
				cov[a*d.Cols+b] += weight(i) * (row[a] - mean[a]) * (row[b] - mean[b]) / total
			}
		}
	}
	return mixture.Params{Dim: d.Cols, Family: mixture.Gaussian, Structure: mixture.Full,
		Components: []mixture.Component{{Weight: 1, Mean: mean, Cov: cov}}}
}

// checksum identifies exactly what a fitter received.
func checksum(d fitters.Data, labels []int) string {
	h := sha256.New()
	fmt.Fprintf(h, "%d×%d;", d.Rows, d.Cols)
	h.Write(pbconv.EncodeFloat64s(d.Values))
	h.Write([]byte{';'})
	h.Write(pbconv.EncodeFloat64s(d.Weights))
	h.Write([]byte{';'})
	for _, l := range labels {
		fmt.Fprintf(h, "%d,", l)
	}
	return fmt.Sprintf("rows=%d sha256=%s", d.Rows, hex.EncodeToString(h.Sum(nil)))
}

func writeFileAtomic(path, content string) error {
	tmp := path + ".tmp"
	if err := os.WriteFile(tmp, []byte(content), 0o644); err != nil {
		return err
	}
	return os.Rename(tmp, path)
}
