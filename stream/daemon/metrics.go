package daemon

import (
	"github.com/prometheus/client_golang/prometheus"

	"forewarn/engine/alert"
	"forewarn/stream"
)

// Metrics are the daemon's own metrics, registered on their own registry
// (served as OpenMetrics text by the HTTP surface).
type Metrics struct {
	Registry *prometheus.Registry

	Accepted           prometheus.Counter
	Rejected           *prometheus.CounterVec
	Published          prometheus.Counter
	Alerts             prometheus.Counter
	Refits             prometheus.Counter
	RefitFailures      prometheus.Counter
	RefitSeconds       prometheus.Histogram
	Series             prometheus.Gauge
	Refitting          prometheus.Gauge
	Pending            prometheus.Gauge
	StateBytes         prometheus.Gauge
	StateResets        prometheus.Counter
	StateWriteFailures prometheus.Counter

	// AlertEvaluations counts rule evaluations by how the probability was
	// obtained, indexed by alert.Method (label "exact" for MethodNone: a
	// threshold outside the transform's range).
	AlertEvaluations  [alert.MethodSimulation + 1]prometheus.Counter
	AlertEvalsByLabel *prometheus.CounterVec
	AlertsLate        prometheus.Counter
	AlertsUndecided   prometheus.Counter
	AlertPaths        prometheus.Counter
	AlertsQueued      prometheus.Gauge
	AlertQueueSeconds prometheus.Histogram
}

// NewMetrics creates and registers the metrics. A labelled counter starts
// with every value of its label at 0.
func NewMetrics() *Metrics {
	m := &Metrics{
		Registry: prometheus.NewRegistry(),
		Accepted: prometheus.NewCounter(prometheus.CounterOpts{
			Name: "forewarn_observations_accepted_total", Help: "Observations applied to a series."}),
		Rejected: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "forewarn_observations_rejected_total", Help: "Messages or observations not accepted, by reject code."}, []string{"code"}),
		Published: prometheus.NewCounter(prometheus.CounterOpts{
			Name: "forewarn_forecasts_published_total", Help: "Forecast messages published."}),
		Alerts: prometheus.NewCounter(prometheus.CounterOpts{
			Name: "forewarn_alerts_published_total", Help: "Alert state changes published."}),
		Refits: prometheus.NewCounter(prometheus.CounterOpts{
			Name: "forewarn_refits_total", Help: "Refits that produced a new model."}),
		RefitFailures: prometheus.NewCounter(prometheus.CounterOpts{
			Name: "forewarn_refit_failures_total", Help: "Refits that failed; the previous model was kept."}),
		RefitSeconds: prometheus.NewHistogram(prometheus.HistogramOpts{
			Name: "forewarn_refit_duration_seconds", Help: "Time one refit took.",
			Buckets: prometheus.ExponentialBuckets(0.001, 2, 14)}),
		Series: prometheus.NewGauge(prometheus.GaugeOpts{
			Name: "forewarn_series", Help: "Series tracked."}),
		Refitting: prometheus.NewGauge(prometheus.GaugeOpts{
			Name: "forewarn_series_refitting", Help: "Series waiting on a refit."}),
		Pending: prometheus.NewGauge(prometheus.GaugeOpts{
			Name: "forewarn_pending_observations", Help: "Observations held back while their series refits."}),
		StateBytes: prometheus.NewGauge(prometheus.GaugeOpts{
			Name: "forewarn_state_file_bytes", Help: "Size of the state file."}),
		StateResets: prometheus.NewCounter(prometheus.CounterOpts{
			Name: "forewarn_state_resets_total", Help: "Series whose stored record could not be used and started afresh."}),
		StateWriteFailures: prometheus.NewCounter(prometheus.CounterOpts{
			Name: "forewarn_state_write_failures_total", Help: "State flushes that failed."}),
	}
	m.AlertEvalsByLabel = prometheus.NewCounterVec(prometheus.CounterOpts{
		Name: "forewarn_alert_evaluations_total",
		Help: "Alert rule evaluations, by method: exact, marginal, skip (union bound), bracket, simulation."}, []string{"method"})
	for k := range m.AlertEvaluations {
		name := alert.Method(k).String()
		if alert.Method(k) == alert.MethodNone {
			name = "exact"
		}
		m.AlertEvaluations[k] = m.AlertEvalsByLabel.WithLabelValues(name) // at 0 from the start
	}
	m.AlertsLate = prometheus.NewCounter(prometheus.CounterOpts{
		Name: "forewarn_alert_evaluations_late_total",
		Help: "Alert evaluations whose answer came after the next observation of their series, which waited for it."})
	m.AlertsUndecided = prometheus.NewCounter(prometheus.CounterOpts{
		Name: "forewarn_alert_evaluations_undecided_total",
		Help: "Simulated rule evaluations that used their whole path budget before their decision was known."})
	m.AlertPaths = prometheus.NewCounter(prometheus.CounterOpts{
		Name: "forewarn_alert_paths_total", Help: "Paths drawn by the alert simulations (antithetic mirrors counted)."})
	m.AlertsQueued = prometheus.NewGauge(prometheus.GaugeOpts{
		Name: "forewarn_alert_evaluations_queued", Help: "Series waiting for an alert evaluation on the alert workers."})
	m.AlertQueueSeconds = prometheus.NewHistogram(prometheus.HistogramOpts{
		Name: "forewarn_alert_queue_wait_seconds", Help: "Time an alert evaluation waited for a worker.",
		Buckets: prometheus.ExponentialBuckets(0.0001, 4, 10)})
	// Every reject code is there from the start, at 0 (CONTRACT.md §2), so
	// that a rate over the counter is defined before the first reject.
	for _, code := range stream.RejectCodes() {
		m.Rejected.WithLabelValues(code)
	}
	m.Registry.MustRegister(m.Accepted, m.Rejected, m.Published, m.Alerts, m.Refits, m.RefitFailures,
		m.RefitSeconds, m.Series, m.Refitting, m.Pending, m.StateBytes, m.StateResets, m.StateWriteFailures,
		m.AlertEvalsByLabel, m.AlertsLate, m.AlertsUndecided, m.AlertPaths, m.AlertsQueued, m.AlertQueueSeconds)
	return m
}
