// Package web is forewarn's HTTP surface for a running daemon: it adapts
// the daemon to the Source that package site serves (pages, charts, JSON,
// health) and adds the count of series by status to the daemon's own
// metrics. It reads the daemon only through Daemon.Inspect (on the loop
// goroutine that owns the series, copying what a request shows) and
// Daemon.Latest, so it never races that loop.
package web

import (
	"context"
	"math"
	"net/http"
	"time"

	"github.com/prometheus/client_golang/prometheus"

	"forewarn/config"
	"forewarn/engine/series"
	"forewarn/stream/daemon"
	"forewarn/stream/web/site"
)

// InspectTimeout bounds how long a request waits for the daemon's loop.
const InspectTimeout = 5 * time.Second

// Handler serves the HTTP surface of d (routes: package site).
func Handler(d *daemon.Daemon, cfg *config.Config) http.Handler {
	reg := prometheus.NewRegistry()
	reg.MustRegister(NewStatusCollector(d))
	info := site.Info{Prefix: cfg.Output.Prefix, Subjects: cfg.Intake.Subjects}
	return site.Handler(Source{d}, prometheus.Gatherers{d.Metrics().Registry, reg}, info)
}

// Source is a daemon seen as a site.Source.
type Source struct{ D *daemon.Daemon }

// Ready implements site.Source.
func (s Source) Ready() <-chan struct{} { return s.D.Ready() }

// Latest implements site.Source.
func (s Source) Latest(topic string) ([]byte, bool) { return s.D.Latest(topic) }

// Ownership implements site.Owners.
func (s Source) Ownership() (string, []string, bool) { return s.D.Ownership() }

// PartitionOf implements site.Owners.
func (s Source) PartitionOf(topic string) (int, bool) { return s.D.PartitionOf(topic) }

// Views implements site.Source.
func (s Source) Views(ctx context.Context, topic string, history int) ([]site.View, error) {
	ctx, cancel := context.WithTimeout(ctx, InspectTimeout)
	defer cancel()
	var out []site.View
	ok := s.D.Inspect(ctx, func(all map[string]*daemon.Entry) {
		if topic != "" {
			if e, ok := all[topic]; ok {
				out = append(out, View(topic, e, history))
			}
			return
		}
		out = make([]site.View, 0, len(all))
		for t, e := range all {
			out = append(out, View(t, e, history))
		}
	})
	if !ok {
		return nil, site.ErrNotRunning
	}
	return out, nil
}

// View copies one entry, with at most history recent buckets (all when
// history < 0). It must run inside Daemon.Inspect.
func View(topic string, e *daemon.Entry, history int) site.View {
	s := e.Series()
	snap := s.Snapshot()
	step := snap.StepSeconds
	at := func(bucket int64) time.Time { return time.Unix(bucket*step, 0).UTC() }
	w := snap.Window
	if history >= 0 && len(w) > history {
		w = w[len(w)-history:]
	}
	v := site.View{
		Topic: topic, Kind: snap.Kind, Status: e.Status(), StepSeconds: step,
		Closed: snap.Closed, Rejects: e.Rejects(), Late: snap.Late,
		History: append([]float64(nil), w...), HistoryEnd: at(snap.WindowEnd),
		RefitFailures: snap.RefitFailures, LastRefitNote: snap.LastRefitNote,
	}
	for _, b := range e.Refits() {
		v.Refits = append(v.Refits, at(b))
	}
	if s.HasModel() {
		fc := s.Forecast()
		m := fc.Model
		v.Model = site.Model{Spec: m.Spec, Transform: m.Transform, FittedAt: m.FittedAt, NObs: m.NObs, AICc: m.AICc}
		v.Forecast = forecastView(fc)
	}
	if ms := snap.Model; ms != nil {
		for _, c := range ms.Cycles {
			v.Cycles = append(v.Cycles, site.Cycle{Length: time.Duration(c.Seconds * float64(time.Second)), Terms: c.Terms, Pairs: c.K})
		}
		for _, o := range ms.Outliers {
			v.Outliers = append(v.Outliers, site.Outlier{Time: at(o.Bucket), Kind: outlierKinds[o.Kind%3], Size: o.Size, Tau: o.Tau})
		}
	}
	if fl := snap.Flag; fl.Verdict == 1 || fl.Verdict == 2 {
		v.Flag = site.Flag{Time: at(fl.Bucket), Kind: [...]string{"", "outlier", "level shift"}[fl.Verdict], Z: fl.Z}
		v.Flags = snap.Flags
	}
	if c := s.Calibrator(); c != nil {
		v.Calibrated = true
		for l, lv := range c.Levels() {
			share, w := c.Coverage(l)
			v.Coverage = append(v.Coverage, site.Coverage{Level: lv, Share: share, Weight: w})
		}
	}
	for _, r := range e.Rules() {
		rv := site.Rule{Name: r.Name, Threshold: r.Threshold, Above: r.Above, Probability: math.NaN()}
		for _, a := range snap.Alerts {
			if a.Rule == r.Name {
				rv.Raised, rv.Probability = a.Raised, a.Probability
				if a.Since != 0 {
					rv.Since = at(a.Since)
				}
			}
		}
		v.Rules = append(v.Rules, rv)
	}
	return v
}

// outlierKinds names outlier.Kind AO, LS and TC for the page.
var outlierKinds = [...]string{"additive outlier", "level shift", "temporary change"}

func forecastView(fc *series.Forecast) *site.Forecast {
	f := &site.Forecast{Origin: fc.Origin, Levels: append([]float64(nil), fc.Levels...),
		Points: make([]site.Point, len(fc.Points))}
	bound := func(b series.Bound) float64 {
		if !b.OK {
			return math.NaN()
		}
		return b.Value
	}
	for i, p := range fc.Points {
		q := site.Point{H: p.H, Time: p.Time, Mean: p.Mean, Median: p.Median,
			Lower: make([]float64, len(p.Lower)), Upper: make([]float64, len(p.Upper))}
		for j := range p.Lower {
			q.Lower[j], q.Upper[j] = bound(p.Lower[j]), bound(p.Upper[j])
		}
		f.Points[i] = q
	}
	return f
}

// statusCollector reports forewarn_series_by_status{status} at scrape time.
type statusCollector struct {
	d    *daemon.Daemon
	desc *prometheus.Desc
}

// Statuses are the values of the status label, in the order reported.
var Statuses = []string{"warming_up", "fitted", "refitting"}

// NewStatusCollector returns a collector of the number of series of d in
// each status. A scrape while the daemon is not running reports nothing.
func NewStatusCollector(d *daemon.Daemon) prometheus.Collector {
	return &statusCollector{d: d, desc: prometheus.NewDesc("forewarn_series_by_status",
		"Series tracked, by status (warming_up, fitted, refitting).", []string{"status"}, nil)}
}

func (c *statusCollector) Describe(ch chan<- *prometheus.Desc) { ch <- c.desc }

func (c *statusCollector) Collect(ch chan<- prometheus.Metric) {
	ctx, cancel := context.WithTimeout(context.Background(), InspectTimeout)
	defer cancel()
	counts := map[string]int{}
	if !c.d.Inspect(ctx, func(all map[string]*daemon.Entry) {
		for _, e := range all {
			counts[e.Status()]++
		}
	}) {
		return
	}
	for _, s := range Statuses {
		ch <- prometheus.MustNewConstMetric(c.desc, prometheus.GaugeValue, float64(counts[s]), s)
	}
}
