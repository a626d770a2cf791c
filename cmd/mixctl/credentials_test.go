package main

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestReadToken(t *testing.T) {
	dir := t.TempDir()
	write := func(name, content string) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, []byte(content), 0o600); err != nil {
			t.Fatal(err)
		}
		return p
	}
	tests := []struct {
		name, content, want, wantErr string
	}{
		{"plain", "tok-123\n", "tok-123", ""},
		{"blank lines first", "\n  \n\t tok-456  \nsecond\n", "tok-456", ""},
		{"no newline", "tok-789", "tok-789", ""},
		{"empty", "", "", "holds no token"},
		{"only blank", "\n \n", "", "holds no token"},
		{"two words", "full tok-1 ops\n", "", "more than one word"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got, err := readToken(write(tc.name, tc.content))
			if tc.wantErr != "" {
				if err == nil || !strings.Contains(err.Error(), tc.wantErr) || exitCode(err) != exitInvalid {
					t.Fatalf("readToken = %q, %v; want an input error containing %q", got, err, tc.wantErr)
				}
				return
			}
			if err != nil || got != tc.want {
				t.Fatalf("readToken = %q, %v; want %q", got, err, tc.want)
			}
		})
	}
	if _, err := readToken(filepath.Join(dir, "absent")); err == nil || exitCode(err) != exitInvalid {
		t.Errorf("missing token file: %v", err)
	}
}

// TestCredentialFlagErrors checks that bad credential flags stop mixctl
// before it dials, with the documented exit code and a message naming the
// flag.
func TestCredentialFlagErrors(t *testing.T) {
	dir := t.TempDir()
	notPEM := filepath.Join(dir, "ca.txt")
	if err := os.WriteFile(notPEM, []byte("not a certificate\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	absent := filepath.Join(dir, "absent")
	tests := []struct {
		name     string
		env      map[string]string
		args     []string
		wantCode int
		wantMsg  string
	}{
		{"missing token file", nil, []string{"--token-file", absent, "models"}, exitInvalid, "--token-file"},
		{"token file from env", map[string]string{"MIXD_TOKEN_FILE": absent}, []string{"models"}, exitInvalid, "--token-file"},
		{"flag after command", nil, []string{"models", "--token-file", absent}, exitInvalid, "--token-file"},
		{"cert without key", nil, []string{"--tls-cert", notPEM, "models"}, exitUsage, "--tls-key"},
		{"key without cert", nil, []string{"--tls-key", notPEM, "models"}, exitUsage, "--tls-cert"},
		{"CA not PEM", nil, []string{"--tls-ca", notPEM, "models"}, exitInvalid, "holds no PEM certificate"},
		{"CA missing", nil, []string{"--tls-ca", absent, "models"}, exitInvalid, "--tls-ca"},
		{"TLS over unix socket", nil, []string{"--addr", "unix:" + filepath.Join(dir, "s"), "--tls-ca", notPEM, "models"}, exitUsage, "Unix socket"},
		{"bad client pair", nil, []string{"--tls-cert", notPEM, "--tls-key", notPEM, "models"}, exitInvalid, "--tls-cert"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			var out, errb bytes.Buffer
			getenv := func(k string) string { return tc.env[k] }
			code := run(tc.args, strings.NewReader(""), &out, &errb, getenv)
			if code != tc.wantCode || !strings.Contains(errb.String(), tc.wantMsg) {
				t.Errorf("exit %d, stderr %q; want exit %d and %q", code, errb.String(), tc.wantCode, tc.wantMsg)
			}
		})
	}
}
