package daemon

import (
	"context"
	"errors"
	"fmt"
	"math"
	"net"
	"slices"
	"sort"
	"strconv"
	"sync"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/test/bufconn"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/types/known/timestamppb"

	"github.com/mixd-dev/mixd/daemon/fitterhost"
	"github.com/mixd-dev/mixd/daemon/store"
	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/mixture"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// memStore is an in-memory store.Store for tests, with the semantics the
// store contract gives: versions newest+1, never reused.
type memStore struct {
	mu      sync.Mutex
	models  map[string][]*mixdv1.Model // by name, oldest first
	maxVer  map[string]int64
	corrupt map[string]bool // names whose reads fail with ErrCorrupt
	gets    int
	getHook func() // called (unlocked) at the start of every Get
}

var _ store.Store = (*memStore)(nil)

func newMemStore() *memStore {
	return &memStore{models: map[string][]*mixdv1.Model{}, maxVer: map[string]int64{}, corrupt: map[string]bool{}}
}

func (s *memStore) Create(ctx context.Context, m *mixdv1.Model) (*mixdv1.Model, error) {
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	if _, err := store.ParseName(m.GetName()); err != nil {
		return nil, fmt.Errorf("%w: %v", store.ErrInvalid, err)
	}
	s.mu.Lock()
	defer s.mu.Unlock()
	c := proto.Clone(m).(*mixdv1.Model)
	s.maxVer[c.Name]++
	c.Version = s.maxVer[c.Name]
	c.CreateTime = timestamppb.Now()
	s.models[c.Name] = append(s.models[c.Name], c)
	return proto.Clone(c).(*mixdv1.Model), nil
}

func (s *memStore) Get(ctx context.Context, name string, version int64) (*mixdv1.Model, error) {
	if h := s.getHook; h != nil {
		h()
	}
	s.mu.Lock()
	defer s.mu.Unlock()
	s.gets++
	if s.corrupt[name] {
		return nil, fmt.Errorf("read %s: %w: checksum mismatch", name, store.ErrCorrupt)
	}
	vs := s.models[name]
	if len(vs) == 0 {
		return nil, fmt.Errorf("model %s: %w", name, store.ErrNotFound)
	}
	if version == 0 {
		return proto.Clone(vs[len(vs)-1]).(*mixdv1.Model), nil
	}
	for _, m := range vs {
		if m.Version == version {
			return proto.Clone(m).(*mixdv1.Model), nil
		}
	}
	return nil, fmt.Errorf("model %s version %d: %w", name, version, store.ErrNotFound)
}

func page(all []*mixdv1.Model, size int, token string) ([]*mixdv1.Model, string, error) {
	start := 0
	if token != "" {
		n, err := strconv.Atoi(token)
		if err != nil || n < 0 || n > len(all) {
			return nil, "", fmt.Errorf("page token %q: %w", token, store.ErrInvalid)
		}
		start = n
	}
	end := min(len(all), start+size)
	next := ""
	if end < len(all) {
		next = strconv.Itoa(end)
	}
	out := make([]*mixdv1.Model, 0, end-start)
	for _, m := range all[start:end] {
		out = append(out, proto.Clone(m).(*mixdv1.Model))
	}
	return out, next, nil
}

func (s *memStore) List(ctx context.Context, size int, token string) ([]*mixdv1.Model, string, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	var names []string
	for n, vs := range s.models {
		if len(vs) > 0 {
			names = append(names, n)
		}
	}
	sort.Strings(names)
	var all []*mixdv1.Model
	for _, n := range names {
		all = append(all, s.models[n][len(s.models[n])-1])
	}
	return page(all, size, token)
}

func (s *memStore) Versions(ctx context.Context, name string, size int, token string) ([]*mixdv1.Model, string, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	vs := s.models[name]
	if len(vs) == 0 {
		return nil, "", fmt.Errorf("model %s: %w", name, store.ErrNotFound)
	}
	return page(vs, size, token)
}

func (s *memStore) Delete(ctx context.Context, name string, version int64) (int64, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	vs := s.models[name]
	if len(vs) == 0 {
		return 0, fmt.Errorf("model %s: %w", name, store.ErrNotFound)
	}
	if version == 0 {
		delete(s.models, name)
		return int64(len(vs)), nil
	}
	for i, m := range vs {
		if m.Version == version {
			s.models[name] = slices.Delete(vs, i, i+1)
			return 1, nil
		}
	}
	return 0, fmt.Errorf("model %s version %d: %w", name, version, store.ErrNotFound)
}

func (s *memStore) Close() error { return nil }

// getCount returns the number of Get calls so far.
func (s *memStore) getCount() int {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.gets
}

// dump returns a deep copy of everything stored, for "nothing changed" checks.
func (s *memStore) dump() map[string][]*mixdv1.Model {
	s.mu.Lock()
	defer s.mu.Unlock()
	out := map[string][]*mixdv1.Model{}
	for n, vs := range s.models {
		for _, m := range vs {
			out[n] = append(out[n], proto.Clone(m).(*mixdv1.Model))
		}
	}
	return out
}

func sameDump(a, b map[string][]*mixdv1.Model) bool {
	if len(a) != len(b) {
		return false
	}
	for n, va := range a {
		vb := b[n]
		if len(va) != len(vb) {
			return false
		}
		for i := range va {
			if !proto.Equal(va[i], vb[i]) {
				return false
			}
		}
	}
	return true
}

// fitFunc is the behaviour of a fake fitter.
type fitFunc func(ctx context.Context, data fitters.Data, s fitters.Settings, progress func(fitters.Progress)) (*fitters.Result, error)

// fakeHost is a FitterHost whose fitters are Go functions.
type fakeHost struct {
	mu       sync.Mutex
	entries  []fitterhost.Entry
	fits     map[string]fitFunc
	calls    int
	problems []string
	reloads  int
}

func newFakeHost() *fakeHost {
	h := &fakeHost{fits: map[string]fitFunc{}}
	h.add(fitters.Info{
		Name: "em", Version: "1.2.3", Description: "test fitter",
		Families:   []mixture.Family{mixture.Gaussian},
		Structures: []mixture.Structure{mixture.Full, mixture.Diagonal, mixture.Spherical, mixture.Tied},
	}, groupFit)
	h.add(fitters.Info{
		Name: "tfake", Version: "0.1.0", Description: "another test fitter",
		Families:   []mixture.Family{mixture.StudentT},
		Structures: []mixture.Structure{mixture.Full},
	}, groupFit)
	return h
}

func (h *fakeHost) add(info fitters.Info, f fitFunc) {
	h.mu.Lock()
	defer h.mu.Unlock()
	h.entries = append(h.entries, fitterhost.Entry{Info: info, Source: "built-in"})
	h.fits[info.Name] = f
}

// setFit replaces the behaviour of fitter name.
func (h *fakeHost) setFit(name string, f fitFunc) {
	h.mu.Lock()
	defer h.mu.Unlock()
	h.fits[name] = f
}

func (h *fakeHost) Fit(ctx context.Context, name string, data fitters.Data, s fitters.Settings, progress func(fitters.Progress)) (*fitters.Result, error) {
	h.mu.Lock()
	f, ok := h.fits[name]
	h.calls++
	h.mu.Unlock()
	if !ok {
		return nil, fmt.Errorf("fit with %q: %w", name, fitterhost.ErrUnknownFitter)
	}
	return f(ctx, data, s, progress)
}

// reloadCount returns the number of Reload calls so far.
func (h *fakeHost) reloadCount() int {
	h.mu.Lock()
	defer h.mu.Unlock()
	return h.reloads
}

// callCount returns the number of Fit calls so far.
func (h *fakeHost) callCount() int {
	h.mu.Lock()
	defer h.mu.Unlock()
	return h.calls
}

func (h *fakeHost) List() []fitterhost.Entry {
	h.mu.Lock()
	defer h.mu.Unlock()
	return slices.Clone(h.entries)
}

func (h *fakeHost) Reload(ctx context.Context) ([]string, error) {
	h.mu.Lock()
	defer h.mu.Unlock()
	h.reloads++
	return slices.Clone(h.problems), nil
}

// groupFit is a deterministic stand-in estimator: rows are dealt to K
// groups by index (i mod K); each component takes its group's share as
// weight, its mean, and the diagonal of the pooled variance plus a ridge.
// It yields valid parameters for any data with at least K rows.
func groupFit(ctx context.Context, data fitters.Data, s fitters.Settings, progress func(fitters.Progress)) (*fitters.Result, error) {
	k := s.Components
	if s.MaxComponents > 0 {
		k = s.MaxComponents
	}
	if data.Rows < k {
		return nil, fitters.Errorf(fitters.FailedPrecondition, "%d rows for %d components", data.Rows, k)
	}
	d := data.Cols
	variance := make([]float64, d)
	mean := make([]float64, d)
	for i := range data.Rows {
		for j, v := range data.Row(i) {
			mean[j] += v / float64(data.Rows)
		}
	}
	for i := range data.Rows {
		for j, v := range data.Row(i) {
			variance[j] += (v - mean[j]) * (v - mean[j]) / float64(data.Rows)
		}
	}
	family := s.Family
	if family == 0 { // unset: the fake, like em, defaults to gaussian
		family = mixture.Gaussian
	}
	p := mixture.Params{Dim: d, Family: family, Structure: mixture.Diagonal}
	for c := range k {
		comp := mixture.Component{Mean: make([]float64, d), Cov: make([]float64, d*d)}
		n := 0
		for i := c; i < data.Rows; i += k {
			n++
			for j, v := range data.Row(i) {
				comp.Mean[j] += v
			}
		}
		for j := range comp.Mean {
			comp.Mean[j] /= float64(n)
			comp.Cov[j*d+j] = variance[j] + 1e-3
		}
		comp.Weight = float64(n) / float64(data.Rows)
		if family == mixture.StudentT {
			comp.DF = 5
		}
		p.Components = append(p.Components, comp)
	}
	if progress != nil {
		progress(fitters.Progress{Components: k, Iteration: 1, Objective: -1})
	}
	return &fitters.Result{Params: p, Report: fitters.Report{
		Iterations: 1, Converged: true, Objective: "log_likelihood",
		LogLikelihood: -1, BIC: 2, AIC: 2, History: []float64{-1},
		Settings: map[string]string{"components": strconv.Itoa(k)},
	}}, nil
}

// blockingFit returns a fit that reports progress then waits for release
// (then behaves like groupFit) or for its context (then returns the
// fitter's cancellation error). started receives once the fit runs.
func blockingFit(started chan<- struct{}, release <-chan struct{}) fitFunc {
	return func(ctx context.Context, data fitters.Data, s fitters.Settings, progress func(fitters.Progress)) (*fitters.Result, error) {
		progress(fitters.Progress{Components: s.Components, Iteration: 1, Objective: -10})
		if started != nil {
			started <- struct{}{}
		}
		select {
		case <-release:
			return groupFit(ctx, data, s, progress)
		case <-ctx.Done():
			return nil, fitters.ContextError(ctx)
		}
	}
}

// testEnv is a Server behind a bufconn listener with a connected client.
type testEnv struct {
	srv    *Server
	store  *memStore
	host   *fakeHost
	client mixdv1.MixtureServiceClient
	conn   *grpc.ClientConn
}

func newTestEnv(t testing.TB, o Options) *testEnv {
	t.Helper()
	st, host := newMemStore(), newFakeHost()
	o.Store, o.Host = st, host
	srv, client, conn := serveOver(t, o)
	return &testEnv{srv: srv, store: st, host: host, client: client, conn: conn}
}

// serveOver starts a Server with o behind a bufconn listener and returns
// it with a connected client; everything stops when the test ends.
func serveOver(t testing.TB, o Options) (*Server, mixdv1.MixtureServiceClient, *grpc.ClientConn) {
	t.Helper()
	srv, err := NewServer(o)
	if err != nil {
		t.Fatal(err)
	}
	lis := bufconn.Listen(1 << 20)
	gs := NewGRPCServer(srv, srv.limits, srv.log)
	go gs.Serve(lis)
	conn, err := grpc.NewClient("passthrough:///bufnet",
		grpc.WithContextDialer(func(ctx context.Context, _ string) (net.Conn, error) { return lis.DialContext(ctx) }),
		grpc.WithTransportCredentials(insecure.NewCredentials()),
		grpc.WithDefaultCallOptions(grpc.MaxCallRecvMsgSize(srv.limits.MaxMessageBytes), grpc.MaxCallSendMsgSize(srv.limits.MaxMessageBytes)),
	)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		conn.Close()
		gs.Stop()
		srv.Close()
	})
	return srv, mixdv1.NewMixtureServiceClient(conn), conn
}

// refModel is a two-component Gaussian mixture in two dimensions whose
// log-densities were computed with scipy (see refRows).
func refModel(name string) *mixdv1.Model {
	return &mixdv1.Model{
		Name: name,
		Parameters: &mixdv1.Parameters{
			Dimension:           2,
			FeatureNames:        []string{"flow", "current"},
			Family:              mixdv1.Family_FAMILY_GAUSSIAN,
			CovarianceStructure: mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_FULL,
			Components: []*mixdv1.Component{
				{Weight: 0.3, Mean: []float64{0, 0}, Covariance: []float64{1, 0.2, 0.2, 0.5}},
				{Weight: 0.7, Mean: []float64{3, 1}, Covariance: []float64{2, -0.3, -0.3, 1}},
			},
		},
		Report: &mixdv1.FitReport{
			Fitter: "em", FitterVersion: "1.2.3", TrainingRows: 7,
			TrainingQuantiles: &mixdv1.DensityQuantiles{
				Levels:       []float64{0, 0.5, 1},
				LogDensities: []float64{-10, -3, -1},
			},
		},
	}
}

// Reference values for refModel, computed with scipy 1.17.1:
// scipy.stats.multivariate_normal(mean, cov).logpdf per component, and
// scipy.special.logsumexp of log(weight) + component log-density for the
// mixture; posteriors are exp(log w_k + log f_k − log p).
var (
	refRows    = []float64{0.1, -0.2, 3, 1, 10, -4, 1.5, 0.5}
	refLogDens = []float64{-2.675293798442708, -2.509983894289833, -22.936951798916613, -2.868852087737922}
	refCompLog = []float64{
		-1.5072213673120212, -5.6635229282763095,
		-6.123525715138109, -2.1614286874386144,
		-90.58004745426855, -22.580276854977882,
		-2.6180909325294124, -2.9991250225171484,
	}
	refPost = []float64{
		0.9647364023007243, 0.03526359769927552,
		0.008086861064060803, 0.9919131389359394,
		1.259209735495194e-30, 1.0,
		0.38550093941118607, 0.6144990605888137,
	}
)

func closeTo(a, b, tol float64) bool {
	if a == b {
		return true
	}
	return math.Abs(a-b) <= tol*math.Max(1, math.Abs(b))
}

// waitFor polls cond until it holds or the test times out.
func waitFor(t *testing.T, what string, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(10 * time.Second)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatalf("timed out waiting for %s", what)
		}
		time.Sleep(5 * time.Millisecond)
	}
}

var errBoom = errors.New("boom")
