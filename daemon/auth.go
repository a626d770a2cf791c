package daemon

import (
	"bufio"
	"bytes"
	"context"
	"crypto/sha256"
	"crypto/subtle"
	"fmt"
	"os"
	"regexp"
	"strings"
	"sync/atomic"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/status"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// Bearer tokens.
//
// A token file (mixd serve --token-file) lists the tokens the daemon
// accepts, one per line:
//
//	# comment lines and blank lines are ignored
//	CLASS TOKEN [LABEL]
//
// CLASS is "read" (may score, classify, sample, and read models, jobs and
// fitters) or "full" (may also fit, cancel fit jobs, delete and import
// models, and reload the fitters). TOKEN is 16 to 4096 printable ASCII
// characters without spaces. LABEL, optional, names the token in the log
// (letters, digits, '.', '_', '-'; at most 64); it defaults to "line N".
// Fields are separated by spaces or tabs. A token may appear only once.
//
// Callers send the token in the "authorization" metadata as
// "Bearer TOKEN". A call without a token, or with a token that is not in
// the file, fails with UNAUTHENTICATED; a read token calling a method that
// needs a full token fails with PERMISSION_DENIED. The health service
// (grpc.health.v1) is always open so that probes need no token. The file is
// read again on SIGHUP; a file that fails to parse then leaves the previous
// tokens in force.
//
// Tokens are compared through their SHA-256 digests with
// crypto/subtle.ConstantTimeCompare, against every configured token, so the
// time a check takes does not depend on how much of a token matched.

// TokenClass is what a bearer token allows.
type TokenClass int

// Token classes.
const (
	// ClassRead may call the methods that change nothing stored.
	ClassRead TokenClass = 1
	// ClassFull may call every method.
	ClassFull TokenClass = 2
)

// String returns "read" or "full".
func (c TokenClass) String() string {
	switch c {
	case ClassRead:
		return "read"
	case ClassFull:
		return "full"
	}
	return fmt.Sprintf("TokenClass(%d)", int(c))
}

// Token file limits.
const (
	minTokenLen = 16
	maxTokenLen = 4096
)

var tokenLabelRE = regexp.MustCompile(`^[A-Za-z0-9._-]{1,64}$`)

// tokenEntry is one accepted token, kept as its digest.
type tokenEntry struct {
	digest [sha256.Size]byte
	class  TokenClass
	label  string
}

// Tokens is a parsed token file.
type Tokens struct {
	entries []tokenEntry
}

// Len returns the number of tokens.
func (t *Tokens) Len() int { return len(t.entries) }

// ParseTokens parses a token file's contents; source names the file in
// errors, which also name the line.
func ParseTokens(b []byte, source string) (*Tokens, error) {
	t := &Tokens{}
	firstLine := map[[sha256.Size]byte]int{}
	sc := bufio.NewScanner(bytes.NewReader(b))
	sc.Buffer(make([]byte, 0, 4096), 2*maxTokenLen)
	n := 0
	for sc.Scan() {
		n++
		line := strings.TrimSpace(sc.Text())
		if line == "" || strings.HasPrefix(line, "#") {
			continue
		}
		f := strings.Fields(line)
		if len(f) < 2 || len(f) > 3 {
			return nil, fmt.Errorf("%s line %d: want CLASS TOKEN [LABEL], found %d fields", source, n, len(f))
		}
		var e tokenEntry
		switch f[0] {
		case "read":
			e.class = ClassRead
		case "full":
			e.class = ClassFull
		default:
			return nil, fmt.Errorf("%s line %d: token class %q is not \"read\" or \"full\"", source, n, f[0])
		}
		tok := f[1]
		if len(tok) < minTokenLen || len(tok) > maxTokenLen {
			return nil, fmt.Errorf("%s line %d: the token has %d characters; want %d to %d", source, n, len(tok), minTokenLen, maxTokenLen)
		}
		for i := 0; i < len(tok); i++ {
			if tok[i] < 0x21 || tok[i] > 0x7e {
				return nil, fmt.Errorf("%s line %d: the token has a character that is not printable ASCII at position %d", source, n, i+1)
			}
		}
		e.label = fmt.Sprintf("line %d", n)
		if len(f) == 3 {
			if !tokenLabelRE.MatchString(f[2]) {
				return nil, fmt.Errorf("%s line %d: label %q is not valid (letters, digits, '.', '_', '-'; at most 64)", source, n, f[2])
			}
			e.label = f[2]
		}
		e.digest = sha256.Sum256([]byte(tok))
		if first, dup := firstLine[e.digest]; dup {
			return nil, fmt.Errorf("%s line %d: the token repeats the token of line %d", source, n, first)
		}
		firstLine[e.digest] = n
		t.entries = append(t.entries, e)
	}
	if err := sc.Err(); err != nil {
		return nil, fmt.Errorf("%s line %d: %w", source, n+1, err)
	}
	if len(t.entries) == 0 {
		return nil, fmt.Errorf("%s: no tokens (want lines of CLASS TOKEN [LABEL]); an empty token file would refuse every call", source)
	}
	return t, nil
}

// LoadTokens reads and parses the token file at path.
func LoadTokens(path string) (*Tokens, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("token file: %w", err)
	}
	return ParseTokens(b, "token file "+path)
}

// lookup finds the presented token. It compares the digest of presented
// with every entry, in constant time per entry, and never stops early.
func (t *Tokens) lookup(presented string) (tokenEntry, bool) {
	d := sha256.Sum256([]byte(presented))
	var found tokenEntry
	ok := 0
	for _, e := range t.entries {
		m := subtle.ConstantTimeCompare(d[:], e.digest[:])
		if m == 1 {
			found = e
		}
		ok |= m
	}
	return found, ok == 1
}

// methodClass is the token class each method needs. Methods not listed
// need a full token (a method added to the API is closed to read tokens
// until it is listed here); the health service is open (see openMethod).
var methodClass = map[string]TokenClass{
	mixdv1.MixtureService_Fit_FullMethodName:               ClassFull,
	mixdv1.MixtureService_CreateFitJob_FullMethodName:      ClassFull,
	mixdv1.MixtureService_CancelFitJob_FullMethodName:      ClassFull,
	mixdv1.MixtureService_DeleteModel_FullMethodName:       ClassFull,
	mixdv1.MixtureService_ImportModel_FullMethodName:       ClassFull,
	mixdv1.MixtureService_ReloadFitters_FullMethodName:     ClassFull,
	mixdv1.MixtureService_GetFitJob_FullMethodName:         ClassRead,
	mixdv1.MixtureService_WatchFitJob_FullMethodName:       ClassRead,
	mixdv1.MixtureService_ListFitJobs_FullMethodName:       ClassRead,
	mixdv1.MixtureService_Score_FullMethodName:             ClassRead,
	mixdv1.MixtureService_ScoreStream_FullMethodName:       ClassRead,
	mixdv1.MixtureService_Classify_FullMethodName:          ClassRead,
	mixdv1.MixtureService_ClassifyStream_FullMethodName:    ClassRead,
	mixdv1.MixtureService_Sample_FullMethodName:            ClassRead,
	mixdv1.MixtureService_SampleStream_FullMethodName:      ClassRead,
	mixdv1.MixtureService_GetModel_FullMethodName:          ClassRead,
	mixdv1.MixtureService_ListModels_FullMethodName:        ClassRead,
	mixdv1.MixtureService_ListModelVersions_FullMethodName: ClassRead,
	mixdv1.MixtureService_ExportModel_FullMethodName:       ClassRead,
	mixdv1.MixtureService_ListFitters_FullMethodName:       ClassRead,
	"/mixd.v1.MixtureService/Predict":                      ClassRead,
	"/mixd.v1.MixtureService/CompareModels":                ClassRead,
	// Server reflection describes the API; it reveals nothing stored.
	"/grpc.reflection.v1.ServerReflection/ServerReflectionInfo":      ClassRead,
	"/grpc.reflection.v1alpha.ServerReflection/ServerReflectionInfo": ClassRead,
}

// openMethod reports whether method needs no token: the health service.
func openMethod(method string) bool {
	return strings.HasPrefix(method, "/grpc.health.v1.Health/")
}

// requiredClass returns the class a method needs.
func requiredClass(method string) TokenClass {
	if c, ok := methodClass[method]; ok {
		return c
	}
	return ClassFull
}

// authenticator checks bearer tokens; its token set can be replaced while
// calls run.
type authenticator struct {
	path   string
	tokens atomic.Pointer[Tokens]
}

// newAuthenticator loads the token file at path.
func newAuthenticator(path string) (*authenticator, error) {
	a := &authenticator{path: path}
	if err := a.reload(); err != nil {
		return nil, err
	}
	return a, nil
}

// reload reads the token file again; on error the tokens in force stay.
func (a *authenticator) reload() error {
	t, err := LoadTokens(a.path)
	if err != nil {
		return err
	}
	a.tokens.Store(t)
	return nil
}

// tokenLabelKey carries the label of the caller's token in a context.
type tokenLabelKey struct{}

// TokenLabel returns the label of the token a call was authenticated with,
// or "" when tokens are not in use.
func TokenLabel(ctx context.Context) string {
	s, _ := ctx.Value(tokenLabelKey{}).(string)
	return s
}

// check authenticates and authorises a call of method. It returns ctx
// carrying the token's label.
func (a *authenticator) check(ctx context.Context, method string) (context.Context, error) {
	if openMethod(method) {
		return ctx, nil
	}
	md, _ := metadata.FromIncomingContext(ctx)
	vals := md.Get("authorization")
	if len(vals) == 0 {
		return ctx, status.Error(codes.Unauthenticated, `missing bearer token: send the metadata "authorization: Bearer TOKEN" (mixd serve --token-file)`)
	}
	if len(vals) > 1 {
		return ctx, status.Errorf(codes.Unauthenticated, `%d "authorization" metadata values; send exactly one`, len(vals))
	}
	scheme, tok, ok := strings.Cut(strings.TrimSpace(vals[0]), " ")
	if !ok || !strings.EqualFold(scheme, "bearer") {
		return ctx, status.Error(codes.Unauthenticated, `the "authorization" metadata is not of the form "Bearer TOKEN"`)
	}
	e, found := a.tokens.Load().lookup(strings.TrimSpace(tok))
	if !found {
		return ctx, status.Error(codes.Unauthenticated, "unknown bearer token")
	}
	if need := requiredClass(method); e.class < need {
		return ctx, status.Errorf(codes.PermissionDenied, "%s needs a token of class %q; the token %q is of class %q", method, need, e.label, e.class)
	}
	if cs := callStateFrom(ctx); cs != nil {
		cs.token = e.label
	}
	return context.WithValue(ctx, tokenLabelKey{}, e.label), nil
}
