package daemon

import (
	"bufio"
	"bytes"
	"context"
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/json"
	"encoding/pem"
	"fmt"
	"io"
	"log/slog"
	"math/big"
	"net"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/credentials/insecure"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/metadata"
	reflectionpb "google.golang.org/grpc/reflection/grpc_reflection_v1"
	"google.golang.org/grpc/status"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// Tokens used by the tests (at least 16 characters each).
const (
	fullToken = "full-token-0123456789abcdef"
	readToken = "read-token-0123456789abcdef"
)

func TestParseTokens(t *testing.T) {
	good := "# tokens\n\nfull " + fullToken + " deployer\n\tread   " + readToken + "\n"
	tk, err := ParseTokens([]byte(good), "tokens")
	if err != nil {
		t.Fatal(err)
	}
	if tk.Len() != 2 {
		t.Fatalf("%d tokens", tk.Len())
	}
	for _, c := range []struct {
		tok   string
		ok    bool
		class TokenClass
		label string
	}{
		{fullToken, true, ClassFull, "deployer"},
		{readToken, true, ClassRead, "line 4"},
		{fullToken + "x", false, 0, ""},
		{fullToken[:len(fullToken)-1], false, 0, ""},
		{"", false, 0, ""},
	} {
		e, ok := tk.lookup(c.tok)
		if ok != c.ok || (ok && (e.class != c.class || e.label != c.label)) {
			t.Errorf("lookup(%q) = %+v, %v", c.tok, e, ok)
		}
	}

	for _, c := range []struct{ in, msg string }{
		{"", "no tokens"},
		{"# only a comment\n", "no tokens"},
		{"admin " + fullToken, `line 1: token class "admin"`},
		{"full short", "line 1: the token has 5 characters"},
		{"full", "line 1: want CLASS TOKEN [LABEL], found 1 fields"},
		{"full " + fullToken + " a b", "found 4 fields"},
		{"full " + fullToken + " bad/label", `label "bad/label"`},
		{"full " + fullToken + "\nread " + fullToken, "line 2: the token repeats the token of line 1"},
		{"read " + strings.Repeat("x", maxTokenLen+1), "line 1: the token has 4097"},
		{"read token-with-\x7f-character", "not printable ASCII at position 12"},
	} {
		_, err := ParseTokens([]byte(c.in), "tokens")
		if err == nil || !strings.Contains(err.Error(), c.msg) {
			t.Errorf("ParseTokens(%q): %v, want an error containing %q", c.in, err, c.msg)
		}
	}
}

// FuzzParseTokens: no panic; an accepted file finds each of its tokens.
func FuzzParseTokens(f *testing.F) {
	f.Add([]byte("full " + fullToken + " a\nread " + readToken))
	f.Add([]byte("# c\n\nread 0123456789abcdef0123"))
	f.Add([]byte("full \x00\x01"))
	f.Fuzz(func(t *testing.T, b []byte) {
		tk, err := ParseTokens(b, "fuzz")
		if err != nil {
			return
		}
		for _, line := range strings.Split(string(b), "\n") {
			fs := strings.Fields(line)
			if len(fs) >= 2 && !strings.HasPrefix(fs[0], "#") {
				if _, ok := tk.lookup(fs[1]); !ok {
					t.Fatalf("token %q of an accepted file not found", fs[1])
				}
			}
		}
	})
}

// TestEveryMethodIsClassified makes adding an RPC without deciding which
// token class may call it fail here.
func TestEveryMethodIsClassified(t *testing.T) {
	sd := mixdv1.MixtureService_ServiceDesc
	var names []string
	for _, m := range sd.Methods {
		names = append(names, m.MethodName)
	}
	for _, s := range sd.Streams {
		names = append(names, s.StreamName)
	}
	for _, n := range names {
		full := "/" + sd.ServiceName + "/" + n
		if _, ok := methodClass[full]; !ok {
			t.Errorf("%s is not in methodClass (daemon/auth.go): decide whether a read-only token may call it", full)
		}
	}
	// The list of methods a read-only token may not call.
	for _, n := range []string{"Fit", "CreateFitJob", "CancelFitJob", "DeleteModel", "ImportModel", "ReloadFitters"} {
		if c := requiredClass("/mixd.v1.MixtureService/" + n); c != ClassFull {
			t.Errorf("%s needs %v, want full", n, c)
		}
	}
	if c := requiredClass("/mixd.v1.MixtureService/SomethingNew"); c != ClassFull {
		t.Errorf("an unlisted method needs %v, want full", c)
	}
}

// testPKI is a CA with a server certificate for 127.0.0.1 and a client
// certificate, written as PEM files in dir.
type testPKI struct {
	caFile, certFile, keyFile     string
	clientCertFile, clientKeyFile string
	caPool                        *x509.CertPool
	clientCert                    tls.Certificate
}

func newTestPKI(t *testing.T, dir, name string) *testPKI {
	t.Helper()
	key := func() *ecdsa.PrivateKey {
		k, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
		if err != nil {
			t.Fatal(err)
		}
		return k
	}
	now := time.Now()
	caKey := key()
	caTmpl := &x509.Certificate{
		SerialNumber: big.NewInt(1), Subject: pkix.Name{CommonName: name + " test CA"},
		NotBefore: now.Add(-time.Hour), NotAfter: now.Add(time.Hour),
		IsCA: true, BasicConstraintsValid: true, KeyUsage: x509.KeyUsageCertSign,
	}
	caDER, err := x509.CreateCertificate(rand.Reader, caTmpl, caTmpl, &caKey.PublicKey, caKey)
	if err != nil {
		t.Fatal(err)
	}
	ca, _ := x509.ParseCertificate(caDER)
	p := &testPKI{caPool: x509.NewCertPool()}
	p.caPool.AddCert(ca)
	write := func(file, typ string, der []byte) string {
		path := filepath.Join(dir, name+"-"+file)
		if err := os.WriteFile(path, pem.EncodeToMemory(&pem.Block{Type: typ, Bytes: der}), 0o600); err != nil {
			t.Fatal(err)
		}
		return path
	}
	leaf := func(serial int64, client bool) ([]byte, *ecdsa.PrivateKey) {
		k := key()
		tmpl := &x509.Certificate{
			SerialNumber: big.NewInt(serial), Subject: pkix.Name{CommonName: name + " leaf"},
			NotBefore: now.Add(-time.Hour), NotAfter: now.Add(time.Hour),
			KeyUsage: x509.KeyUsageDigitalSignature,
		}
		if client {
			tmpl.ExtKeyUsage = []x509.ExtKeyUsage{x509.ExtKeyUsageClientAuth}
		} else {
			tmpl.ExtKeyUsage = []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth}
			tmpl.IPAddresses = []net.IP{net.ParseIP("127.0.0.1")}
		}
		der, err := x509.CreateCertificate(rand.Reader, tmpl, ca, &k.PublicKey, caKey)
		if err != nil {
			t.Fatal(err)
		}
		return der, k
	}
	keyDER := func(k *ecdsa.PrivateKey) []byte {
		b, err := x509.MarshalECPrivateKey(k)
		if err != nil {
			t.Fatal(err)
		}
		return b
	}
	p.caFile = write("ca.pem", "CERTIFICATE", caDER)
	sDER, sKey := leaf(2, false)
	p.certFile = write("server.pem", "CERTIFICATE", sDER)
	p.keyFile = write("server-key.pem", "EC PRIVATE KEY", keyDER(sKey))
	cDER, cKey := leaf(3, true)
	p.clientCertFile = write("client.pem", "CERTIFICATE", cDER)
	p.clientKeyFile = write("client-key.pem", "EC PRIVATE KEY", keyDER(cKey))
	p.clientCert, err = tls.LoadX509KeyPair(p.clientCertFile, p.clientKeyFile)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

// runWith runs Run with cfg (fakes for store and host unless set) and
// returns the status lines printed up to and including the listening line,
// keyed by prefix, and the reload channel.
func runWith(t testing.TB, cfg Config) (lines map[string]string, reload chan struct{}) {
	t.Helper()
	pr, pw := io.Pipe()
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	if cfg.Store == nil && cfg.DataDir == "" {
		cfg.Store = newMemStore()
	}
	if cfg.Host == nil && cfg.Executable == "" {
		cfg.Host = newFakeHost()
	}
	if cfg.Listen == "" {
		cfg.Listen = "127.0.0.1:0"
	}
	if cfg.Logger == nil {
		cfg.Logger = slog.New(slog.DiscardHandler)
	}
	reload = make(chan struct{})
	cfg.Reload = reload
	cfg.Status = pw
	cfg.ShutdownTimeout = 5 * time.Second
	go func() {
		done <- Run(ctx, cfg)
		pw.Close()
	}()
	t.Cleanup(func() {
		cancel()
		select {
		case err := <-done:
			if err != nil {
				t.Errorf("Run: %v", err)
			}
		case <-time.After(20 * time.Second):
			t.Error("Run did not return after cancel")
		}
	})
	lines = map[string]string{}
	br := bufio.NewReader(pr)
	for {
		line, err := br.ReadString('\n')
		if err != nil {
			cancel()
			t.Fatalf("no listening line: %v (Run: %v)", err, <-done)
		}
		line = strings.TrimSpace(line)
		for _, p := range []string{ListeningPrefix, MetricsPrefix, HealthPrefix} {
			if v, ok := strings.CutPrefix(line, p); ok {
				lines[p] = v
			}
		}
		if strings.HasPrefix(line, ListeningPrefix) {
			break
		}
	}
	go io.Copy(io.Discard, pr)
	return lines, reload
}

// bearer is per-call credentials carrying a token.
type bearer string

func (b bearer) GetRequestMetadata(context.Context, ...string) (map[string]string, error) {
	return map[string]string{"authorization": "Bearer " + string(b)}, nil
}
func (bearer) RequireTransportSecurity() bool { return false }

func dialWith(t testing.TB, addr string, opts ...grpc.DialOption) *grpc.ClientConn {
	t.Helper()
	conn, err := grpc.NewClient("passthrough:///"+addr, opts...)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { conn.Close() })
	return conn
}

func writeFile(t *testing.T, path, content string) {
	t.Helper()
	if err := os.WriteFile(path, []byte(content), 0o600); err != nil {
		t.Fatal(err)
	}
}

func TestTokensAndPermissions(t *testing.T) {
	dir := t.TempDir()
	tokFile := filepath.Join(dir, "tokens")
	writeFile(t, tokFile, "full "+fullToken+" admin\nread "+readToken+" dashboards\n")
	st := newMemStore()
	if _, err := st.Create(context.Background(), refModel("models/pumps")); err != nil {
		t.Fatal(err)
	}
	before := st.dump()
	lines, reload := runWith(t, Config{TokenFile: tokFile, Store: st})
	addr := lines[ListeningPrefix]
	plain := grpc.WithTransportCredentials(insecure.NewCredentials())
	anon := mixdv1.NewMixtureServiceClient(dialWith(t, addr, plain))
	reader := mixdv1.NewMixtureServiceClient(dialWith(t, addr, plain, grpc.WithPerRPCCredentials(bearer(readToken))))
	writer := mixdv1.NewMixtureServiceClient(dialWith(t, addr, plain, grpc.WithPerRPCCredentials(bearer(fullToken))))
	wrong := mixdv1.NewMixtureServiceClient(dialWith(t, addr, plain, grpc.WithPerRPCCredentials(bearer(fullToken+"0"))))
	ctx := context.Background()

	score := func(c mixdv1.MixtureServiceClient) error {
		_, err := c.Score(ctx, &mixdv1.ScoreRequest{Model: "pumps", Rows: rows2(1, 2)})
		return err
	}
	del := func(c mixdv1.MixtureServiceClient) error {
		_, err := c.DeleteModel(ctx, &mixdv1.DeleteModelRequest{Name: "nope"})
		return err
	}
	fit := func(c mixdv1.MixtureServiceClient) error {
		_, err := fitEvents(ctx, c, &mixdv1.FitRequest{Spec: spec("x", 1), Chunk: chunk(pumpRows(10, 1), false)})
		return err
	}
	imp := func(c mixdv1.MixtureServiceClient) error {
		_, err := c.ImportModel(ctx, &mixdv1.ImportModelRequest{Document: []byte("{}")})
		return err
	}
	reloadF := func(c mixdv1.MixtureServiceClient) error {
		_, err := c.ReloadFitters(ctx, &mixdv1.ReloadFittersRequest{})
		return err
	}
	cancelJ := func(c mixdv1.MixtureServiceClient) error {
		_, err := c.CancelFitJob(ctx, &mixdv1.CancelFitJobRequest{Name: "fitJobs/none"})
		return err
	}
	create := func(c mixdv1.MixtureServiceClient) error {
		s, err := c.CreateFitJob(ctx)
		if err != nil {
			return err
		}
		_ = s.Send(&mixdv1.CreateFitJobRequest{Spec: spec("x", 1)})
		_, err = s.CloseAndRecv()
		return err
	}
	sampleStream := func(c mixdv1.MixtureServiceClient) error {
		s, err := c.SampleStream(ctx, &mixdv1.SampleStreamRequest{Model: "pumps", Count: 3})
		if err != nil {
			return err
		}
		for {
			if _, err := s.Recv(); err != nil {
				if err == io.EOF {
					return nil
				}
				return err
			}
		}
	}
	for _, c := range []struct {
		name string
		call func(mixdv1.MixtureServiceClient) error
		who  mixdv1.MixtureServiceClient
		code codes.Code
		msg  string
	}{
		{"no token score", score, anon, codes.Unauthenticated, "missing bearer token"},
		{"no token stream", sampleStream, anon, codes.Unauthenticated, "missing bearer token"},
		{"wrong token", score, wrong, codes.Unauthenticated, "unknown bearer token"},
		{"wrong token fit", fit, wrong, codes.Unauthenticated, "unknown bearer token"},
		{"read score", score, reader, codes.OK, ""},
		{"read sample stream", sampleStream, reader, codes.OK, ""},
		{"read delete", del, reader, codes.PermissionDenied, `class "full"`},
		{"read fit", fit, reader, codes.PermissionDenied, "Fit needs a token"},
		{"read create job", create, reader, codes.PermissionDenied, "CreateFitJob"},
		{"read cancel job", cancelJ, reader, codes.PermissionDenied, "CancelFitJob"},
		{"read import", imp, reader, codes.PermissionDenied, "ImportModel"},
		{"read reload fitters", reloadF, reader, codes.PermissionDenied, "ReloadFitters"},
		{"full score", score, writer, codes.OK, ""},
		{"full delete passes to the handler", del, writer, codes.NotFound, "nope"},
		{"full cancel passes to the handler", cancelJ, writer, codes.NotFound, "none"},
		{"full import passes to the handler", imp, writer, codes.InvalidArgument, "document"},
	} {
		err := c.call(c.who)
		if status.Code(err) != c.code || !strings.Contains(status.Convert(err).Message(), c.msg) {
			t.Errorf("%s: %v, want %v containing %q", c.name, err, c.code, c.msg)
		}
	}
	if !sameDump(before, st.dump()) {
		t.Fatal("refused calls changed the store")
	}

	// Health needs no token; reflection needs one.
	conn := dialWith(t, addr, plain)
	if r, err := healthpb.NewHealthClient(conn).Check(ctx, &healthpb.HealthCheckRequest{}); err != nil || r.Status != healthpb.HealthCheckResponse_SERVING {
		t.Fatalf("health without a token: %v %v", r, err)
	}
	rs, err := reflectionpb.NewServerReflectionClient(conn).ServerReflectionInfo(ctx)
	if err == nil {
		_ = rs.Send(&reflectionpb.ServerReflectionRequest{MessageRequest: &reflectionpb.ServerReflectionRequest_ListServices{}})
		_, err = rs.Recv()
	}
	if status.Code(err) != codes.Unauthenticated {
		t.Fatalf("reflection without a token: %v", err)
	}

	// SIGHUP (the reload channel) reads the token file again: the read
	// token is revoked, a new one works; a broken file keeps the tokens.
	const newToken = "new-read-token-0123456789"
	writeFile(t, tokFile, "full "+fullToken+"\nread "+newToken+"\n")
	reload <- struct{}{}
	fresh := mixdv1.NewMixtureServiceClient(dialWith(t, addr, plain, grpc.WithPerRPCCredentials(bearer(newToken))))
	waitFor(t, "the new token to be accepted", func() bool { return score(fresh) == nil })
	if err := score(reader); status.Code(err) != codes.Unauthenticated {
		t.Fatalf("revoked token: %v", err)
	}
	writeFile(t, tokFile, "nonsense\n")
	reload <- struct{}{}
	reload <- struct{}{} // the second send waits for the first reload to be taken
	if err := score(fresh); err != nil {
		t.Fatalf("a broken token file replaced the tokens: %v", err)
	}
}

func TestBadSecurityConfig(t *testing.T) {
	dir := t.TempDir()
	p := newTestPKI(t, dir, "a")
	for _, c := range []struct {
		name string
		cfg  Config
		msg  string
	}{
		{"key without cert", Config{TLS: TLSFiles{KeyFile: p.keyFile}}, "set both"},
		{"client CA without cert", Config{TLS: TLSFiles{ClientCAFile: p.caFile}}, "set both"},
		{"missing cert", Config{TLS: TLSFiles{CertFile: filepath.Join(dir, "none"), KeyFile: p.keyFile}}, "load certificate"},
		{"key of another cert", Config{TLS: TLSFiles{CertFile: p.certFile, KeyFile: p.clientKeyFile}}, "private key does not match"},
		{"CA file without PEM", Config{TLS: TLSFiles{CertFile: p.certFile, KeyFile: p.keyFile, ClientCAFile: p.keyFile}}, "holds no PEM certificate"},
		{"missing token file", Config{TokenFile: filepath.Join(dir, "none")}, "token file"},
		{"bad token file", Config{TokenFile: p.caFile}, "line 1: token class"},
		{"manifest without plugin dir", Config{PluginManifest: p.caFile, Executable: "/bin/true"}, "plugin directory"},
	} {
		c.cfg.Store, c.cfg.Logger, c.cfg.Listen = newMemStore(), slog.New(slog.DiscardHandler), "127.0.0.1:0"
		if c.cfg.Executable == "" {
			c.cfg.Host = newFakeHost()
		}
		err := Run(context.Background(), c.cfg)
		if err == nil || !strings.Contains(err.Error(), c.msg) {
			t.Errorf("%s: %v, want an error containing %q", c.name, err, c.msg)
		}
	}
}

func TestMutualTLSAndReload(t *testing.T) {
	dir := t.TempDir()
	p := newTestPKI(t, dir, "first")
	tokFile := filepath.Join(dir, "tokens")
	writeFile(t, tokFile, "read "+readToken+"\n")
	lines, reload := runWith(t, Config{TLS: TLSFiles{CertFile: p.certFile, KeyFile: p.keyFile, ClientCAFile: p.caFile}, TokenFile: tokFile})
	addr := lines[ListeningPrefix]
	ctx := context.Background()
	call := func(cfg *tls.Config, tok string) error {
		opts := []grpc.DialOption{grpc.WithTransportCredentials(credentials.NewTLS(cfg))}
		if tok != "" {
			opts = append(opts, grpc.WithPerRPCCredentials(bearer(tok)))
		}
		c := mixdv1.NewMixtureServiceClient(dialWith(t, addr, opts...))
		_, err := c.ListModels(ctx, &mixdv1.ListModelsRequest{})
		return err
	}
	good := &tls.Config{RootCAs: p.caPool, Certificates: []tls.Certificate{p.clientCert}}
	if err := call(good, readToken); err != nil {
		t.Fatalf("mutual TLS with a token: %v", err)
	}
	if err := call(good, ""); status.Code(err) != codes.Unauthenticated {
		t.Fatalf("mutual TLS without a token: %v", err)
	}
	if err := call(&tls.Config{RootCAs: p.caPool}, readToken); status.Code(err) != codes.Unavailable {
		t.Fatalf("no client certificate: %v, want UNAVAILABLE (handshake refused)", err)
	}
	other := newTestPKI(t, dir, "other")
	if err := call(&tls.Config{RootCAs: p.caPool, Certificates: []tls.Certificate{other.clientCert}}, readToken); status.Code(err) != codes.Unavailable {
		t.Fatalf("client certificate of another CA: %v, want UNAVAILABLE", err)
	}
	if err := call(&tls.Config{RootCAs: other.caPool, Certificates: []tls.Certificate{p.clientCert}}, readToken); status.Code(err) != codes.Unavailable {
		t.Fatalf("server not trusted by the client: %v, want UNAVAILABLE", err)
	}
	plain := mixdv1.NewMixtureServiceClient(dialWith(t, addr, grpc.WithTransportCredentials(insecure.NewCredentials())))
	if _, err := plain.ListModels(ctx, &mixdv1.ListModelsRequest{}); status.Code(err) != codes.Unavailable {
		t.Fatalf("plain text to a TLS server: %v", err)
	}

	// Rotate everything to the other CA's files in place; after SIGHUP new
	// connections use them.
	for _, f := range [][2]string{{other.certFile, p.certFile}, {other.keyFile, p.keyFile}, {other.caFile, p.caFile}} {
		b, err := os.ReadFile(f[0])
		if err != nil {
			t.Fatal(err)
		}
		writeFile(t, f[1], string(b))
	}
	reload <- struct{}{}
	rotated := &tls.Config{RootCAs: other.caPool, Certificates: []tls.Certificate{other.clientCert}}
	waitFor(t, "the rotated certificates", func() bool { return call(rotated, readToken) == nil })
	if err := call(good, readToken); status.Code(err) != codes.Unavailable {
		t.Fatalf("old certificates after the rotation: %v", err)
	}
	// A broken certificate file keeps the rotated certificates.
	writeFile(t, p.certFile, "garbage")
	reload <- struct{}{}
	reload <- struct{}{}
	if err := call(rotated, readToken); err != nil {
		t.Fatalf("a broken certificate file replaced the certificates: %v", err)
	}
}

func TestRequestIDAndHealthListener(t *testing.T) {
	lines, _ := runWith(t, Config{HealthListen: "127.0.0.1:0"})
	conn := dialWith(t, lines[ListeningPrefix], grpc.WithTransportCredentials(insecure.NewCredentials()))
	c := mixdv1.NewMixtureServiceClient(conn)
	ctx := context.Background()
	var hdr metadata.MD
	if _, err := c.ListModels(ctx, &mixdv1.ListModelsRequest{}, grpc.Header(&hdr)); err != nil {
		t.Fatal(err)
	}
	id := hdr.Get(RequestIDHeader)
	if len(id) != 1 || len(id[0]) != 16 {
		t.Fatalf("request id header %v", id)
	}
	// A caller's own id is returned, also on failure and on streams.
	ctx2 := metadata.AppendToOutgoingContext(ctx, RequestIDHeader, "caller-id:42")
	if _, err := c.GetModel(ctx2, &mixdv1.GetModelRequest{Name: "nope"}, grpc.Header(&hdr)); status.Code(err) != codes.NotFound {
		t.Fatal(err)
	}
	if got := hdr.Get(RequestIDHeader); len(got) != 1 || got[0] != "caller-id:42" {
		t.Fatalf("request id %v, want the caller's", got)
	}
	s, err := c.SampleStream(ctx2, &mixdv1.SampleStreamRequest{Model: "nope", Count: 1})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := s.Recv(); status.Code(err) != codes.NotFound {
		t.Fatal(err)
	}
	if h, _ := s.Header(); len(h.Get(RequestIDHeader)) != 1 || h.Get(RequestIDHeader)[0] != "caller-id:42" {
		t.Fatalf("stream header %v", h)
	}
	// A malformed id is replaced.
	ctx3 := metadata.AppendToOutgoingContext(ctx, RequestIDHeader, "bad id with spaces")
	if _, err := c.ListModels(ctx3, &mixdv1.ListModelsRequest{}, grpc.Header(&hdr)); err != nil || hdr.Get(RequestIDHeader)[0] == "bad id with spaces" {
		t.Fatalf("malformed id: %v %v", hdr, err)
	}

	// The health-only listener answers health checks and nothing else.
	hc := dialWith(t, lines[HealthPrefix], grpc.WithTransportCredentials(insecure.NewCredentials()))
	if r, err := healthpb.NewHealthClient(hc).Check(ctx, &healthpb.HealthCheckRequest{Service: "mixd.v1.MixtureService"}); err != nil || r.Status != healthpb.HealthCheckResponse_SERVING {
		t.Fatalf("health listener: %v %v", r, err)
	}
	if _, err := mixdv1.NewMixtureServiceClient(hc).ListModels(ctx, &mixdv1.ListModelsRequest{}); status.Code(err) != codes.Unimplemented {
		t.Fatalf("API on the health listener: %v", err)
	}
}

func TestDefaultTimeout(t *testing.T) {
	ci := &callInterceptors{log: slog.New(slog.DiscardHandler), timeout: 50 * time.Millisecond}
	chain := ci.unary()
	wait := func(ctx context.Context, _ any) (any, error) {
		<-ctx.Done()
		return nil, toStatus(ctx.Err())
	}
	run := func(ctx context.Context) error {
		h := wait
		for i := len(chain) - 1; i >= 0; i-- {
			ic, next := chain[i], h
			h = func(ctx context.Context, req any) (any, error) {
				return ic(ctx, req, &grpc.UnaryServerInfo{FullMethod: "/mixd.v1.MixtureService/Score"}, next)
			}
		}
		_, err := h(ctx, nil)
		return err
	}
	start := time.Now()
	if err := run(context.Background()); status.Code(err) != codes.DeadlineExceeded {
		t.Fatalf("call without a deadline: %v", err)
	}
	if d := time.Since(start); d > 5*time.Second {
		t.Fatalf("the default deadline took %v", d)
	}
	// A caller's own deadline is kept, even when longer.
	ctx, cancel := context.WithTimeout(context.Background(), 300*time.Millisecond)
	defer cancel()
	start = time.Now()
	if err := run(ctx); status.Code(err) != codes.DeadlineExceeded || time.Since(start) < 250*time.Millisecond {
		t.Fatalf("caller's deadline: %v after %v", err, time.Since(start))
	}
}

// lockedBuffer is an io.Writer safe for the daemon's concurrent logging.
type lockedBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (w *lockedBuffer) Write(p []byte) (int, error) {
	w.mu.Lock()
	defer w.mu.Unlock()
	return w.b.Write(p)
}

func (w *lockedBuffer) records(t *testing.T) []map[string]any {
	t.Helper()
	w.mu.Lock()
	defer w.mu.Unlock()
	var out []map[string]any
	for _, line := range strings.Split(strings.TrimSpace(w.b.String()), "\n") {
		if line == "" {
			continue
		}
		var rec map[string]any
		if err := json.Unmarshal([]byte(line), &rec); err != nil {
			t.Fatalf("log line %q: %v", line, err)
		}
		out = append(out, rec)
	}
	return out
}

// TestCallLog checks the one log record per call: at the default level a
// successful call writes none, a failed one writes its request id, method,
// code and the label (never the secret) of the caller's token; at Debug the
// successful call is there too.
func TestCallLog(t *testing.T) {
	for _, level := range []slog.Level{slog.LevelInfo, slog.LevelDebug} {
		t.Run(level.String(), func(t *testing.T) {
			dir := t.TempDir()
			tokFile := filepath.Join(dir, "tokens")
			writeFile(t, tokFile, "read "+readToken+" dashboards\n")
			var logs lockedBuffer
			lines, _ := runWith(t, Config{TokenFile: tokFile, Logger: slog.New(slog.NewJSONHandler(&logs, &slog.HandlerOptions{Level: level}))})
			c := mixdv1.NewMixtureServiceClient(dialWith(t, lines[ListeningPrefix],
				grpc.WithTransportCredentials(insecure.NewCredentials()), grpc.WithPerRPCCredentials(bearer(readToken))))
			ctx := metadata.AppendToOutgoingContext(context.Background(), RequestIDHeader, "log-test-1")
			if _, err := c.ListModels(ctx, &mixdv1.ListModelsRequest{}); err != nil {
				t.Fatal(err)
			}
			ctx = metadata.AppendToOutgoingContext(context.Background(), RequestIDHeader, "log-test-2")
			if _, err := c.GetModel(ctx, &mixdv1.GetModelRequest{Name: "nope"}); status.Code(err) != codes.NotFound {
				t.Fatalf("GetModel: %v", err)
			}
			calls := map[string]map[string]any{}
			waitFor(t, "the call log", func() bool {
				for _, rec := range logs.records(t) {
					if rec["msg"] == "call" {
						calls[rec["request_id"].(string)] = rec
					}
				}
				return calls["log-test-2"] != nil
			})
			failed := calls["log-test-2"]
			if failed["method"] != "/mixd.v1.MixtureService/GetModel" || failed["code"] != "NotFound" || failed["token"] != "dashboards" || failed["level"] != "INFO" {
				t.Fatalf("failed call's record %v", failed)
			}
			ok, logged := calls["log-test-1"]
			if logged != (level == slog.LevelDebug) {
				t.Fatalf("successful call logged = %v at level %v (%v)", logged, level, ok)
			}
			if logged && (ok["method"] != "/mixd.v1.MixtureService/ListModels" || ok["code"] != "OK" || ok["token"] != "dashboards") {
				t.Fatalf("successful call's record %v", ok)
			}
			if strings.Contains(fmt.Sprint(calls), readToken) {
				t.Fatal("a call record holds the token itself")
			}
		})
	}
}
