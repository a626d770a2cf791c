package main

import (
	"bufio"
	"bytes"
	"errors"
	"io"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"

	"gopkg.in/yaml.v3"
)

// replicaServeFlags returns the flag names of `mixd serve` from its -h
// output.
func replicaServeFlags(t *testing.T) map[string]bool {
	t.Helper()
	var stdout, stderr bytes.Buffer
	if code := run([]string{"serve", "-h"}, &stdout, &stderr); code != exitOK {
		t.Fatalf("serve -h: exit %d", code)
	}
	re := regexp.MustCompile(`^  -([a-z0-9-]+)`)
	out := map[string]bool{}
	sc := bufio.NewScanner(&stderr)
	for sc.Scan() {
		if m := re.FindStringSubmatch(sc.Text()); m != nil {
			out[m[1]] = true
		}
	}
	for _, f := range []string{"store", "replica-id", "replica-timeout", "replica-recheck"} {
		if !out[f] {
			t.Fatalf("serve -h does not list --%s", f)
		}
	}
	return out
}

type k8sProbe struct {
	GRPC *struct {
		Port    int    `yaml:"port"`
		Service string `yaml:"service"`
	} `yaml:"grpc"`
}

type k8sObject struct {
	APIVersion string `yaml:"apiVersion"`
	Kind       string `yaml:"kind"`
	Metadata   struct {
		Name string `yaml:"name"`
	} `yaml:"metadata"`
	Spec struct {
		// Deployment
		Replicas int `yaml:"replicas"`
		Selector struct {
			MatchLabels map[string]string `yaml:"matchLabels"`
		} `yaml:"selector"`
		Template struct {
			Metadata struct {
				Labels map[string]string `yaml:"labels"`
			} `yaml:"metadata"`
			Spec struct {
				Grace      int `yaml:"terminationGracePeriodSeconds"`
				Containers []struct {
					Name  string   `yaml:"name"`
					Args  []string `yaml:"args"`
					Ports []struct {
						Name string `yaml:"name"`
						Port int    `yaml:"containerPort"`
					} `yaml:"ports"`
					Env []struct {
						Name      string `yaml:"name"`
						Value     string `yaml:"value"`
						ValueFrom *struct {
							Secret *struct {
								Name string `yaml:"name"`
								Key  string `yaml:"key"`
							} `yaml:"secretKeyRef"`
							Field *struct {
								Path string `yaml:"fieldPath"`
							} `yaml:"fieldRef"`
						} `yaml:"valueFrom"`
					} `yaml:"env"`
					Readiness *k8sProbe `yaml:"readinessProbe"`
					Liveness  *k8sProbe `yaml:"livenessProbe"`
					Mounts    []struct {
						Name string `yaml:"name"`
					} `yaml:"volumeMounts"`
				} `yaml:"containers"`
				Volumes []struct {
					Name string `yaml:"name"`
				} `yaml:"volumes"`
			} `yaml:"spec"`
		} `yaml:"template"`
		// Service (selector is a plain map there)
		ClusterIP string `yaml:"clusterIP"`
		Ports     []struct {
			Port       int    `yaml:"port"`
			TargetPort string `yaml:"targetPort"`
		} `yaml:"ports"`
	} `yaml:"spec"`
}

// TestKubernetesReplicasExample checks testdata/deploy/kubernetes-replicas.yaml:
// it parses, uses only real flags and MIXD_ variables, takes the store URL
// from a Secret, probes the health listener, gives shutdown time to drain,
// and its Services select the Deployment's pods on the API port.
func TestKubernetesReplicasExample(t *testing.T) {
	flags := replicaServeFlags(t)
	b, err := os.ReadFile(filepath.Join("..", "..", "testdata", "deploy", "kubernetes-replicas.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	var objs []k8sObject
	var selectors []map[string]any
	dec := yaml.NewDecoder(bytes.NewReader(b))
	for {
		var raw yaml.Node
		err := dec.Decode(&raw)
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			t.Fatalf("kubernetes-replicas.yaml: %v", err)
		}
		var o k8sObject
		if err := raw.Decode(&o); err != nil {
			t.Fatalf("kubernetes-replicas.yaml document %d: %v", len(objs)+1, err)
		}
		var sel struct {
			Spec struct {
				Selector map[string]any `yaml:"selector"`
			} `yaml:"spec"`
		}
		if err := raw.Decode(&sel); err != nil {
			t.Fatal(err)
		}
		objs, selectors = append(objs, o), append(selectors, sel.Spec.Selector)
	}

	var dep *k8sObject
	for i := range objs {
		if objs[i].Kind == "Deployment" {
			dep = &objs[i]
		}
	}
	if dep == nil || dep.APIVersion != "apps/v1" {
		t.Fatal("no apps/v1 Deployment")
	}
	if dep.Spec.Replicas < 2 {
		t.Errorf("%d replicas; the example is about several", dep.Spec.Replicas)
	}
	podLabels := dep.Spec.Template.Metadata.Labels
	for k, v := range dep.Spec.Selector.MatchLabels {
		if podLabels[k] != v {
			t.Errorf("the Deployment selects %s=%s, which its pods do not carry", k, v)
		}
	}
	pod := dep.Spec.Template.Spec
	if len(pod.Containers) != 1 || pod.Containers[0].Name != "mixd" {
		t.Fatalf("want one container named mixd, have %d", len(pod.Containers))
	}
	c := pod.Containers[0]
	if len(c.Args) == 0 || c.Args[0] != "serve" {
		t.Fatalf("args %v do not start with serve", c.Args)
	}
	set := map[string]string{}
	for _, a := range c.Args[1:] {
		name, val, ok := strings.Cut(strings.TrimLeft(a, "-"), "=")
		if !strings.HasPrefix(a, "--") || !ok {
			t.Errorf("argument %q is not --flag=value", a)
			continue
		}
		if !flags[name] {
			t.Errorf("%q is not a flag of mixd serve", a)
		}
		set[name] = val
	}
	if _, ok := set["store"]; ok {
		t.Error("the store URL (with its password) is on the command line; it belongs in a Secret")
	}
	storeFromSecret := false
	for _, e := range c.Env {
		f, ok := strings.CutPrefix(e.Name, "MIXD_")
		if !ok {
			continue
		}
		if !flags[strings.ReplaceAll(strings.ToLower(f), "_", "-")] {
			t.Errorf("environment variable %s names no flag", e.Name)
		}
		if e.Name == "MIXD_STORE" && e.ValueFrom != nil && e.ValueFrom.Secret != nil {
			storeFromSecret = true
		}
	}
	if !storeFromSecret {
		t.Error("MIXD_STORE does not come from a Secret")
	}
	ports := map[string]int{}
	for _, p := range c.Ports {
		ports[p.Name] = p.Port
	}
	port := func(flag string) int {
		_, p, ok := strings.Cut(set[flag], ":")
		n, err := strconv.Atoi(p)
		if !ok || err != nil {
			t.Fatalf("--%s=%q is not host:port", flag, set[flag])
		}
		return n
	}
	if api := port("listen"); ports["grpc"] != api {
		t.Errorf("container port grpc %d, --listen port %d", ports["grpc"], api)
	}
	health := port("health-listen")
	for what, p := range map[string]*k8sProbe{"readiness": c.Readiness, "liveness": c.Liveness} {
		if p == nil || p.GRPC == nil {
			t.Errorf("no gRPC %s probe", what)
			continue
		}
		if p.GRPC.Port != health {
			t.Errorf("%s probe on port %d, --health-listen on %d", what, p.GRPC.Port, health)
		}
		if s := p.GRPC.Service; s != "" && s != "mixd.v1.MixtureService" {
			t.Errorf("%s probe asks for service %q, which mixd does not report", what, s)
		}
	}
	drain, err := time.ParseDuration(set["shutdown-timeout"])
	if err != nil || time.Duration(pod.Grace)*time.Second <= drain {
		t.Errorf("terminationGracePeriodSeconds %d does not exceed --shutdown-timeout %q", pod.Grace, set["shutdown-timeout"])
	}
	volumes := map[string]bool{}
	for _, v := range pod.Volumes {
		volumes[v.Name] = true
	}
	for _, m := range c.Mounts {
		if !volumes[m.Name] {
			t.Errorf("mount of undefined volume %s", m.Name)
		}
	}

	// Services: one balanced by a proxy, one headless for client-side
	// round-robin; both select the pods and reach the API port.
	headless := 0
	services := 0
	for i, o := range objs {
		if o.Kind != "Service" {
			continue
		}
		services++
		if o.Spec.ClusterIP == "None" {
			headless++
		}
		for k, v := range selectors[i] {
			if podLabels[k] != v {
				t.Errorf("Service %s selects %s=%v, which the pods do not carry", o.Metadata.Name, k, v)
			}
		}
		if len(o.Spec.Ports) != 1 || o.Spec.Ports[0].TargetPort != "grpc" {
			t.Errorf("Service %s does not target the grpc port", o.Metadata.Name)
		}
	}
	if services != 2 || headless != 1 {
		t.Errorf("%d Services, %d headless; want a balanced one and a headless one", services, headless)
	}
}
