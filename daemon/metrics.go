package daemon

import (
	"net/http"
	"strings"

	grpcprom "github.com/grpc-ecosystem/go-grpc-middleware/providers/prometheus"
	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/collectors"
	"github.com/prometheus/client_golang/prometheus/promhttp"

	"github.com/mixd-dev/mixd/daemon/fitterhost"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// Metrics are the daemon's Prometheus metrics, in a registry of their own
// (nothing is registered globally). Run serves them at /metrics on
// Config.MetricsListen. The metrics:
//
//	grpc_server_started_total{grpc_service,grpc_method,grpc_type}          calls started
//	grpc_server_handled_total{grpc_service,grpc_method,grpc_type,grpc_code} calls ended, by code
//	grpc_server_msg_received_total, grpc_server_msg_sent_total             stream messages
//	grpc_server_handling_seconds{grpc_service,grpc_method,grpc_type}       call latency histogram
//	mixd_cache_hits_total, mixd_cache_misses_total                          model cache lookups
//	mixd_cache_bytes, mixd_cache_budget_bytes, mixd_cache_models            model cache size
//	mixd_fit_jobs{state="receiving|queued|running"}                         active fit jobs
//	mixd_fit_jobs_ended_total{state="succeeded|failed|cancelled"}           fit jobs that ended
//	mixd_fit_jobs_refused_total                                             fits refused: queue full
//	mixd_fitter_launches_total{fitter}                                      plugin processes started
//	mixd_fitter_launch_failures_total{fitter}                               plugin processes that failed to start
//	mixd_fitter_crashes_total{fitter}                                       plugin processes lost during a call
//	mixd_fitter_refused_total                                               executables refused by the manifest
//	mixd_reload_failures_total{what="tls|tokens|fitters"}                   SIGHUP reloads that failed
//	go_*, process_*                                                         Go runtime and process
type Metrics struct {
	reg            *prometheus.Registry
	grpc           *grpcprom.ServerMetrics
	launches       *prometheus.CounterVec
	launchFailures *prometheus.CounterVec
	crashes        *prometheus.CounterVec
	refused        prometheus.Counter
	reloadFailures *prometheus.CounterVec
}

// NewMetrics returns the daemon's metrics in a new registry.
func NewMetrics() *Metrics {
	m := &Metrics{
		reg: prometheus.NewRegistry(),
		grpc: grpcprom.NewServerMetrics(grpcprom.WithServerHandlingTimeHistogram(
			grpcprom.WithHistogramBuckets([]float64{0.0005, 0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5, 5, 10, 30, 60, 300}),
		)),
		launches: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "mixd_fitter_launches_total", Help: "Fitter plugin processes started and connected.",
		}, []string{"fitter"}),
		launchFailures: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "mixd_fitter_launch_failures_total", Help: "Fitter plugin processes that failed to start.",
		}, []string{"fitter"}),
		crashes: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "mixd_fitter_crashes_total", Help: "Fitter plugin processes that crashed or were killed while a fit used them.",
		}, []string{"fitter"}),
		refused: prometheus.NewCounter(prometheus.CounterOpts{
			Name: "mixd_fitter_refused_total", Help: "Plugin executables refused because the fitter manifest does not pin their SHA-256.",
		}),
		reloadFailures: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "mixd_reload_failures_total", Help: "Reloads (SIGHUP) that failed and kept the previous configuration.",
		}, []string{"what"}),
	}
	m.reg.MustRegister(m.grpc, m.launches, m.launchFailures, m.crashes, m.refused, m.reloadFailures,
		collectors.NewGoCollector(), collectors.NewProcessCollector(collectors.ProcessCollectorOpts{}))
	return m
}

// Registry returns the registry holding the metrics.
func (m *Metrics) Registry() *prometheus.Registry { return m.reg }

// Handler serves the metrics in the Prometheus text format.
func (m *Metrics) Handler() http.Handler {
	return promhttp.HandlerFor(m.reg, promhttp.HandlerOpts{Registry: m.reg})
}

// fitterHooks counts plugin process events.
func (m *Metrics) fitterHooks() fitterhost.Hooks {
	return fitterhost.Hooks{
		Launched:     func(f string) { m.launches.WithLabelValues(f).Inc() },
		LaunchFailed: func(f string) { m.launchFailures.WithLabelValues(f).Inc() },
		Lost:         func(f string) { m.crashes.WithLabelValues(f).Inc() },
		Refused:      func(string) { m.refused.Inc() },
	}
}

// reloadFailed counts a failed reload of what ("tls", "tokens", "fitters").
func (m *Metrics) reloadFailed(what string) {
	if m != nil {
		m.reloadFailures.WithLabelValues(what).Inc()
	}
}

// watchServer adds the cache and fit job metrics of s.
func (m *Metrics) watchServer(s *Server) {
	m.reg.MustRegister(&serverCollector{s: s})
}

var (
	descCacheHits   = prometheus.NewDesc("mixd_cache_hits_total", "Model lookups answered from the cache.", nil, nil)
	descCacheMisses = prometheus.NewDesc("mixd_cache_misses_total", "Model lookups that had to load the model from the store.", nil, nil)
	descCacheBytes  = prometheus.NewDesc("mixd_cache_bytes", "Estimated bytes held by cached models.", nil, nil)
	descCacheBudget = prometheus.NewDesc("mixd_cache_budget_bytes", "Byte budget of the model cache (--cache-bytes).", nil, nil)
	descCacheModels = prometheus.NewDesc("mixd_cache_models", "Model versions in the cache.", nil, nil)
	descJobs        = prometheus.NewDesc("mixd_fit_jobs", "Active fit jobs by state.", []string{"state"}, nil)
	descJobsEnded   = prometheus.NewDesc("mixd_fit_jobs_ended_total", "Fit jobs that ended, by final state.", []string{"state"}, nil)
	descJobsRefused = prometheus.NewDesc("mixd_fit_jobs_refused_total", "Fits refused because the fit queue was full (--max-active-jobs).", nil, nil)
)

// serverCollector reads the cache and job counters of a Server at scrape
// time.
type serverCollector struct{ s *Server }

func (c *serverCollector) Describe(ch chan<- *prometheus.Desc) {
	for _, d := range []*prometheus.Desc{descCacheHits, descCacheMisses, descCacheBytes, descCacheBudget, descCacheModels, descJobs, descJobsEnded, descJobsRefused} {
		ch <- d
	}
}

func (c *serverCollector) Collect(ch chan<- prometheus.Metric) {
	models, bytes, _ := c.s.cache.stats()
	hits, misses, budget := c.s.cache.counters()
	ch <- prometheus.MustNewConstMetric(descCacheHits, prometheus.CounterValue, float64(hits))
	ch <- prometheus.MustNewConstMetric(descCacheMisses, prometheus.CounterValue, float64(misses))
	ch <- prometheus.MustNewConstMetric(descCacheBytes, prometheus.GaugeValue, float64(bytes))
	ch <- prometheus.MustNewConstMetric(descCacheBudget, prometheus.GaugeValue, float64(budget))
	ch <- prometheus.MustNewConstMetric(descCacheModels, prometheus.GaugeValue, float64(models))
	jc := c.s.jobs.counts()
	for s, n := range jc.active {
		ch <- prometheus.MustNewConstMetric(descJobs, prometheus.GaugeValue, float64(n), stateLabel(s))
	}
	for s, n := range jc.ended {
		ch <- prometheus.MustNewConstMetric(descJobsEnded, prometheus.CounterValue, float64(n), stateLabel(s))
	}
	ch <- prometheus.MustNewConstMetric(descJobsRefused, prometheus.CounterValue, float64(jc.refused))
}

// stateLabel turns FIT_JOB_STATE_QUEUED into "queued".
func stateLabel(s mixdv1.FitJobState) string {
	return strings.ToLower(strings.TrimPrefix(s.String(), "FIT_JOB_STATE_"))
}
