package main

import (
	"bytes"
	"strings"
	"testing"
)

func TestParseBytes(t *testing.T) {
	for _, c := range []struct {
		in   string
		want int64
		ok   bool
	}{
		{"0", 0, true}, {"268435456", 256 << 20, true}, {"256MiB", 256 << 20, true}, {"1GiB", 1 << 30, true},
		{"4 KiB", 4 << 10, true}, {"-1", 0, false}, {"12XB", 0, false}, {"", 0, false}, {"MiB", 0, false},
		{"99999999999GiB", 0, false},
	} {
		got, err := parseBytes(c.in)
		if (err == nil) != c.ok || got != c.want {
			t.Errorf("parseBytes(%q) = %d, %v", c.in, got, err)
		}
	}
}

func TestCommandLineErrors(t *testing.T) {
	for _, c := range []struct {
		args []string
		code int
		msg  string
	}{
		{nil, exitUsage, "usage:"},
		{[]string{"bogus"}, exitUsage, "unknown command \"bogus\""},
		{[]string{"fitter"}, exitUsage, "want exactly one fitter name"},
		{[]string{"fitter", "nope"}, exitUsage, "unknown built-in fitter \"nope\""},
		{[]string{"serve", "--max-rows", "0"}, exitUsage, "--max-rows is 0, must be positive"},
		{[]string{"serve", "--max-concurrent-fits", "-1"}, exitUsage, "--max-concurrent-fits is -1"},
		{[]string{"serve", "--cache-bytes", "12XB"}, exitUsage, "not a byte count"},
		{[]string{"serve", "--max-message-bytes", "4GiB"}, exitUsage, "--max-message-bytes"},
		{[]string{"serve", "--log-level", "loud"}, exitUsage, "--log-level"},
		{[]string{"serve", "--no-such-flag"}, exitUsage, "flag provided but not defined"},
		{[]string{"serve", "extra"}, exitUsage, "unexpected argument \"extra\""},
		{[]string{"serve", "--listen", "unix:", "--data-dir", t.TempDir()}, exitError, "empty socket path"},
	} {
		var stdout, stderr bytes.Buffer
		code := run(c.args, &stdout, &stderr)
		if code != c.code || !strings.Contains(stderr.String(), c.msg) {
			t.Errorf("mixd %v: exit %d, stderr %q; want exit %d containing %q", c.args, code, stderr.String(), c.code, c.msg)
		}
		if stdout.Len() != 0 {
			t.Errorf("mixd %v wrote to stdout: %q", c.args, stdout.String())
		}
	}
	var stdout, stderr bytes.Buffer
	if code := run([]string{"version"}, &stdout, &stderr); code != exitOK || !strings.HasPrefix(stdout.String(), "mixd ") {
		t.Errorf("version: exit %d, %q", code, stdout.String())
	}
	stdout.Reset()
	if code := run([]string{"serve", "-h"}, &stdout, &stderr); code != exitOK || !strings.Contains(stderr.String(), "-data-dir") {
		t.Errorf("serve -h: exit %d", code)
	}
}
