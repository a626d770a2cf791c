package main

import (
	"bufio"
	"bytes"
	"crypto/tls"
	"crypto/x509"
	"os"
	"strings"

	mixdclient "github.com/mixd-dev/mixd/clients/go"
)

// credentials turns the global --token-file and --tls-* flags into client
// options: a bearer token sent with every call, and TLS (optionally
// mutual) instead of plain text.
func (a *app) credentials() ([]mixdclient.Option, error) {
	var opts []mixdclient.Option
	if a.tokenFile != "" {
		tok, err := readToken(a.tokenFile)
		if err != nil {
			return nil, err
		}
		opts = append(opts, mixdclient.WithBearerToken(tok))
	}
	if (a.tlsCert == "") != (a.tlsKey == "") {
		return nil, usagef("--tls-cert and --tls-key must be given together")
	}
	if a.tlsCA == "" && a.tlsCert == "" {
		return opts, nil
	}
	if strings.HasPrefix(a.addr, "unix:") {
		return nil, usagef("--tls-ca, --tls-cert: TLS needs a host:port --addr, not a Unix socket (%s)", a.addr)
	}
	cfg := &tls.Config{MinVersion: tls.VersionTLS12}
	if a.tlsCA != "" {
		pemBytes, err := os.ReadFile(a.tlsCA)
		if err != nil {
			return nil, inputf("--tls-ca: %w", err)
		}
		pool := x509.NewCertPool()
		if !pool.AppendCertsFromPEM(pemBytes) {
			return nil, inputf("--tls-ca: %s holds no PEM certificate", a.tlsCA)
		}
		cfg.RootCAs = pool
	}
	if a.tlsCert != "" {
		cert, err := tls.LoadX509KeyPair(a.tlsCert, a.tlsKey)
		if err != nil {
			return nil, inputf("--tls-cert, --tls-key: %w", err)
		}
		cfg.Certificates = []tls.Certificate{cert}
	}
	return append(opts, mixdclient.WithTLS(cfg)), nil
}

// readToken returns the first non-empty line of the token file at path,
// without surrounding white space.
func readToken(path string) (string, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return "", inputf("--token-file: %w", err)
	}
	sc := bufio.NewScanner(bytes.NewReader(b))
	for sc.Scan() {
		line := strings.TrimSpace(sc.Text())
		if line == "" {
			continue
		}
		if strings.ContainsAny(line, " \t") {
			return "", inputf("--token-file: the first non-empty line of %s holds more than one word; put only the token on it", path)
		}
		return line, nil
	}
	if err := sc.Err(); err != nil {
		return "", inputf("--token-file: %s: %w", path, err)
	}
	return "", inputf("--token-file: %s holds no token (every line is empty)", path)
}
