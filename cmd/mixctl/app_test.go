package main

import (
	"bytes"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"math"
	"net"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"testing"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/types/known/durationpb"

	mixdclient "github.com/mixd-dev/mixd/clients/go"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

func noEnv(string) string { return "" }

// runCLI runs mixctl in-process and returns its exit code and outputs.
func runCLI(t *testing.T, stdin string, args ...string) (int, string, string) {
	t.Helper()
	var out, errb bytes.Buffer
	code := run(args, strings.NewReader(stdin), &out, &errb, noEnv)
	return code, out.String(), errb.String()
}

func TestParseInterleaved(t *testing.T) {
	tests := []struct {
		args     []string
		wantPos  []string
		wantName string
	}{
		{[]string{"--model", "a", "f.csv"}, []string{"f.csv"}, "a"},
		{[]string{"f.csv", "--model", "b"}, []string{"f.csv"}, "b"},
		{[]string{"--model=c", "--", "--odd.csv"}, []string{"--odd.csv"}, "c"},
		{[]string{"x", "--model", "d", "y"}, []string{"x", "y"}, "d"},
	}
	for _, tt := range tests {
		fs := flag.NewFlagSet("t", flag.ContinueOnError)
		fs.SetOutput(&bytes.Buffer{})
		name := fs.String("model", "", "")
		pos, err := parse(fs, tt.args, 0, -1)
		if err != nil {
			t.Fatalf("%v: %v", tt.args, err)
		}
		if !slices.Equal(pos, tt.wantPos) || *name != tt.wantName {
			t.Errorf("%v: pos %v model %q, want %v %q", tt.args, pos, *name, tt.wantPos, tt.wantName)
		}
	}
}

func TestUsageErrorsExit2(t *testing.T) {
	dir := t.TempDir()
	csvPath := filepath.Join(dir, "d.csv")
	if err := os.WriteFile(csvPath, []byte("a,b\n1,2\n3,4\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	tests := [][]string{
		{},
		{"frobnicate"},
		{"fit"},
		{"fit", csvPath}, // no --model
		{"fit", "--model", "m", csvPath, "extra"}, // too many args
		{"fit", "--model", "m", csvPath},          // neither --components nor a range
		{"fit", "--model", "m", "--components", "2", "--components-range", "1:3", csvPath},
		{"fit", "--model", "m", "--components-range", "3:1", csvPath},
		{"fit", "--model", "m", "--structure", "banded", csvPath},
		{"fit", "--model", "m", "--family", "cauchy", csvPath},
		{"fit", "--model", "m", "--criterion", "bic", csvPath}, // needs a range
		{"fit", "--model", "m", "--option", "novalue", csvPath},
		{"fit", "--model", "m", "--no-such-flag", csvPath},
		{"score", "--model", "m", "--format", "xml", csvPath},
		{"score", "--model", "m", "--below", "120", csvPath},
		{"classify", "--model", "m", "--min-posterior", "1.5", csvPath},
		{"sample", "--model", "m"},
		{"sample", "--count", "3"},
		{"show"},
		{"models", "--format", "yaml"},
		{"help", "nope"},
		{"--timeout", "soon", "models"},
	}
	for _, args := range tests {
		code, out, errOut := runCLI(t, "", args...)
		if code != exitUsage {
			t.Errorf("mixctl %v: exit %d, want %d (stderr %q)", args, code, exitUsage, errOut)
		}
		if out != "" && len(args) > 0 {
			t.Errorf("mixctl %v wrote to stdout: %q", args, out)
		}
		if !strings.HasPrefix(errOut, "mixctl: ") && len(args) > 0 {
			t.Errorf("mixctl %v: stderr %q does not start with the program name", args, errOut)
		}
	}
}

func TestBadInputExit4(t *testing.T) {
	dir := t.TempDir()
	write := func(name, body string) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, []byte(body), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	tests := []struct {
		path, want string
	}{
		{write("nan.csv", "flow,current\n1,2\nNaN,3\n"), "line 3, column flow"},
		{write("word.csv", "flow,current\n1,2\n4,high\n"), `line 3, column current: "high" is not a number`},
		{write("ragged.csv", "flow,current\n1,2\n3\n"), "line 3 has a different number of fields"},
		{write("nohdr.csv", "1,2\n3,4\n"), "needs a header row"},
		{write("dup.csv", "a,a\n1,2\n"), `names column "a" twice`},
		{write("empty.csv", ""), "empty file"},
		{filepath.Join(dir, "missing.csv"), "no such file"},
	}
	for _, tt := range tests {
		code, _, errOut := runCLI(t, "", "--addr", "127.0.0.1:1", "fit", "--model", "m", tt.path)
		if code != exitInvalid {
			t.Errorf("%s: exit %d, want %d (%s)", tt.path, code, exitInvalid, errOut)
		}
		if !strings.Contains(errOut, tt.want) {
			t.Errorf("%s: stderr %q does not contain %q", tt.path, errOut, tt.want)
		}
	}
	// Standard input works as a file and names itself in messages.
	code, _, errOut := runCLI(t, "x,y\n1,oops\n", "--addr", "127.0.0.1:1", "fit", "--model", "m", "-")
	if code != exitInvalid || !strings.Contains(errOut, "standard input: line 2, column y") {
		t.Errorf("stdin: exit %d, stderr %q", code, errOut)
	}
}

func TestUnreachableDaemonExit5(t *testing.T) {
	code, _, errOut := runCLI(t, "", "--addr", "127.0.0.1:1", "models")
	if code != exitUnavailable {
		t.Fatalf("exit %d, want %d (%s)", code, exitUnavailable, errOut)
	}
	if !strings.Contains(errOut, "cannot reach mixd at 127.0.0.1:1") || !strings.Contains(errOut, "(UNAVAILABLE)") {
		t.Errorf("stderr %q", errOut)
	}
	// MIXD_ADDR is the default address; --addr after the command overrides it.
	var out, errb bytes.Buffer
	env := func(k string) string {
		if k == "MIXD_ADDR" {
			return "127.0.0.1:2"
		}
		return ""
	}
	if code := run([]string{"models"}, nil, &out, &errb, env); code != exitUnavailable || !strings.Contains(errb.String(), "127.0.0.1:2") {
		t.Errorf("MIXD_ADDR: exit %d, stderr %q", code, errb.String())
	}
	errb.Reset()
	if code := run([]string{"models", "--addr", "127.0.0.1:3"}, nil, &out, &errb, env); code != exitUnavailable || !strings.Contains(errb.String(), "127.0.0.1:3") {
		t.Errorf("--addr after command: exit %d, stderr %q", code, errb.String())
	}
}

func TestExitCodes(t *testing.T) {
	tests := []struct {
		err  error
		want int
	}{
		{nil, exitOK},
		{usagef("x"), exitUsage},
		{inputf("x"), exitInvalid},
		{fmt.Errorf("wrapped: %w", status.Error(codes.NotFound, "model \"x\" not found")), exitNotFound},
		{status.Error(codes.InvalidArgument, "rows: bad"), exitInvalid},
		{status.Error(codes.OutOfRange, "x"), exitInvalid},
		{status.Error(codes.Unavailable, "fitter crashed"), exitUnavailable},
		{status.Error(codes.DeadlineExceeded, "x"), exitTimeout},
		{status.Error(codes.Canceled, "x"), exitCancelled},
		{status.Error(codes.FailedPrecondition, "x"), exitConflict},
		{status.Error(codes.AlreadyExists, "x"), exitConflict},
		{status.Error(codes.ResourceExhausted, "x"), exitLimit},
		{status.Error(codes.Unimplemented, "x"), exitUnsupported},
		{status.Error(codes.Unauthenticated, "x"), exitUnauthed},
		{status.Error(codes.PermissionDenied, "x"), exitDenied},
		{status.Error(codes.Internal, "x"), exitServer},
		{status.Error(codes.DataLoss, "x"), exitServer},
		{errors.New("write output: broken pipe"), exitServer},
		{&mixdclient.JobError{Job: &mixdv1.FitJob{State: mixdv1.FitJobState_FIT_JOB_STATE_CANCELLED}}, exitCancelled},
		{&mixdclient.JobError{Job: &mixdv1.FitJob{State: mixdv1.FitJobState_FIT_JOB_STATE_FAILED, ErrorCode: int32(codes.Unavailable)}}, exitUnavailable},
	}
	for _, tt := range tests {
		if got := exitCode(tt.err); got != tt.want {
			t.Errorf("exitCode(%v) = %d, want %d", tt.err, got, tt.want)
		}
	}
}

func TestErrorMessageIsTheDaemons(t *testing.T) {
	err := fmt.Errorf("mixdclient: score x: %w", status.Error(codes.InvalidArgument, "rows.cols: 2, the model has 3 features"))
	if got, want := errorMessage(err), "rows.cols: 2, the model has 3 features (INVALID_ARGUMENT)"; got != want {
		t.Errorf("errorMessage = %q, want %q", got, want)
	}
	if got := codeName(codes.FailedPrecondition); got != "FAILED_PRECONDITION" {
		t.Errorf("codeName = %q", got)
	}
	if got := codeName(codes.Canceled); got != "CANCELLED" {
		t.Errorf("codeName = %q", got)
	}
}

// TestExitCodesDocumented checks that doc.go and `mixctl help` list every
// exit code with the same text.
func TestExitCodesDocumented(t *testing.T) {
	doc, err := os.ReadFile("doc.go")
	if err != nil {
		t.Fatal(err)
	}
	_, help, _ := runCLI(t, "", "help")
	for _, line := range strings.Split(strings.TrimSpace(exitCodesHelp), "\n")[1:] {
		line = strings.TrimSpace(line)
		if !strings.Contains(string(doc), line) {
			t.Errorf("doc.go lacks the exit code line %q", line)
		}
		if !strings.Contains(help, line) {
			t.Errorf("mixctl help lacks the exit code line %q", line)
		}
	}
	for code := exitOK; code <= exitDenied; code++ {
		if !regexp.MustCompile(fmt.Sprintf(`(?m)^//\t%d\s`, code)).Match(doc) {
			t.Errorf("doc.go does not document exit code %d", code)
		}
	}
}

func TestHelpListsFlags(t *testing.T) {
	code, out, _ := runCLI(t, "", "help", "fit")
	if code != 0 {
		t.Fatalf("exit %d", code)
	}
	for _, f := range []string{"--components-range", "--criterion", "--structure", "--family", "--seed",
		"--max-iterations", "--tolerance", "--restarts", "--option", "--detach", "--quiet"} {
		if !strings.Contains(out, f+" ") && !strings.Contains(out, f+"\n") {
			t.Errorf("help fit lacks %s", f)
		}
	}
	for _, c := range commands {
		if code, out, errOut := runCLI(t, "", "help", c.name); code != 0 || !strings.Contains(out, "Usage: mixctl "+c.name) {
			t.Errorf("help %s: exit %d, %q %q", c.name, code, out, errOut)
		}
	}
}

func TestReadCSV(t *testing.T) {
	tb, err := readCSV(strings.NewReader("# pumps\nflow_lps, motor_current_a\n 1.5,2\n\n3,-4e-3\n"), "in")
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(tb.header, []string{"flow_lps", "motor_current_a"}) || tb.data.Rows != 2 || tb.data.Cols != 2 ||
		!slices.Equal(tb.data.Values, []float64{1.5, 2, 3, -0.004}) {
		t.Fatalf("got %+v", tb)
	}
	sel, err := tb.selectColumns([]string{"motor_current_a", "flow_lps"})
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(sel.data.Values, []float64{2, 1.5, -0.004, 3}) {
		t.Errorf("selected %v", sel.data.Values)
	}
	if _, err := tb.selectColumns([]string{"vibration"}); err == nil || !strings.Contains(err.Error(), `no column named "vibration"`) {
		t.Errorf("select missing: %v", err)
	}
}

func TestMatchColumns(t *testing.T) {
	tb, err := readCSV(strings.NewReader("vib,flow,current,site\n3,1,2,9\n"), "in.csv")
	if err != nil {
		t.Fatal(err)
	}
	named := &mixdv1.Parameters{Dimension: 3, FeatureNames: []string{"flow", "current", "vib"}}
	got, err := matchColumns(tb, named, nil)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(got.data.Values, []float64{1, 2, 3}) {
		t.Errorf("by feature names: %v", got.data.Values)
	}
	got, err = matchColumns(tb, &mixdv1.Parameters{Dimension: 2}, []string{"site", "vib"})
	if err != nil || !slices.Equal(got.data.Values, []float64{9, 3}) {
		t.Errorf("by --columns: %v %v", got, err)
	}
	if _, err := matchColumns(tb, &mixdv1.Parameters{Dimension: 3}, nil); err == nil || !strings.Contains(err.Error(), "4 columns, the model has 3") {
		t.Errorf("unnamed model, wrong width: %v", err)
	}
	other := &mixdv1.Parameters{Dimension: 3, FeatureNames: []string{"flow", "current", "temp"}}
	if _, err := matchColumns(tb, other, nil); err == nil || !strings.Contains(err.Error(), `no column named "temp"`) {
		t.Errorf("missing feature: %v", err)
	}
	if _, err := matchColumns(tb, named, []string{"flow"}); err == nil {
		t.Error("--columns with the wrong count accepted")
	}
}

func TestProgress(t *testing.T) {
	ev := &mixdv1.FitProgress{Components: 3, Iteration: 12, Objective: -1234.56784, Elapsed: durationpb.New(1500e6)}
	var b bytes.Buffer
	p := newProgress(&b, true, false, "em")
	p.update(ev)
	p.update(ev)
	p.finish()
	want := "\rcomponents 3  restart 0  iteration 12  log-likelihood -1234.5678  elapsed 1.5s\x1b[K"
	if b.String() != want+want+"\n" {
		t.Errorf("terminal progress = %q", b.String())
	}
	b.Reset()
	p = newProgress(&b, false, false, "vb")
	p.update(ev)
	p.finish()
	if b.String() != "components 3  restart 0  iteration 12  bound -1234.5678  elapsed 1.5s\n" {
		t.Errorf("plain progress = %q", b.String())
	}
	b.Reset()
	p = newProgress(&b, true, true, "em")
	p.update(ev)
	p.note("hello")
	p.finish()
	if b.Len() != 0 {
		t.Errorf("quiet progress wrote %q", b.String())
	}
}

func TestRowWriter(t *testing.T) {
	var b bytes.Buffer
	rw := newRowWriter(&b, false, []string{"row", "a,b", "log_density"})
	if err := rw.write(nil, []cell{icell(1), lcell([]float64{0.1, 2}), fcell(-1e-300)}); err != nil {
		t.Fatal(err)
	}
	if err := rw.flush(); err != nil {
		t.Fatal(err)
	}
	if got := b.String(); got != "row,\"a,b\",log_density\n1,0.1,2,-1e-300\n" {
		t.Errorf("csv = %q", got)
	}
	b.Reset()
	rw = newRowWriter(&b, true, nil)
	_ = rw.write([]string{"row", "input", "percentile", "confident"},
		[]cell{icell(7), lcell([]float64{1.25, math.Inf(1)}), fcell(math.NaN()), bcell(true)})
	_ = rw.flush()
	var obj map[string]any
	if err := json.Unmarshal(b.Bytes(), &obj); err != nil {
		t.Fatalf("jsonl line %q is not JSON: %v", b.String(), err)
	}
	if obj["row"] != 7.0 || obj["percentile"] != nil || obj["confident"] != true ||
		fmt.Sprint(obj["input"]) != "[1.25 <nil>]" {
		t.Errorf("jsonl = %s", b.String())
	}
}

func TestFormatFloatRoundTrips(t *testing.T) {
	for _, v := range []float64{0.1, -1234.5678901234567, 1e-310, math.MaxFloat64, 1.0 / 3} {
		tb, err := readCSV(strings.NewReader("x\n"+formatFloat(v)+"\n"), "t")
		if err != nil {
			t.Fatal(err)
		}
		if tb.data.Values[0] != v {
			t.Errorf("%v read back as %v", v, tb.data.Values[0])
		}
	}
}

// TestTimeoutExit6 talks to a listener that accepts connections and never
// answers: --timeout must end the command with exit code 6.
func TestTimeoutExit6(t *testing.T) {
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer lis.Close()
	go func() {
		for {
			c, err := lis.Accept()
			if err != nil {
				return
			}
			defer c.Close()
		}
	}()
	code, _, errOut := runCLI(t, "", "--addr", lis.Addr().String(), "--timeout", "300ms", "models")
	if code != exitTimeout || !strings.Contains(errOut, "(DEADLINE_EXCEEDED)") {
		t.Fatalf("exit %d, stderr %q; want %d and DEADLINE_EXCEEDED", code, errOut, exitTimeout)
	}
}
