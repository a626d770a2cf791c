package main

import (
	"bytes"
	"context"
	"encoding/xml"
	"errors"
	"fmt"
	"image/png"
	"io"
	"net"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"github.com/mixd-dev/mixd/fitters/mixture"
	"github.com/mixd-dev/mixd/fitters/pbconv"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// modelServer answers GetModel with fixed models, by name.
type modelServer struct {
	mixdv1.UnimplementedMixtureServiceServer
	models map[string]*mixdv1.Model
}

func (s *modelServer) GetModel(_ context.Context, req *mixdv1.GetModelRequest) (*mixdv1.GetModelResponse, error) {
	m, ok := s.models[strings.TrimPrefix(req.GetName(), "models/")]
	if !ok {
		return nil, status.Errorf(codes.NotFound, "model %q not found", req.GetName())
	}
	return &mixdv1.GetModelResponse{Model: m}, nil
}

// startModelServer serves s on 127.0.0.1 and returns its address.
func startModelServer(t *testing.T, s *modelServer) string {
	t.Helper()
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	srv := grpc.NewServer()
	mixdv1.RegisterMixtureServiceServer(srv, s)
	go func() { _ = srv.Serve(lis) }()
	t.Cleanup(srv.Stop)
	return lis.Addr().String()
}

func plotTestModels(t *testing.T) (*modelServer, string) {
	t.Helper()
	p := mixture.Params{
		Dim: 3, Features: []string{"flow_lps", "motor_current_a", "vibration_mm_s"},
		Family: mixture.Gaussian, Structure: mixture.Full,
		Components: []mixture.Component{
			{Weight: 0.3, Mean: []float64{18, 22, 1.6}, Cov: []float64{4, 1.5, 0.1, 1.5, 2, 0.05, 0.1, 0.05, 0.04}},
			{Weight: 0.5, Mean: []float64{42, 40, 2.3}, Cov: []float64{9, 4, 0.2, 4, 5, 0.1, 0.2, 0.1, 0.09}},
			{Weight: 0.2, Mean: []float64{30, 45, 4.0}, Cov: []float64{6, 0, 0, 0, 6, 0, 0, 0, 0.3}},
		},
	}
	m, err := mixture.New(p)
	if err != nil {
		t.Fatal(err)
	}
	x, _ := m.Sample(150, 3)
	var csv strings.Builder
	csv.WriteString("vibration_mm_s,flow_lps,motor_current_a\n") // columns in another order
	for i := 0; i < len(x); i += 3 {
		fmt.Fprintf(&csv, "%g,%g,%g\n", x[i+2], x[i], x[i+1])
	}
	path := filepath.Join(t.TempDir(), "stations.csv")
	if err := os.WriteFile(path, []byte(csv.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	s := &modelServer{models: map[string]*mixdv1.Model{
		"pumps": {Name: "models/pumps", Version: 2, Parameters: pbconv.ParamsToProto(p), Report: &mixdv1.FitReport{
			Objective: "log_likelihood", History: []float64{-1500, -1300, -1250, -1249.5},
			Selection: []*mixdv1.SelectionRow{{Components: 1, Bic: 3000, Aic: 2980}, {Components: 2, Bic: 2700, Aic: 2660}, {Components: 3, Bic: 2650, Aic: 2600}},
		}},
		"bare": {Name: "models/bare", Version: 1, Parameters: pbconv.ParamsToProto(p)},
	}}
	return s, path
}

// svgTexts returns the character data of every <text> element, failing when
// b is not well-formed XML.
func svgTexts(t *testing.T, b []byte) string {
	t.Helper()
	dec := xml.NewDecoder(bytes.NewReader(b))
	var texts []string
	inText := false
	for {
		tok, err := dec.Token()
		if err != nil {
			if errors.Is(err, io.EOF) {
				break
			}
			t.Fatalf("output is not well-formed SVG: %v", err)
		}
		switch e := tok.(type) {
		case xml.StartElement:
			inText = e.Name.Local == "text"
		case xml.CharData:
			if inText {
				texts = append(texts, string(e))
			}
		case xml.EndElement:
			inText = false
		}
	}
	return strings.Join(texts, "\n")
}

func TestPlotCommand(t *testing.T) {
	s, csvPath := plotTestModels(t)
	addr := startModelServer(t, s)
	dir := t.TempDir()

	// Two-feature picture as PNG at the requested size.
	out := filepath.Join(dir, "pumps.png")
	code, _, stderr := runCLI(t, "", "plot", "--addr", addr, "--model", "pumps", "--data", csvPath,
		"--x", "flow_lps", "--y", "motor_current_a", "--below", "5", "--width", "700", "--height", "500", "--output", out)
	if code != exitOK {
		t.Fatalf("plot png: exit %d: %s", code, stderr)
	}
	f, err := os.Open(out)
	if err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(f)
	f.Close()
	if err != nil {
		t.Fatalf("PNG does not decode: %v", err)
	}
	if b := img.Bounds(); b.Dx() != 700 || b.Dy() != 500 {
		t.Errorf("PNG is %dx%d, want 700x500", b.Dx(), b.Dy())
	}

	// SVG on standard output: title, axis labels, one legend entry per component.
	code, stdout, stderr := runCLI(t, "", "plot", "--addr", addr, "--model", "pumps", "--data", csvPath,
		"--x", "3", "--y", "flow_lps", "--below", "10")
	if code != exitOK {
		t.Fatalf("plot svg: exit %d: %s", code, stderr)
	}
	texts := svgTexts(t, []byte(stdout))
	for _, want := range []string{"pumps version 2: flow_lps against vibration_mm_s", "vibration_mm_s", "flow_lps",
		"component 0 (weight 0.30)", "component 2 (weight 0.20)", "below the 10% log-density point of these rows: 15"} {
		if !strings.Contains(texts, want) {
			t.Errorf("SVG texts lack %q:\n%s", want, texts)
		}
	}
	if n := strings.Count(texts, "component "); n != 3 {
		t.Errorf("%d component legend entries, want 3", n)
	}

	// History and selection pictures.
	code, stdout, stderr = runCLI(t, "", "plot", "--addr", addr, "--model", "pumps", "--history")
	if code != exitOK || !strings.Contains(svgTexts(t, []byte(stdout)), "log-likelihood") {
		t.Errorf("plot --history: exit %d: %s", code, stderr)
	}
	code, stdout, stderr = runCLI(t, "", "plot", "--addr", addr, "--model", "pumps", "--selection")
	if code != exitOK || !strings.Contains(svgTexts(t, []byte(stdout)), "lowest BIC at K = 3") {
		t.Errorf("plot --selection: exit %d: %s", code, stderr)
	}
}

func TestPlotCommandErrors(t *testing.T) {
	s, csvPath := plotTestModels(t)
	addr := startModelServer(t, s)
	tests := []struct {
		args []string
		code int
		msg  string
	}{
		{[]string{"--x", "flow_lps", "--y", "motor_current_a"}, exitUsage, "--model is required"},
		{[]string{"--model", "pumps", "--x", "flow_lps"}, exitUsage, "--x and --y are required"},
		{[]string{"--model", "pumps", "--history", "--selection"}, exitUsage, "choose one"},
		{[]string{"--model", "pumps", "--x", "1", "--y", "2", "--output", "p.pdf"}, exitUsage, ".svg or .png"},
		{[]string{"--model", "pumps", "--x", "1", "--y", "2", "--below", "100"}, exitUsage, "--below 100"},
		{[]string{"--model", "pumps", "--x", "pressure", "--y", "2"}, exitUsage, `feature "pressure"`},
		{[]string{"--model", "pumps", "--x", "2", "--y", "motor_current_a"}, exitUsage, "choose two different features"},
		{[]string{"--model", "bare", "--history"}, exitInvalid, "no per-iteration history"},
		{[]string{"--model", "bare", "--selection"}, exitInvalid, "no selection table"},
		{[]string{"--model", "nope", "--history"}, exitNotFound, "not found"},
		{[]string{"--model", "pumps", "--history", "--data", csvPath}, exitUsage, "only to the two-feature picture"},
	}
	for _, tt := range tests {
		args := append([]string{"plot", "--addr", addr}, tt.args...)
		code, _, stderr := runCLI(t, "", args...)
		if code != tt.code || !strings.Contains(stderr, tt.msg) {
			t.Errorf("%v: exit %d, stderr %q; want exit %d with %q", tt.args, code, stderr, tt.code, tt.msg)
		}
	}
}
