package source

import "github.com/prometheus/client_golang/prometheus"

// Causes of a failed scrape (forewarn_source_failures_total's cause label).
// The first six lose the whole scrape; too_many_series and publish lose
// part of it.
const (
	CauseTimeout       = "timeout"         // no complete answer within the source's timeout
	CauseRefused       = "refused"         // the connection was refused: nothing listens there
	CauseUnreachable   = "unreachable"     // any other connection failure: name lookup, reset, TLS
	CauseHTTPStatus    = "http_status"     // an answer other than 200
	CauseTooLarge      = "too_large"       // a body longer than the source's max_bytes
	CauseMalformed     = "malformed"       // a body the parser does not accept
	CauseTooManySeries = "too_many_series" // new series beyond limits.max_series were left out
	CausePublish       = "publish"         // observations could not be handed to the bus connection
)

// Causes returns every cause, in the order above. Each call returns a new
// slice.
func Causes() []string {
	return []string{CauseTimeout, CauseRefused, CauseUnreachable, CauseHTTPStatus, CauseTooLarge,
		CauseMalformed, CauseTooManySeries, CausePublish}
}

// Reasons a selected sample is not published
// (forewarn_source_samples_dropped_total's reason label).
const (
	DropNotFinite     = "not_finite"      // NaN or ±Inf: the intake takes finite values only
	DropBadTopic      = "bad_topic"       // its topic would be longer than the bus allows a topic
	DropDuplicate     = "duplicate"       // an earlier sample with the topic of a later one in the same scrape
	DropTooManySeries = "too_many_series" // a new series beyond limits.max_series
)

// DropReasons returns every drop reason. Each call returns a new slice.
func DropReasons() []string {
	return []string{DropNotFinite, DropBadTopic, DropDuplicate, DropTooManySeries}
}

// Metrics are the sources' metrics, each labelled by source name. Every
// cause and reason of every source is present from the start, at 0.
type Metrics struct {
	Scrapes   *prometheus.CounterVec   // source
	Failures  *prometheus.CounterVec   // source, cause
	Published *prometheus.CounterVec   // source
	Dropped   *prometheus.CounterVec   // source, reason
	Series    *prometheus.GaugeVec     // source
	Duration  *prometheus.HistogramVec // source
	Scraping  *prometheus.GaugeVec     // source: 1 while this instance scrapes it (cluster.go)
}

func newMetrics(names []string) *Metrics {
	m := &Metrics{
		Scrapes: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "forewarn_source_scrapes_total", Help: "Scrapes started, by source."}, []string{"source"}),
		Failures: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "forewarn_source_failures_total", Help: "Scrapes that failed or lost part of their samples, by source and cause."},
			[]string{"source", "cause"}),
		Published: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "forewarn_source_samples_published_total", Help: "Samples published to the intake, by source."}, []string{"source"}),
		Dropped: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "forewarn_source_samples_dropped_total", Help: "Selected samples not published, by source and reason."},
			[]string{"source", "reason"}),
		Series: prometheus.NewGaugeVec(prometheus.GaugeOpts{
			Name: "forewarn_source_series", Help: "Series published by the source's last scrape."}, []string{"source"}),
		Duration: prometheus.NewHistogramVec(prometheus.HistogramOpts{
			Name: "forewarn_source_scrape_duration_seconds", Help: "Time from the start of a scrape to its last publication.",
			Buckets: prometheus.ExponentialBuckets(0.001, 2, 16)}, []string{"source"}),
		Scraping: prometheus.NewGaugeVec(prometheus.GaugeOpts{
			Name: "forewarn_source_scraping", Help: "1 while this instance scrapes the source, 0 while another instance of the cluster does."},
			[]string{"source"}),
	}
	for _, n := range names {
		m.Scrapes.WithLabelValues(n)
		m.Published.WithLabelValues(n)
		m.Series.WithLabelValues(n)
		m.Scraping.WithLabelValues(n)
		for _, c := range Causes() {
			m.Failures.WithLabelValues(n, c)
		}
		for _, r := range DropReasons() {
			m.Dropped.WithLabelValues(n, r)
		}
	}
	return m
}

// Collectors returns the metrics, to register on a registry.
func (m *Metrics) Collectors() []prometheus.Collector {
	return []prometheus.Collector{m.Scrapes, m.Failures, m.Published, m.Dropped, m.Series, m.Duration, m.Scraping}
}
