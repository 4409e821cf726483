package main

import (
	"strconv"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/collectors"

	"github.com/rhomb/rhomb/net/classify"
	"github.com/rhomb/rhomb/net/classify/endpoint"
)

// The metrics are described in docs/serving.md; keep the two in step.

// defaultMarginBuckets are the upper bounds of the margin histogram: a
// normalized margin is the score gap divided by the network's scale ρ, so
// it is small (most rows of the demo models fall between 10⁻³ and 1); the
// bounds run in steps of about 2 over five decades.
var defaultMarginBuckets = []float64{0.001, 0.002, 0.005, 0.01, 0.02, 0.05, 0.1, 0.2, 0.5, 1, 2, 5, 10}

// latencyBuckets are the upper bounds, in seconds, of the request
// duration histogram: from half a millisecond (one row on a fast
// machine) to the 10 s of a request that used its whole default budget.
var latencyBuckets = []float64{0.0005, 0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5, 5, 10}

// metrics holds the server's Prometheus collectors, fed by an
// endpoint.Observer.
type metrics struct {
	requests    *prometheus.CounterVec
	latency     *prometheus.HistogramVec
	rows        prometheus.Counter
	margin      prometheus.Histogram
	modelInfo   *prometheus.GaugeVec
	loadSeconds prometheus.Gauge
	loadedAt    prometheus.Gauge
	reloads     *prometheus.CounterVec
	trainMargin *prometheus.GaugeVec
	trainRho    *prometheus.GaugeVec
}

// newMetrics registers the server's metrics, with the Go runtime's and
// the process's, on reg.
func newMetrics(reg prometheus.Registerer, marginBuckets []float64) *metrics {
	const ns = "rhomb_serve"
	m := &metrics{
		requests: prometheus.NewCounterVec(prometheus.CounterOpts{Namespace: ns, Name: "requests_total",
			Help: "Requests answered, by route (/classify, /model, /health, or other) and HTTP status code."}, []string{"route", "code"}),
		latency: prometheus.NewHistogramVec(prometheus.HistogramOpts{Namespace: ns, Name: "request_duration_seconds",
			Help: "Time from the handler's start to the response written, by route.", Buckets: latencyBuckets}, []string{"route"}),
		rows: prometheus.NewCounter(prometheus.CounterOpts{Namespace: ns, Name: "rows_classified_total",
			Help: "Rows classified in successful POST /classify requests."}),
		margin: prometheus.NewHistogram(prometheus.HistogramOpts{Namespace: ns, Name: "margin",
			Help:    "Normalized margin of each classified row: top score minus second score (for one signed score, its distance from the decision threshold), divided by the network's scale; compare with rhomb_serve_training_margin.",
			Buckets: marginBuckets}),
		modelInfo: prometheus.NewGaugeVec(prometheus.GaugeOpts{Namespace: ns, Name: "model_info",
			Help: "The model being served: 1, labelled with its version (the start of the model file's SHA-256)."}, []string{"version"}),
		loadSeconds: prometheus.NewGauge(prometheus.GaugeOpts{Namespace: ns, Name: "model_load_duration_seconds",
			Help: "Time taken to read and validate the model file being served."}),
		loadedAt: prometheus.NewGauge(prometheus.GaugeOpts{Namespace: ns, Name: "model_loaded_timestamp_seconds",
			Help: "When the model being served was loaded, in seconds since the Unix epoch."}),
		reloads: prometheus.NewCounterVec(prometheus.CounterOpts{Namespace: ns, Name: "model_reloads_total",
			Help: "Model reloads after the first load, by result: ok, or failed (the old model kept serving)."}, []string{"result"}),
		trainMargin: prometheus.NewGaugeVec(prometheus.GaugeOpts{Namespace: ns, Name: "training_margin",
			Help: "Normalized margin of the training rows as the model file records it (stat min, p05, p50, p95 or mean: computed as the served margin is); absent when the file records none."}, []string{"stat"}),
		trainRho: prometheus.NewGaugeVec(prometheus.GaugeOpts{Namespace: ns, Name: "training_rho",
			Help: "The network's scale, the product of its layers' weight norms, as the model file records it; absent when the file records none."}, nil),
	}
	reg.MustRegister(m.requests, m.latency, m.rows, m.margin, m.modelInfo, m.loadSeconds, m.loadedAt, m.reloads, m.trainMargin, m.trainRho,
		collectors.NewGoCollector(), collectors.NewProcessCollector(collectors.ProcessCollectorOpts{}))
	// Both results show from the start, at 0, so that a rate or an alert
	// on failures has a series to work on before the first failure.
	m.reloads.WithLabelValues("ok")
	m.reloads.WithLabelValues("failed")
	return m
}

// observer returns the hook that feeds the metrics.
func (m *metrics) observer() *endpoint.Observer {
	return &endpoint.Observer{Request: m.request, Reload: m.reload}
}

func (m *metrics) request(i endpoint.RequestInfo) {
	route := i.Route
	if route == "" {
		route = "other" // an unknown path: a label per path would let clients make series at will
	}
	m.requests.WithLabelValues(route, strconv.Itoa(i.Status)).Inc()
	m.latency.WithLabelValues(route).Observe(i.Latency.Seconds())
	if i.Rows > 0 {
		m.rows.Add(float64(i.Rows))
	}
	for _, x := range i.Margins {
		m.margin.Observe(x)
	}
}

func (m *metrics) reload(i endpoint.ReloadInfo) {
	if i.Err != nil {
		m.reloads.WithLabelValues("failed").Inc()
		return
	}
	m.reloads.WithLabelValues("ok").Inc()
	m.loaded(i.Model, i.LoadTime)
}

// loaded records the model now serving.
func (m *metrics) loaded(model *classify.Model, took time.Duration) {
	info := model.Info()
	m.modelInfo.Reset()
	m.modelInfo.WithLabelValues(info.Version).Set(1)
	m.loadSeconds.Set(took.Seconds())
	m.loadedAt.SetToCurrentTime()
	m.trainMargin.Reset()
	for _, stat := range []string{"min", "p05", "p50", "p95", "mean"} {
		if v, ok := info.Metrics["margin_"+stat].(float64); ok {
			m.trainMargin.WithLabelValues(stat).Set(v)
		}
	}
	m.trainRho.Reset()
	if v, ok := info.Metrics["rho"].(float64); ok {
		m.trainRho.WithLabelValues().Set(v)
	}
}
