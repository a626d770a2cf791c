// Package fitterhost supervises the fitter plugin processes of the mixd
// daemon. Built-in fitters run as child processes of the daemon's own
// executable (`mixd fitter <name>`); external fitters are the executables in
// a plugin directory. Each fitter gets one hashicorp/go-plugin client,
// launched on first use and shared by concurrent fits. A process that crashes
// or is killed fails the fits running on it with an error wrapping
// ErrUnavailable and is relaunched by the next call. Reload rescans the plugin
// directory; fits already running keep the process they started on, which is
// ended when its last fit finishes.
package fitterhost

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"sort"
	"strconv"
	"strings"
	"sync"
	"time"

	"github.com/hashicorp/go-hclog"
	"github.com/hashicorp/go-plugin"

	"github.com/mixd-dev/mixd/fitters"
)

// SourceBuiltIn is the Entry.Source of a built-in fitter.
const SourceBuiltIn = "built-in"

// DefaultStartTimeout is used when Config.StartTimeout is zero.
const DefaultStartTimeout = 30 * time.Second

var (
	// ErrUnknownFitter is wrapped by Fit when no fitter has the requested name.
	ErrUnknownFitter = errors.New("unknown fitter")
	// ErrUnavailable is wrapped by Fit when the fitter's process could not be
	// started, crashed or was killed during the fit, or the host is closed.
	// The call may be retried: the next call relaunches the process.
	ErrUnavailable = errors.New("fitter unavailable")
)

// Config configures a Host.
type Config struct {
	// SelfExecutable is the path of the daemon's executable, which runs the
	// built-in fitters. Required when BuiltIn is not empty.
	SelfExecutable string
	// SelfArgs returns the arguments that make SelfExecutable serve the
	// built-in fitter name; nil means {"fitter", name}.
	SelfArgs func(name string) []string
	// BuiltIn lists the names of the built-in fitters.
	BuiltIn []string
	// PluginDir, when set, holds external fitters: every regular executable
	// file in it (not in subdirectories; names starting with "." are
	// skipped). Each one is started to ask its name. It must exist.
	PluginDir string
	// Logger receives the host's logs and, through go-plugin, the plugins'
	// logs; nil means slog.Default().
	Logger *slog.Logger
	// StartTimeout bounds the start of a plugin process; zero means
	// DefaultStartTimeout.
	StartTimeout time.Duration
	// Manifest, when set, is the path of a manifest pinning the SHA-256 of
	// every executable of PluginDir that may run (see manifest.go).
	Manifest string
	// Hooks receive plugin process events (for metrics).
	Hooks Hooks
}

// Entry describes an available fitter.
type Entry struct {
	// Info is what the fitter's Describe returned (only Name is set when the
	// fitter could not be described; the reason is logged).
	Info fitters.Info
	// Source is SourceBuiltIn or the executable's path.
	Source string
	// SHA256 is the hex SHA-256 of an external fitter's executable, empty for
	// built-in fitters.
	SHA256 string
}

// Host supervises fitter plugin processes. Its methods are safe for
// concurrent use.
type Host struct {
	cfg  Config
	log  *slog.Logger
	hlog hclog.Logger

	reloadMu sync.Mutex // one Reload at a time

	mu      sync.Mutex // guards the fields below and every entry's and process's mutable fields
	closed  bool
	byName  map[string]*entry
	running map[*process]struct{} // every started process not yet killed
}

// entry is one available fitter.
type entry struct {
	name   string
	source string
	sha256 string
	path   string
	args   []string
	pinned bool // sha256 is pinned by the manifest: checked at every launch

	launchMu  sync.Mutex // serialises launches of this fitter
	info      fitters.Info
	described bool
	cur       *process // the process new calls use; nil until launched
}

// process is one running plugin process.
type process struct {
	client *plugin.Client
	rpc    plugin.ClientProtocol
	fitter fitters.Fitter
	refs   int  // calls in flight
	stale  bool // replaced, crashed or host closed: kill once refs is zero
}

var nameRE = regexp.MustCompile(`^[A-Za-z0-9][A-Za-z0-9._-]{0,63}$`)

// New returns a host for the configured fitters. It starts no built-in
// fitter; it starts every executable in PluginDir once to learn its name
// (problems with individual executables are logged as warnings and the
// executable is left out; see Reload).
func New(cfg Config) (*Host, error) {
	if cfg.Logger == nil {
		cfg.Logger = slog.Default()
	}
	if cfg.StartTimeout <= 0 {
		cfg.StartTimeout = DefaultStartTimeout
	}
	if cfg.SelfArgs == nil {
		cfg.SelfArgs = func(name string) []string { return []string{"fitter", name} }
	}
	if cfg.Manifest != "" && cfg.PluginDir == "" {
		return nil, errors.New("fitter host: a fitter manifest pins executables of the plugin directory; set the plugin directory too")
	}
	if len(cfg.BuiltIn) > 0 && cfg.SelfExecutable == "" {
		return nil, errors.New("fitter host: SelfExecutable is required to run built-in fitters")
	}
	h := &Host{
		cfg:     cfg,
		log:     cfg.Logger,
		hlog:    newHCLogAdapter(cfg.Logger).Named("fitter-host"),
		byName:  map[string]*entry{},
		running: map[*process]struct{}{},
	}
	for _, name := range cfg.BuiltIn {
		if !nameRE.MatchString(name) {
			return nil, fmt.Errorf("fitter host: built-in fitter name %q is not valid (letters, digits, '.', '_', '-'; at most 64)", name)
		}
		if _, dup := h.byName[name]; dup {
			return nil, fmt.Errorf("fitter host: built-in fitter %q is listed twice", name)
		}
		h.byName[name] = &entry{name: name, source: SourceBuiltIn, path: cfg.SelfExecutable, args: cfg.SelfArgs(name)}
	}
	if cfg.PluginDir != "" {
		problems, err := h.Reload(context.Background())
		if err != nil {
			return nil, err
		}
		for _, p := range problems {
			h.log.Warn("fitter plugin ignored", "problem", p)
		}
	}
	return h, nil
}

// List returns the available fitters sorted by name. A fitter not described
// yet is started and asked (once; the answer is cached per executable).
func (h *Host) List() []Entry {
	h.mu.Lock()
	entries := make([]*entry, 0, len(h.byName))
	for _, e := range h.byName {
		entries = append(entries, e)
	}
	h.mu.Unlock()
	sort.Slice(entries, func(i, j int) bool { return entries[i].name < entries[j].name })
	out := make([]Entry, 0, len(entries))
	for _, e := range entries {
		info, err := h.describe(e)
		if err != nil {
			h.log.Warn("cannot describe fitter", "fitter", e.name, "error", err)
			info = fitters.Info{Name: e.name}
		}
		out = append(out, Entry{Info: info, Source: e.source, SHA256: e.sha256})
	}
	return out
}

// describe returns e's cached Info, asking the fitter the first time.
func (h *Host) describe(e *entry) (fitters.Info, error) {
	h.mu.Lock()
	if e.described {
		info := e.info
		h.mu.Unlock()
		return info, nil
	}
	h.mu.Unlock()
	p, err := h.acquire(e)
	if err != nil {
		return fitters.Info{}, err
	}
	ctx, cancel := context.WithTimeout(context.Background(), h.cfg.StartTimeout)
	defer cancel()
	info, err := p.fitter.Describe(ctx)
	h.release(e, p, err != nil && h.lost(p, err))
	if err != nil {
		return fitters.Info{}, err
	}
	if info.Name != e.name {
		h.log.Warn("built-in fitter describes itself under another name", "fitter", e.name, "described_as", info.Name)
		info.Name = e.name
	}
	h.mu.Lock()
	e.info, e.described = info, true
	h.mu.Unlock()
	return info, nil
}

// Fit runs a fit on the fitter called name. Unknown names give an error
// wrapping ErrUnknownFitter that lists the available fitters; a plugin
// process that cannot start, or exits during the fit, gives an error wrapping
// ErrUnavailable (the next call relaunches it); the fitter's own errors keep
// their fitters.Code. A result whose parameters fail validation is an
// Internal error: nothing invalid leaves the host.
func (h *Host) Fit(ctx context.Context, name string, data fitters.Data, s fitters.Settings, progress func(fitters.Progress)) (*fitters.Result, error) {
	e, err := h.lookup(name)
	if err != nil {
		return nil, err
	}
	p, err := h.acquire(e)
	if err != nil {
		return nil, err
	}
	res, err := p.fitter.Fit(ctx, data, s, progress)
	lost := err != nil && ctx.Err() == nil && h.lost(p, err)
	h.release(e, p, lost)
	if lost {
		h.cfg.Hooks.lost(name)
	}
	switch {
	case lost:
		return nil, fmt.Errorf("%w: fitter %q process exited during the fit: %v", ErrUnavailable, name, err)
	case err != nil:
		return nil, fmt.Errorf("fitter %q: %w", name, err)
	}
	if res == nil {
		return nil, fitters.Errorf(fitters.Internal, "fitter %q returned neither a result nor an error", name)
	}
	if res.Params.Dim != data.Cols {
		return nil, fitters.Errorf(fitters.Internal, "fitter %q returned a model of dimension %d for data with %d columns", name, res.Params.Dim, data.Cols)
	}
	if err := res.Params.Validate(); err != nil {
		return nil, &fitters.Error{Code: fitters.Internal, Msg: fmt.Sprintf("fitter %q returned invalid parameters", name), Err: err}
	}
	return res, nil
}

func (h *Host) lookup(name string) (*entry, error) {
	h.mu.Lock()
	defer h.mu.Unlock()
	if h.closed {
		return nil, fmt.Errorf("%w: the fitter host is closed", ErrUnavailable)
	}
	if e, ok := h.byName[name]; ok {
		return e, nil
	}
	names := make([]string, 0, len(h.byName))
	for n := range h.byName {
		names = append(names, strconv.Quote(n))
	}
	sort.Strings(names)
	avail := "none"
	if len(names) > 0 {
		avail = strings.Join(names, ", ")
	}
	return nil, fmt.Errorf("%w %q (available: %s)", ErrUnknownFitter, name, avail)
}

// acquire returns e's live process, launching one when there is none, and
// counts a call on it; release must follow.
func (h *Host) acquire(e *entry) (*process, error) {
	e.launchMu.Lock()
	defer e.launchMu.Unlock()
	h.mu.Lock()
	if h.closed {
		h.mu.Unlock()
		return nil, fmt.Errorf("%w: the fitter host is closed", ErrUnavailable)
	}
	if p := e.cur; p != nil && !p.stale && !p.client.Exited() {
		p.refs++
		h.mu.Unlock()
		return p, nil
	}
	var dead *process
	if p := e.cur; p != nil {
		p.stale = true
		if p.refs == 0 {
			dead = p
			delete(h.running, p)
		}
		e.cur = nil
	}
	h.mu.Unlock()
	if dead != nil {
		dead.client.Kill()
	}

	p, err := h.launch(e)
	if err != nil {
		h.cfg.Hooks.launchFailed(e.name)
		return nil, fmt.Errorf("%w: starting fitter %q: %v", ErrUnavailable, e.name, err)
	}
	h.cfg.Hooks.launched(e.name)
	h.mu.Lock()
	defer h.mu.Unlock()
	if h.closed {
		go p.client.Kill()
		return nil, fmt.Errorf("%w: the fitter host is closed", ErrUnavailable)
	}
	h.running[p] = struct{}{}
	e.cur = p
	p.refs++
	if h.byName[e.name] != e {
		// Reload replaced or removed the fitter while it was starting: this
		// call uses the process, and it ends with the call.
		p.stale = true
		e.cur = nil
	}
	return p, nil
}

// release ends a call on p. lost marks the process as gone; a stale process
// is killed when its last call ends.
func (h *Host) release(e *entry, p *process, lost bool) {
	h.mu.Lock()
	p.refs--
	if lost {
		p.stale = true
		if e.cur == p {
			e.cur = nil
		}
	}
	kill := p.stale && p.refs == 0
	if kill {
		delete(h.running, p)
	}
	h.mu.Unlock()
	if kill {
		p.client.Kill()
	}
}

// lost reports whether err means p's process or connection is gone rather
// than a failure reported by the fitter.
func (h *Host) lost(p *process, err error) bool {
	if errors.Is(err, fitters.ErrTransport) || p.client.Exited() {
		return true
	}
	h.mu.Lock()
	closed := h.closed
	h.mu.Unlock()
	if closed {
		return true
	}
	// A broken connection can also surface as INTERNAL or CANCELLED from the
	// transport; a fitter that is alive answers a ping.
	switch fitters.CodeOf(err) {
	case fitters.Internal, fitters.Canceled:
		return p.rpc.Ping() != nil
	}
	return false
}

// launch starts a plugin process for e and connects to it.
func (h *Host) launch(e *entry) (*process, error) {
	cmd := exec.Command(e.path, e.args...)
	cmd.Env = append(hostEnv(), fitters.ParentPIDEnv+"="+strconv.Itoa(os.Getpid()))
	var secure *plugin.SecureConfig
	if e.pinned {
		sum, err := hex.DecodeString(e.sha256)
		if err != nil {
			return nil, fmt.Errorf("pinned digest of %s: %v", e.path, err)
		}
		secure = &plugin.SecureConfig{Checksum: sum, Hash: sha256.New()}
	}
	client := plugin.NewClient(&plugin.ClientConfig{
		SecureConfig:     secure,
		HandshakeConfig:  fitters.Handshake,
		Plugins:          fitters.PluginSet(nil),
		Cmd:              cmd,
		SkipHostEnv:      true, // cmd.Env already holds the environment
		AllowedProtocols: []plugin.Protocol{plugin.ProtocolGRPC},
		AutoMTLS:         true,
		Managed:          true,
		Logger:           h.hlog.Named(e.name),
		StartTimeout:     h.cfg.StartTimeout,
		GRPCDialOptions:  fitters.GRPCDialOptions(),
	})
	rpc, err := client.Client()
	if err != nil {
		client.Kill()
		if errors.Is(err, plugin.ErrChecksumsDoNotMatch) {
			h.log.Error("fitter plugin refused: its executable changed since it was checked against the manifest", "fitter", e.name, "path", e.path, "pinned_sha256", e.sha256)
		}
		return nil, err
	}
	raw, err := rpc.Dispense(fitters.PluginName)
	if err != nil {
		client.Kill()
		return nil, err
	}
	f, ok := raw.(fitters.Fitter)
	if !ok {
		client.Kill()
		return nil, fmt.Errorf("plugin dispensed %T, not a fitter", raw)
	}
	h.log.Debug("fitter process started", "fitter", e.name, "source", e.source)
	return &process{client: client, rpc: rpc, fitter: f}, nil
}

// hostEnv returns the host's environment without a parent-pid setting it
// may have inherited.
func hostEnv() []string {
	env := os.Environ()
	out := env[:0:0]
	for _, kv := range env {
		if !strings.HasPrefix(kv, fitters.ParentPIDEnv+"=") {
			out = append(out, kv)
		}
	}
	return out
}

// Reload rescans PluginDir. New executables, and executables whose content
// changed (by SHA-256), are started and asked their name; unchanged ones keep
// their process; fitters whose executable disappeared are removed. Fits
// already running keep the process they started on until they end. Each
// executable that cannot be used (does not start, fails Describe, gives an
// invalid name, or a name already taken by a built-in fitter or another
// executable) is left out with a problem string naming its path. The error
// is for a plugin directory that cannot be read; nothing changes then.
func (h *Host) Reload(ctx context.Context) (problems []string, err error) {
	if h.cfg.PluginDir == "" {
		return nil, nil
	}
	h.reloadMu.Lock()
	defer h.reloadMu.Unlock()
	dirents, err := os.ReadDir(h.cfg.PluginDir)
	if err != nil {
		return nil, fmt.Errorf("reading the fitter plugin directory: %w", err)
	}
	var pins manifest
	if h.cfg.Manifest != "" {
		if pins, err = loadManifest(h.cfg.Manifest); err != nil {
			return nil, err
		}
	}

	h.mu.Lock()
	if h.closed {
		h.mu.Unlock()
		return nil, fmt.Errorf("%w: the fitter host is closed", ErrUnavailable)
	}
	byPath := map[string]*entry{}
	builtIn := map[string]bool{}
	for _, e := range h.byName {
		if e.source == SourceBuiltIn {
			builtIn[e.name] = true
		} else {
			byPath[e.source] = e
		}
	}
	h.mu.Unlock()

	var kept, fresh []*entry
	for _, de := range dirents {
		if strings.HasPrefix(de.Name(), ".") {
			continue
		}
		path := filepath.Join(h.cfg.PluginDir, de.Name())
		fi, err := os.Stat(path)
		if err != nil {
			problems = append(problems, fmt.Sprintf("%s: %v", path, err))
			continue
		}
		if !fi.Mode().IsRegular() || fi.Mode().Perm()&0o111 == 0 {
			continue
		}
		sum, err := fileSHA256(path)
		if err != nil {
			problems = append(problems, fmt.Sprintf("%s: %v", path, err))
			continue
		}
		if pins != nil {
			if err := pins.check(de.Name(), sum); err != nil {
				h.log.Error("fitter plugin refused by the manifest", "path", path, "sha256", sum, "manifest", h.cfg.Manifest, "reason", err)
				h.cfg.Hooks.refused(path)
				problems = append(problems, fmt.Sprintf("%s: %v", path, err))
				continue
			}
		}
		if old := byPath[path]; old != nil && old.sha256 == sum {
			kept = append(kept, old)
			continue
		}
		e, p, err := h.probe(ctx, path, sum, pins != nil)
		if err != nil {
			problems = append(problems, fmt.Sprintf("%s: %v", path, err))
			continue
		}
		e.cur = p
		fresh = append(fresh, e)
	}

	// Unchanged fitters keep their names; new ones claim theirs in path order.
	accepted := map[string]*entry{}
	var discard []*process
	for _, e := range append(kept, fresh...) {
		switch other, dup := accepted[e.name]; {
		case builtIn[e.name]:
			problems = append(problems, fmt.Sprintf("%s: fitter name %q is taken by a built-in fitter; ignored", e.source, e.name))
		case dup:
			problems = append(problems, fmt.Sprintf("%s: fitter name %q is already provided by %s; ignored", e.source, e.name, other.source))
		default:
			accepted[e.name] = e
			continue
		}
		if byPath[e.source] != e { // a fresh process nobody uses
			discard = append(discard, e.cur)
		}
	}

	h.mu.Lock()
	if h.closed {
		h.mu.Unlock()
		for _, e := range fresh {
			e.cur.client.Kill()
		}
		return nil, fmt.Errorf("%w: the fitter host is closed", ErrUnavailable)
	}
	next := map[string]*entry{}
	for name, e := range h.byName {
		if e.source == SourceBuiltIn {
			next[name] = e
		}
	}
	for name, e := range accepted {
		next[name] = e
		if e.cur != nil && byPath[e.source] != e { // a fresh process
			h.running[e.cur] = struct{}{}
		}
	}
	var kill []*process
	for _, e := range byPath {
		if accepted[e.name] == e {
			continue
		}
		// Removed, changed or displaced: its process ends with its last call.
		if p := e.cur; p != nil {
			p.stale = true
			e.cur = nil
			if p.refs == 0 {
				delete(h.running, p)
				kill = append(kill, p)
			}
		}
	}
	h.byName = next
	h.mu.Unlock()
	for _, p := range append(kill, discard...) {
		p.client.Kill()
	}
	sort.Strings(problems)
	return problems, nil
}

// probe starts the executable at path and asks its name.
func (h *Host) probe(ctx context.Context, path, sum string, pinned bool) (*entry, *process, error) {
	e := &entry{source: path, sha256: sum, path: path, pinned: pinned}
	e.name = filepath.Base(path)
	p, err := h.launch(e)
	if err != nil {
		h.cfg.Hooks.launchFailed(e.name)
		return nil, nil, fmt.Errorf("not a working fitter plugin: %v", err)
	}
	ctx, cancel := context.WithTimeout(ctx, h.cfg.StartTimeout)
	defer cancel()
	info, err := p.fitter.Describe(ctx)
	if err != nil {
		p.client.Kill()
		return nil, nil, fmt.Errorf("describing the fitter: %v", err)
	}
	if !nameRE.MatchString(info.Name) {
		p.client.Kill()
		return nil, nil, fmt.Errorf("fitter name %q is not valid (letters, digits, '.', '_', '-'; at most 64)", info.Name)
	}
	e.name, e.info, e.described = info.Name, info, true
	h.cfg.Hooks.launched(e.name)
	return e, p, nil
}

func fileSHA256(path string) (string, error) {
	f, err := os.Open(path)
	if err != nil {
		return "", err
	}
	defer f.Close()
	h := sha256.New()
	if _, err := io.Copy(h, f); err != nil {
		return "", err
	}
	return hex.EncodeToString(h.Sum(nil)), nil
}

// Close kills every plugin process, including those of running fits (which
// then fail with ErrUnavailable). Later calls fail with ErrUnavailable.
func (h *Host) Close() error {
	h.mu.Lock()
	h.closed = true
	procs := make([]*process, 0, len(h.running))
	for p := range h.running {
		p.stale = true
		procs = append(procs, p)
	}
	h.running = map[*process]struct{}{}
	for _, e := range h.byName {
		e.cur = nil
	}
	h.mu.Unlock()
	var wg sync.WaitGroup
	for _, p := range procs {
		wg.Add(1)
		go func() {
			defer wg.Done()
			p.client.Kill()
		}()
	}
	wg.Wait()
	return nil
}
