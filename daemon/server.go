package daemon

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"slices"
	"strings"
	"sync"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"github.com/mixd-dev/mixd/daemon/fitterhost"
	"github.com/mixd-dev/mixd/daemon/modeldoc"
	"github.com/mixd-dev/mixd/daemon/store"
	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/mixture"
	"github.com/mixd-dev/mixd/fitters/pbconv"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// FitterHost is what the server needs of the fitter host;
// *fitterhost.Host satisfies it.
type FitterHost interface {
	// Fit runs fitter name on data.
	Fit(ctx context.Context, name string, data fitters.Data, s fitters.Settings, progress func(fitters.Progress)) (*fitters.Result, error)
	// List describes the available fitters.
	List() []fitterhost.Entry
	// Reload rescans the plugin directory.
	Reload(ctx context.Context) ([]string, error)
}

var _ FitterHost = (*fitterhost.Host)(nil)

// DefaultMaxConcurrentFits is the default number of fits that run at once;
// further jobs wait in state QUEUED.
const DefaultMaxConcurrentFits = 2

// DefaultFitter is the fitter used when a FitSpec names none.
const DefaultFitter = "em"

// Options configure a Server.
type Options struct {
	// Store holds the models (required).
	Store store.Store
	// Host runs the fitters (required).
	Host FitterHost
	// Limits bound requests; zero fields take their defaults.
	Limits Limits
	// CacheBytes is the byte budget of the model cache; 0 means
	// DefaultCacheBytes.
	CacheBytes int64
	// MaxConcurrentFits is how many fits run at once; 0 means
	// DefaultMaxConcurrentFits.
	MaxConcurrentFits int
	// Logger receives the server's log; nil discards it.
	Logger *slog.Logger
	// Replica configures sharing models and fit jobs with other daemons;
	// used only when Store supports it (replica.go).
	Replica ReplicaOptions
}

// Server implements mixdv1.MixtureServiceServer: it validates requests,
// runs fit jobs through the fitter host, stores their models, and serves
// Score, Classify and Sample from a cache of built models.
type Server struct {
	mixdv1.UnimplementedMixtureServiceServer

	store   store.Store
	host    FitterHost
	limits  Limits
	log     *slog.Logger
	cache   *modelCache
	jobs    *jobManager
	slots   chan struct{} // one token per running fit
	replica *replica      // nil unless the store is shared (replica.go)

	baseCtx    context.Context // parent of every job; cancelled by Close
	baseCancel context.CancelCauseFunc
	wg         sync.WaitGroup // job goroutines
	closeOnce  sync.Once

	mu      sync.Mutex
	closing bool // set by Close; no job goroutine starts after it
}

var _ mixdv1.MixtureServiceServer = (*Server)(nil)

// NewServer returns a Server over o.Store and o.Host.
func NewServer(o Options) (*Server, error) {
	if o.Store == nil || o.Host == nil {
		return nil, errors.New("daemon: NewServer needs a store and a fitter host")
	}
	if err := o.Limits.Validate(); err != nil {
		return nil, fmt.Errorf("daemon: %w", err)
	}
	if o.CacheBytes < 0 {
		return nil, fmt.Errorf("daemon: cache bytes is %d, must not be negative", o.CacheBytes)
	}
	if o.CacheBytes == 0 {
		o.CacheBytes = DefaultCacheBytes
	}
	if o.MaxConcurrentFits < 0 {
		return nil, fmt.Errorf("daemon: max concurrent fits is %d, must not be negative", o.MaxConcurrentFits)
	}
	if o.MaxConcurrentFits == 0 {
		o.MaxConcurrentFits = DefaultMaxConcurrentFits
	}
	if o.Logger == nil {
		o.Logger = slog.New(slog.DiscardHandler)
	}
	lim := o.Limits.withDefaults()
	s := &Server{
		store:  o.Store,
		host:   o.Host,
		limits: lim,
		log:    o.Logger,
		jobs:   newJobManager(lim),
		slots:  make(chan struct{}, o.MaxConcurrentFits),
	}
	s.baseCtx, s.baseCancel = context.WithCancelCause(context.Background())
	s.cache = newModelCache(o.CacheBytes, o.Store.Get, buildModel)
	r, err := newReplica(s, o.Replica)
	if err != nil {
		return nil, err
	}
	s.replica = r
	return s, nil
}

// Close cancels every job that is still receiving, queued or running and
// waits for their goroutines to end. It does not close the store or the
// fitter host, which the caller owns.
func (s *Server) Close() {
	s.closeOnce.Do(func() {
		s.mu.Lock()
		s.closing = true
		s.mu.Unlock()
		s.baseCancel(errShutdown)
		s.jobs.cancelAll(errShutdown)
		s.wg.Wait()
		s.replica.close()
	})
}

// buildModel builds the servable model of a stored one.
func buildModel(pb *mixdv1.Model) (*mixture.Model, error) {
	p, err := pbconv.ParamsFromProto(pb.GetParameters())
	if err != nil {
		return nil, err
	}
	return mixture.New(p)
}

// modelName validates a model name field ("models/{id}" or "{id}") and
// returns the canonical "models/{id}".
func modelName(field, s string) (string, error) {
	id, err := store.ParseName(s)
	if err != nil {
		return "", invalidf("%s: %s", field, strings.TrimPrefix(err.Error(), store.ErrInvalid.Error()+": "))
	}
	return modeldoc.NamePrefix + id, nil
}

// checkVersion rejects negative versions.
func checkVersion(v int64) error {
	if v < 0 {
		return invalidf("version is %d, must be positive (or 0 for the newest)", v)
	}
	return nil
}

// loadModel resolves a model for serving.
func (s *Server) loadModel(ctx context.Context, field, name string, version int64) (*loadedModel, error) {
	n, err := modelName(field, name)
	if err != nil {
		return nil, err
	}
	if err := checkVersion(version); err != nil {
		return nil, err
	}
	lm, err := s.cache.get(ctx, n, version)
	if err != nil {
		return nil, toStatus(err)
	}
	return lm, nil
}

// GetModel returns one version of a model.
func (s *Server) GetModel(ctx context.Context, req *mixdv1.GetModelRequest) (*mixdv1.GetModelResponse, error) {
	lm, err := s.loadModel(ctx, "name", req.GetName(), req.GetVersion())
	if err != nil {
		return nil, err
	}
	return &mixdv1.GetModelResponse{Model: lm.pb}, nil
}

// ListModels lists the newest version of every model, by name.
func (s *Server) ListModels(ctx context.Context, req *mixdv1.ListModelsRequest) (*mixdv1.ListModelsResponse, error) {
	size, err := pageSizeOf(req.GetPageSize())
	if err != nil {
		return nil, err
	}
	ms, next, err := s.store.List(ctx, size, req.GetPageToken())
	if err != nil {
		return nil, toStatus(fmt.Errorf("list models: %w", err))
	}
	return &mixdv1.ListModelsResponse{Models: ms, NextPageToken: next}, nil
}

// ListModelVersions lists the versions of one model, oldest first.
func (s *Server) ListModelVersions(ctx context.Context, req *mixdv1.ListModelVersionsRequest) (*mixdv1.ListModelVersionsResponse, error) {
	n, err := modelName("name", req.GetName())
	if err != nil {
		return nil, err
	}
	size, err := pageSizeOf(req.GetPageSize())
	if err != nil {
		return nil, err
	}
	ms, next, err := s.store.Versions(ctx, n, size, req.GetPageToken())
	if err != nil {
		return nil, toStatus(fmt.Errorf("list versions of %s: %w", n, err))
	}
	return &mixdv1.ListModelVersionsResponse{Models: ms, NextPageToken: next}, nil
}

// DeleteModel deletes one version, or every version, of a model, and drops
// them from the cache.
func (s *Server) DeleteModel(ctx context.Context, req *mixdv1.DeleteModelRequest) (*mixdv1.DeleteModelResponse, error) {
	n, err := modelName("name", req.GetName())
	if err != nil {
		return nil, err
	}
	if err := checkVersion(req.GetVersion()); err != nil {
		return nil, err
	}
	deleted, err := s.store.Delete(ctx, n, req.GetVersion())
	// Forget even on error: a partial delete must not leave stale entries.
	s.cache.forget(n, req.GetVersion())
	if err != nil {
		return nil, toStatus(fmt.Errorf("delete %s: %w", n, err))
	}
	s.log.Info("model deleted", "model", n, "version", req.GetVersion(), "deleted_versions", deleted)
	return &mixdv1.DeleteModelResponse{DeletedVersions: deleted}, nil
}

// ExportModel returns a model version as a model document.
func (s *Server) ExportModel(ctx context.Context, req *mixdv1.ExportModelRequest) (*mixdv1.ExportModelResponse, error) {
	lm, err := s.loadModel(ctx, "name", req.GetName(), req.GetVersion())
	if err != nil {
		return nil, err
	}
	doc, err := modeldoc.Encode(lm.pb)
	if err != nil {
		return nil, status.Errorf(codes.Internal, "export %s version %d: %v", lm.name(), lm.version(), err)
	}
	return &mixdv1.ExportModelResponse{Document: doc}, nil
}

// ImportModel validates a model document and stores it as a new version
// (of the document's model, or of req.name when set). The document's
// version and creation time are replaced by the store's.
func (s *Server) ImportModel(ctx context.Context, req *mixdv1.ImportModelRequest) (*mixdv1.ImportModelResponse, error) {
	if len(req.GetDocument()) == 0 {
		return nil, invalidf("document is empty")
	}
	pb, err := modeldoc.Decode(req.GetDocument())
	if err != nil {
		return nil, invalidf("document: %v", err)
	}
	if req.GetName() != "" {
		if pb.Name, err = modelName("name", req.GetName()); err != nil {
			return nil, err
		}
	}
	p := pb.GetParameters()
	if d := int64(p.GetDimension()); d > s.limits.MaxDimension {
		return nil, exhaustedf("document: dimension %d is above the limit of %d (mixd serve --max-dimension)", d, s.limits.MaxDimension)
	}
	if k := int64(len(p.GetComponents())); k > s.limits.MaxComponents {
		return nil, exhaustedf("document: %d components, above the limit of %d (mixd serve --max-components)", k, s.limits.MaxComponents)
	}
	if q := pb.GetReport().GetTrainingQuantiles(); q != nil && (len(q.GetLevels()) > 0 || len(q.GetLogDensities()) > 0) {
		if err := validQuantiles(q); err != nil {
			return nil, invalidf("document: fit_report.%v", err)
		}
	}
	m, err := buildModel(pb)
	if err != nil {
		return nil, invalidf("document: %v", err)
	}
	pb.Version = 0
	pb.CreateTime = nil
	stored, err := s.store.Create(ctx, pb)
	if err != nil {
		return nil, toStatus(fmt.Errorf("store imported model %s: %w", pb.GetName(), err))
	}
	s.cache.add(newLoaded(stored, m))
	s.log.Info("model imported", "model", stored.GetName(), "version", stored.GetVersion())
	return &mixdv1.ImportModelResponse{Model: stored}, nil
}

// ListFitters lists the available fitters, by name.
func (s *Server) ListFitters(ctx context.Context, _ *mixdv1.ListFittersRequest) (*mixdv1.ListFittersResponse, error) {
	return &mixdv1.ListFittersResponse{Fitters: fitterInfos(s.host.List())}, nil
}

// ReloadFitters rescans the plugin directory.
func (s *Server) ReloadFitters(ctx context.Context, _ *mixdv1.ReloadFittersRequest) (*mixdv1.ReloadFittersResponse, error) {
	problems, err := s.host.Reload(ctx)
	if err != nil {
		return nil, toStatus(fmt.Errorf("reload fitters: %w", err))
	}
	for _, p := range problems {
		s.log.Warn("fitter not loaded", "problem", p)
	}
	return &mixdv1.ReloadFittersResponse{Fitters: fitterInfos(s.host.List()), Problems: problems}, nil
}

// fitterInfos converts host entries, sorted by name.
func fitterInfos(es []fitterhost.Entry) []*mixdv1.FitterInfo {
	out := make([]*mixdv1.FitterInfo, 0, len(es))
	for _, e := range es {
		info := pbconv.InfoToProto(e.Info)
		info.Source = e.Source
		info.Sha256 = e.SHA256
		out = append(out, info)
	}
	slices.SortFunc(out, func(a, b *mixdv1.FitterInfo) int { return strings.Compare(a.GetName(), b.GetName()) })
	return out
}

// findFitter returns the entry of the named fitter.
func findFitter(es []fitterhost.Entry, name string) (fitterhost.Entry, bool) {
	for _, e := range es {
		if e.Info.Name == name {
			return e, true
		}
	}
	return fitterhost.Entry{}, false
}
