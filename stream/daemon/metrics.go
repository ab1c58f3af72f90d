package daemon

import (
	"github.com/prometheus/client_golang/prometheus"

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
	// Every reject code is there from the start, at 0 (CONTRACT.md §2), so
	// that a rate over the counter is defined before the first reject.
	for _, code := range stream.RejectCodes() {
		m.Rejected.WithLabelValues(code)
	}
	m.Registry.MustRegister(m.Accepted, m.Rejected, m.Published, m.Alerts, m.Refits, m.RefitFailures,
		m.RefitSeconds, m.Series, m.Refitting, m.Pending, m.StateBytes, m.StateResets, m.StateWriteFailures)
	return m
}
