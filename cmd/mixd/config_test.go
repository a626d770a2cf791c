package main

import (
	"bufio"
	"bytes"
	"flag"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"

	"gopkg.in/yaml.v3"
)

// serveFlags returns the flags of `mixd serve` with their types, read from
// its -h output, the way an operator reads them.
func serveFlags(t *testing.T) map[string]string {
	t.Helper()
	var stdout, stderr bytes.Buffer
	if code := run([]string{"serve", "-h"}, &stdout, &stderr); code != exitOK {
		t.Fatalf("serve -h: exit %d", code)
	}
	re := regexp.MustCompile(`^  -([a-z0-9-]+)(?: (\w+))?$`)
	out := map[string]string{}
	sc := bufio.NewScanner(&stderr)
	for sc.Scan() {
		if m := re.FindStringSubmatch(sc.Text()); m != nil {
			out[m[1]] = m[2]
		}
	}
	if len(out) < 20 {
		t.Fatalf("only %d flags in serve -h: %q", len(out), stderr.String())
	}
	return out
}

// typedFlagSet rebuilds a flag set of the serve flags' names and value
// types (byte sizes parsed by parseBytes), for checking files against it.
func typedFlagSet(t *testing.T) *flag.FlagSet {
	fs := flag.NewFlagSet("check", flag.ContinueOnError)
	for name, typ := range serveFlags(t) {
		switch typ {
		case "int":
			fs.Int64(name, 0, "")
		case "duration":
			fs.Duration(name, 0, "")
		case "value":
			fs.Var(new(byteSize), name, "")
		default:
			fs.String(name, "", "")
		}
	}
	return fs
}

func TestConfigPrecedence(t *testing.T) {
	newFS := func() (*flag.FlagSet, *string, *int64, *string, *time.Duration) {
		fs := flag.NewFlagSet("t", flag.ContinueOnError)
		cfg := fs.String(configFlag, "", "")
		rows := fs.Int64("max-rows", 100, "")
		listen := fs.String("listen", "default", "")
		d := fs.Duration("shutdown-timeout", time.Second, "")
		return fs, cfg, rows, listen, d
	}
	file := filepath.Join(t.TempDir(), "mixd.json")
	if err := os.WriteFile(file, []byte(`{"max-rows": 300, "listen": "from-file", "shutdown-timeout": "7s"}`), 0o600); err != nil {
		t.Fatal(err)
	}
	env := func(m map[string]string) func(string) (string, bool) {
		return func(k string) (string, bool) { v, ok := m[k]; return v, ok }
	}
	for _, c := range []struct {
		name   string
		args   []string
		env    map[string]string
		rows   int64
		listen string
		d      time.Duration
	}{
		{"defaults", nil, nil, 100, "default", time.Second},
		{"file", []string{"--config", file}, nil, 300, "from-file", 7 * time.Second},
		{"file named by the environment", nil, map[string]string{"MIXD_CONFIG": file}, 300, "from-file", 7 * time.Second},
		{"environment over file", []string{"--config", file}, map[string]string{"MIXD_MAX_ROWS": "200", "MIXD_UNRELATED": "x"}, 200, "from-file", 7 * time.Second},
		{"flag over environment and file", []string{"--config", file, "--max-rows", "50", "--listen", "flag"},
			map[string]string{"MIXD_MAX_ROWS": "200", "MIXD_LISTEN": "env"}, 50, "flag", 7 * time.Second},
		{"environment over default", nil, map[string]string{"MIXD_SHUTDOWN_TIMEOUT": "3s"}, 100, "default", 3 * time.Second},
	} {
		fs, _, rows, listen, d := newFS()
		if err := fs.Parse(c.args); err != nil {
			t.Fatal(err)
		}
		if err := applyConfigSources(fs, env(c.env)); err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		if *rows != c.rows || *listen != c.listen || *d != c.d {
			t.Errorf("%s: max-rows %d, listen %q, shutdown-timeout %v; want %d, %q, %v", c.name, *rows, *listen, *d, c.rows, c.listen, c.d)
		}
	}

	dir := t.TempDir()
	write := func(name, content string) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, []byte(content), 0o600); err != nil {
			t.Fatal(err)
		}
		return p
	}
	for _, c := range []struct {
		name string
		args []string
		env  map[string]string
		msg  string
	}{
		{"unknown key", []string{"--config", write("a.json", `{"max-rowz": 1}`)}, nil, `unknown setting "max-rowz"`},
		{"config key in the file", []string{"--config", write("b.json", `{"config": "x"}`)}, nil, `unknown setting "config"`},
		{"bad value", []string{"--config", write("c.json", `{"max-rows": "lots"}`)}, nil, `"max-rows": "lots"`},
		{"array value", []string{"--config", write("d.json", `{"listen": ["a"]}`)}, nil, "want a string, number or boolean"},
		{"not an object", []string{"--config", write("e.json", `[1, 2]`)}, nil, "not a JSON object"},
		{"null", []string{"--config", write("f.json", `null`)}, nil, "not a JSON object"},
		{"trailing text", []string{"--config", write("g.json", `{} {}`)}, nil, "text after the JSON object"},
		{"missing file", []string{"--config", filepath.Join(dir, "none.json")}, nil, "config file"},
		{"bad environment value", nil, map[string]string{"MIXD_SHUTDOWN_TIMEOUT": "soon"}, "environment variable MIXD_SHUTDOWN_TIMEOUT"},
	} {
		fs, _, _, _, _ := newFS()
		if err := fs.Parse(c.args); err != nil {
			t.Fatal(err)
		}
		err := applyConfigSources(fs, env(c.env))
		if err == nil || !strings.Contains(err.Error(), c.msg) {
			t.Errorf("%s: %v, want an error containing %q", c.name, err, c.msg)
		}
	}
}

func TestBadConfigExitsWithUsage(t *testing.T) {
	dir := t.TempDir()
	bad := filepath.Join(dir, "bad.json")
	if err := os.WriteFile(bad, []byte(`{"max-rows": 0}`), 0o600); err != nil {
		t.Fatal(err)
	}
	unknown := filepath.Join(dir, "unknown.json")
	if err := os.WriteFile(unknown, []byte(`{"lisen": "x"}`), 0o600); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		args []string
		env  [2]string
		code int
		msg  string
	}{
		{[]string{"serve", "--config", bad}, [2]string{}, exitUsage, "--max-rows is 0, must be positive"},
		{[]string{"serve", "--config", unknown}, [2]string{}, exitUsage, `unknown setting "lisen"`},
		{[]string{"serve"}, [2]string{"MIXD_MAX_ROWS", "-5"}, exitUsage, "--max-rows is -5"},
		{[]string{"serve"}, [2]string{"MIXD_LOG_FORMAT", "xml"}, exitUsage, `--log-format is "xml"`},
		{[]string{"serve", "--default-timeout", "-1s"}, [2]string{}, exitUsage, "--default-timeout is -1s"},
		{[]string{"serve", "--max-fit-memory", "0"}, [2]string{}, exitUsage, "--max-fit-memory is 0"},
		{[]string{"serve", "--trace-otlp", "127.0.0.1:4317"}, [2]string{}, exitUsage, "want http://HOST:PORT"},
		{[]string{"serve"}, [2]string{"MIXD_TRACE_OTLP", "http://collector"}, exitUsage, "give the collector's host and port"},
		{[]string{"serve", "--tls-key", "k.pem"}, [2]string{}, exitUsage, "--tls-cert"},
		{[]string{"serve", "--plugin-manifest", "m"}, [2]string{}, exitUsage, "set --plugin-dir too"},
		{[]string{"serve", "--data-dir", dir, "--listen", "127.0.0.1:0", "--token-file", filepath.Join(dir, "none")}, [2]string{}, exitError, "token file"},
		{[]string{"serve", "--data-dir", dir, "--listen", "127.0.0.1:0", "--tls-cert", bad, "--tls-key", bad}, [2]string{}, exitError, "TLS: load certificate"},
	} {
		if c.env[0] != "" {
			t.Setenv(c.env[0], c.env[1])
		}
		var stdout, stderr bytes.Buffer
		code := run(c.args, &stdout, &stderr)
		if code != c.code || !strings.Contains(stderr.String(), c.msg) {
			t.Errorf("mixd %v (env %v): exit %d, stderr %q; want exit %d containing %q", c.args, c.env, code, stderr.String(), c.code, c.msg)
		}
		if c.env[0] != "" {
			os.Unsetenv(c.env[0])
		}
	}
}

// TestDeployFiles parses the example deployment files and checks that
// they use only real flags and settings, and that the pod's probes reach
// the health listener.
func TestDeployFiles(t *testing.T) {
	flags := serveFlags(t)
	dir := filepath.Join("..", "..", "testdata", "deploy")
	checkArgs := func(where string, args []string) map[string]string {
		t.Helper()
		got := map[string]string{}
		for i := 0; i < len(args); i++ {
			a := args[i]
			if !strings.HasPrefix(a, "-") {
				continue
			}
			name, val, hasVal := strings.Cut(strings.TrimLeft(a, "-"), "=")
			if _, ok := flags[name]; !ok {
				t.Errorf("%s: %q is not a flag of mixd serve", where, a)
			}
			if !hasVal && i+1 < len(args) {
				i++
				val = args[i]
			}
			got[name] = val
		}
		return got
	}
	checkEnv := func(where, name string) {
		t.Helper()
		f, ok := strings.CutPrefix(name, "MIXD_")
		if !ok {
			return
		}
		if _, ok := flags[strings.ReplaceAll(strings.ToLower(f), "_", "-")]; !ok && f != "CONFIG" {
			t.Errorf("%s: environment variable %s names no flag", where, name)
		}
	}

	// Kubernetes pod.
	b, err := os.ReadFile(filepath.Join(dir, "kubernetes-sidecar.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	type probe struct {
		GRPC *struct {
			Port    int    `yaml:"port"`
			Service string `yaml:"service"`
		} `yaml:"grpc"`
	}
	var pod struct {
		APIVersion string `yaml:"apiVersion"`
		Kind       string `yaml:"kind"`
		Spec       struct {
			Containers []struct {
				Name    string   `yaml:"name"`
				Image   string   `yaml:"image"`
				Command []string `yaml:"command"`
				Args    []string `yaml:"args"`
				Env     []struct {
					Name  string `yaml:"name"`
					Value string `yaml:"value"`
				} `yaml:"env"`
				Readiness *probe `yaml:"readinessProbe"`
				Liveness  *probe `yaml:"livenessProbe"`
				Mounts    []struct {
					Name string `yaml:"name"`
					Path string `yaml:"mountPath"`
				} `yaml:"volumeMounts"`
			} `yaml:"containers"`
			Volumes []struct {
				Name string `yaml:"name"`
			} `yaml:"volumes"`
		} `yaml:"spec"`
	}
	if err := yaml.Unmarshal(b, &pod); err != nil {
		t.Fatalf("kubernetes-sidecar.yaml: %v", err)
	}
	if pod.APIVersion != "v1" || pod.Kind != "Pod" || len(pod.Spec.Containers) != 2 {
		t.Fatalf("pod: %s %s with %d containers", pod.APIVersion, pod.Kind, len(pod.Spec.Containers))
	}
	volumes := map[string]bool{}
	for _, v := range pod.Spec.Volumes {
		volumes[v.Name] = true
	}
	found := false
	for _, c := range pod.Spec.Containers {
		for _, m := range c.Mounts {
			if !volumes[m.Name] {
				t.Errorf("container %s mounts undefined volume %s", c.Name, m.Name)
			}
		}
		if c.Name != "mixd" {
			continue
		}
		found = true
		if len(c.Args) == 0 || c.Args[0] != "serve" {
			t.Fatalf("mixd container args %v do not start with serve", c.Args)
		}
		set := checkArgs("pod mixd args", c.Args[1:])
		for _, e := range c.Env {
			checkEnv("pod mixd env", e.Name)
		}
		_, port, ok := strings.Cut(set["health-listen"], ":")
		if !ok {
			t.Fatalf("the mixd container sets no --health-listen host:port: %v", set)
		}
		for what, p := range map[string]*probe{"readiness": c.Readiness, "liveness": c.Liveness} {
			if p == nil || p.GRPC == nil {
				t.Errorf("mixd container: no gRPC %s probe", what)
				continue
			}
			if want := port; want != strconv.Itoa(p.GRPC.Port) {
				t.Errorf("%s probe port %d, --health-listen port %s", what, p.GRPC.Port, port)
			}
			if s := p.GRPC.Service; s != "" && s != "mixd.v1.MixtureService" {
				t.Errorf("%s probe service %q is not served", what, s)
			}
		}
		if !strings.HasPrefix(set["listen"], "unix:") {
			t.Errorf("sidecar listens on %q, want a Unix socket", set["listen"])
		}
	}
	if !found {
		t.Fatal("no container named mixd")
	}

	// systemd unit: ExecStart's flags, Environment's variables, and the
	// config file it names (checked from mixd.json beside it).
	b, err = os.ReadFile(filepath.Join(dir, "mixd.service"))
	if err != nil {
		t.Fatal(err)
	}
	sections := map[string]map[string]string{}
	section := ""
	for i, line := range strings.Split(string(b), "\n") {
		line = strings.TrimSpace(line)
		switch {
		case line == "" || strings.HasPrefix(line, "#"):
		case strings.HasPrefix(line, "[") && strings.HasSuffix(line, "]"):
			section = line[1 : len(line)-1]
			sections[section] = map[string]string{}
		default:
			k, v, ok := strings.Cut(line, "=")
			if !ok || section == "" {
				t.Fatalf("mixd.service line %d: %q is not KEY=VALUE in a section", i+1, line)
			}
			sections[section][k] = v
		}
	}
	for _, s := range []string{"Unit", "Service", "Install"} {
		if sections[s] == nil {
			t.Errorf("mixd.service has no [%s] section", s)
		}
	}
	exec := strings.Fields(sections["Service"]["ExecStart"])
	if len(exec) < 2 || filepath.Base(exec[0]) != "mixd" || exec[1] != "serve" {
		t.Fatalf("ExecStart %q", exec)
	}
	set := checkArgs("mixd.service ExecStart", exec[2:])
	if k, _, _ := strings.Cut(sections["Service"]["Environment"], "="); k != "" {
		checkEnv("mixd.service Environment", k)
	}
	if filepath.Base(set["config"]) != "mixd.json" {
		t.Fatalf("the unit's config file is %q; mixd.json beside it is its example", set["config"])
	}
	if sections["Service"]["ExecReload"] == "" || !strings.Contains(sections["Service"]["ExecReload"], "HUP") {
		t.Error("the unit does not reload with SIGHUP")
	}
	cb, err := os.ReadFile(filepath.Join(dir, "mixd.json"))
	if err != nil {
		t.Fatal(err)
	}
	fs := typedFlagSet(t)
	vals, err := parseConfig(cb, "mixd.json", fs)
	if err != nil {
		t.Fatal(err)
	}
	for k, v := range vals {
		if err := fs.Set(k, v); err != nil {
			t.Errorf("mixd.json: %q: %q: %v", k, v, err)
		}
	}
}
