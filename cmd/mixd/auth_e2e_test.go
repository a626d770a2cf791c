package main_test

// End-to-end tests of the daemon's security options through mixctl: bearer
// tokens of both classes over mutual TLS.

import (
	"bytes"
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/pem"
	"errors"
	"math/big"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// e2ePKI is a throw-away CA with a server certificate for 127.0.0.1 and a
// client certificate, as PEM files.
type e2ePKI struct {
	ca, serverCert, serverKey, clientCert, clientKey string
}

// newE2EPKI writes a CA, a server certificate for 127.0.0.1 and a client
// certificate (ECDSA P-256, valid for an hour) into dir.
func newE2EPKI(t *testing.T, dir string) e2ePKI {
	t.Helper()
	newKey := func() *ecdsa.PrivateKey {
		k, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
		if err != nil {
			t.Fatal(err)
		}
		return k
	}
	write := func(name, typ string, der []byte) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, pem.EncodeToMemory(&pem.Block{Type: typ, Bytes: der}), 0o600); err != nil {
			t.Fatal(err)
		}
		return p
	}
	writeKey := func(name string, k *ecdsa.PrivateKey) string {
		der, err := x509.MarshalECPrivateKey(k)
		if err != nil {
			t.Fatal(err)
		}
		return write(name, "EC PRIVATE KEY", der)
	}
	now := time.Now()
	caKey := newKey()
	caTmpl := &x509.Certificate{
		SerialNumber: big.NewInt(1), Subject: pkix.Name{CommonName: "mixd e2e test CA"},
		NotBefore: now.Add(-time.Hour), NotAfter: now.Add(time.Hour),
		IsCA: true, BasicConstraintsValid: true, KeyUsage: x509.KeyUsageCertSign,
	}
	caDER, err := x509.CreateCertificate(rand.Reader, caTmpl, caTmpl, &caKey.PublicKey, caKey)
	if err != nil {
		t.Fatal(err)
	}
	caCert, err := x509.ParseCertificate(caDER)
	if err != nil {
		t.Fatal(err)
	}
	leaf := func(serial int64, usage x509.ExtKeyUsage, certName, keyName string) (string, string) {
		k := newKey()
		tmpl := &x509.Certificate{
			SerialNumber: big.NewInt(serial), Subject: pkix.Name{CommonName: "mixd e2e " + certName},
			NotBefore: now.Add(-time.Hour), NotAfter: now.Add(time.Hour),
			KeyUsage: x509.KeyUsageDigitalSignature, ExtKeyUsage: []x509.ExtKeyUsage{usage},
		}
		if usage == x509.ExtKeyUsageServerAuth {
			tmpl.IPAddresses = []net.IP{net.ParseIP("127.0.0.1")}
		}
		der, err := x509.CreateCertificate(rand.Reader, tmpl, caCert, &k.PublicKey, caKey)
		if err != nil {
			t.Fatal(err)
		}
		return write(certName, "CERTIFICATE", der), writeKey(keyName, k)
	}
	p := e2ePKI{ca: write("ca.pem", "CERTIFICATE", caDER)}
	p.serverCert, p.serverKey = leaf(2, x509.ExtKeyUsageServerAuth, "server.pem", "server-key.pem")
	p.clientCert, p.clientKey = leaf(3, x509.ExtKeyUsageClientAuth, "client.pem", "client-key.pem")
	return p
}

// mixctlEnv runs mixctl against d with extra environment variables and
// returns its exit code, standard output and standard error.
func mixctlEnv(t *testing.T, d *daemonProc, env []string, args ...string) (int, string, string) {
	t.Helper()
	cmd := exec.Command(bin(t, "mixctl"), append([]string{"--addr", d.addr}, args...)...)
	cmd.Dir = "../.."
	cmd.Env = append(os.Environ(), env...)
	var out, errb bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errb
	err := cmd.Run()
	var ee *exec.ExitError
	switch {
	case errors.As(err, &ee):
		return ee.ExitCode(), out.String(), errb.String()
	case err != nil:
		t.Fatalf("run mixctl: %v", err)
	}
	return 0, out.String(), errb.String()
}

// TestMixctlTokensOverMutualTLS starts mixd with a token file (a full and a
// read token) and mutual TLS, and checks what mixctl may do with each token,
// with none, and without TLS, by its exit codes (documented in
// cmd/mixctl/doc.go: 5 unavailable, 11 UNAUTHENTICATED, 12 PERMISSION_DENIED).
func TestMixctlTokensOverMutualTLS(t *testing.T) {
	dir := t.TempDir()
	pki := newE2EPKI(t, dir)
	d := startDaemon(t, t.TempDir(), false, "--token-file", tokenFile(t),
		"--tls-cert", pki.serverCert, "--tls-key", pki.serverKey, "--tls-client-ca", pki.ca)
	writeToken := func(name, content string) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, []byte(content), 0o600); err != nil {
			t.Fatal(err)
		}
		return p
	}
	fullTok := writeToken("full", e2eFullToken+"\n")
	readTok := writeToken("read", "\n"+e2eReadToken+"\n") // the first non-empty line counts
	unknownTok := writeToken("unknown", "not-a-token-the-daemon-knows\n")
	mtls := []string{"--tls-ca", pki.ca, "--tls-cert", pki.clientCert, "--tls-key", pki.clientKey}
	withTok := func(tok string, args ...string) []string {
		return append(append([]string{"--token-file", tok}, mtls...), args...)
	}
	const csv = "testdata/pumps/stations.csv"
	fitArgs := []string{"fit", "--model", "pumps", "--components", "2", "--seed", "7", "--quiet", csv}
	scoreArgs := []string{"score", "--model", "pumps", csv}

	tests := []struct {
		name     string
		env      []string
		args     []string
		wantCode int
		wantOut  string // in standard output when wantCode is 0, else in standard error
	}{
		{"full token fits", nil, withTok(fullTok, fitArgs...), 0, "models/pumps"},
		{"read token scores", nil, withTok(readTok, scoreArgs...), 0, "row,log_density,percentile"},
		{"read token lists models", nil, withTok(readTok, "models"), 0, "models/pumps"},
		{"token file from the environment", []string{"MIXD_TOKEN_FILE=" + readTok}, append(append([]string{}, mtls...), scoreArgs...), 0, "row,log_density,percentile"},
		{"read token may not fit", nil, withTok(readTok, fitArgs...), 12, "(PERMISSION_DENIED)"},
		{"read token may not delete", nil, withTok(readTok, "delete", "pumps"), 12, "(PERMISSION_DENIED)"},
		{"no token", nil, append(append([]string{}, mtls...), scoreArgs...), 11, "(UNAUTHENTICATED)"},
		{"no token fit", nil, append(append([]string{}, mtls...), fitArgs...), 11, "(UNAUTHENTICATED)"},
		{"unknown token", nil, withTok(unknownTok, scoreArgs...), 11, "(UNAUTHENTICATED)"},
		{"no client certificate", nil, append([]string{"--token-file", fullTok, "--tls-ca", pki.ca}, scoreArgs...), 5, "(UNAVAILABLE)"},
		{"plain text to a TLS daemon", nil, append([]string{"--token-file", fullTok}, scoreArgs...), 5, "(UNAVAILABLE)"},
		{"daemon certificate not trusted", nil, append([]string{"--token-file", fullTok, "--tls-cert", pki.clientCert, "--tls-key", pki.clientKey}, scoreArgs...), 5, "(UNAVAILABLE)"},
	}
	for _, tc := range tests {
		code, out, errOut := mixctlEnv(t, d, append([]string{"MIXD_TOKEN_FILE="}, tc.env...), tc.args...)
		where := out
		if tc.wantCode != 0 {
			where = errOut
		}
		if code != tc.wantCode || !strings.Contains(where, tc.wantOut) {
			t.Errorf("%s: exit %d, want %d and %q\nstdout: %.300s\nstderr: %s", tc.name, code, tc.wantCode, tc.wantOut, out, errOut)
		}
	}
	// The refused fit and delete changed nothing: one version of pumps.
	code, out, errOut := mixctlEnv(t, d, nil, withTok(readTok, "versions", "pumps")...)
	if code != 0 || strings.Count(out, "models/pumps ") != 1 {
		t.Errorf("versions after refused writes: exit %d\n%s%s", code, out, errOut)
	}
}
