package daemon

import (
	"crypto/tls"
	"crypto/x509"
	"errors"
	"fmt"
	"os"
	"sync/atomic"
)

// TLSFiles names the files of the daemon's TLS setup. With CertFile and
// KeyFile set the daemon serves TLS (version 1.2 or later); with
// ClientCAFile also set it requires every client to present a certificate
// signed by one of the CAs in that file (mutual TLS). The files are read at
// start and again on SIGHUP; a reload that fails keeps the certificates in
// force and is logged.
type TLSFiles struct {
	// CertFile is the server certificate chain (PEM).
	CertFile string
	// KeyFile is the server certificate's private key (PEM).
	KeyFile string
	// ClientCAFile holds the PEM certificates of the CAs that sign client
	// certificates; empty means clients are not asked for certificates.
	ClientCAFile string
}

// Enabled reports whether TLS is configured.
func (f TLSFiles) Enabled() bool { return f.CertFile != "" || f.KeyFile != "" || f.ClientCAFile != "" }

// Validate reports a configuration that cannot work.
func (f TLSFiles) Validate() error {
	switch {
	case !f.Enabled():
		return nil
	case f.CertFile == "" || f.KeyFile == "":
		return errors.New("TLS: set both the certificate (--tls-cert) and its key (--tls-key); a client CA (--tls-client-ca) needs them too")
	}
	return nil
}

// tlsReloader holds the current server TLS configuration.
type tlsReloader struct {
	files TLSFiles
	cur   atomic.Pointer[tls.Config]
}

// newTLSReloader loads the files.
func newTLSReloader(f TLSFiles) (*tlsReloader, error) {
	if err := f.Validate(); err != nil {
		return nil, err
	}
	r := &tlsReloader{files: f}
	if err := r.reload(); err != nil {
		return nil, err
	}
	return r, nil
}

// reload reads the files again; on error the configuration in force stays.
func (r *tlsReloader) reload() error {
	c, err := loadTLS(r.files)
	if err != nil {
		return err
	}
	r.cur.Store(c)
	return nil
}

// loadTLS builds a server configuration from the files.
func loadTLS(f TLSFiles) (*tls.Config, error) {
	cert, err := tls.LoadX509KeyPair(f.CertFile, f.KeyFile)
	if err != nil {
		return nil, fmt.Errorf("TLS: load certificate %s and key %s: %w", f.CertFile, f.KeyFile, err)
	}
	c := &tls.Config{
		Certificates: []tls.Certificate{cert},
		MinVersion:   tls.VersionTLS12,
		NextProtos:   []string{"h2"}, // gRPC runs over HTTP/2
	}
	if f.ClientCAFile != "" {
		pem, err := os.ReadFile(f.ClientCAFile)
		if err != nil {
			return nil, fmt.Errorf("TLS: client CA file: %w", err)
		}
		pool := x509.NewCertPool()
		if !pool.AppendCertsFromPEM(pem) {
			return nil, fmt.Errorf("TLS: client CA file %s holds no PEM certificate", f.ClientCAFile)
		}
		c.ClientCAs = pool
		c.ClientAuth = tls.RequireAndVerifyClientCert
	}
	return c, nil
}

// serverConfig returns a configuration that hands every new connection the
// configuration in force at that moment, so a reload applies to new
// connections without a restart.
func (r *tlsReloader) serverConfig() *tls.Config {
	return &tls.Config{
		MinVersion: tls.VersionTLS12,
		NextProtos: []string{"h2"},
		GetConfigForClient: func(*tls.ClientHelloInfo) (*tls.Config, error) {
			return r.cur.Load(), nil
		},
	}
}
