package site

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"net/http"
	"slices"
	"strconv"
	"strings"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/promhttp"

	"forewarn/stream/web/chart"
)

// Chart sizes of the pages, in pixels.
const (
	SmallWidth, SmallHeight = 360, 110
	LargeWidth, LargeHeight = 960, 440
)

// Info is what the index page tells about the daemon's wiring.
type Info struct {
	Subjects []string // intake subjects
	Prefix   string   // output subject prefix
}

// Handler serves the routes listed in the package documentation, reading
// series from src and the daemon's own metrics from metrics.
func Handler(src Source, metrics prometheus.Gatherer, info Info) http.Handler {
	s := &server{src: src, info: info}
	mux := http.NewServeMux()
	mux.HandleFunc("GET /healthz", func(w http.ResponseWriter, r *http.Request) {
		w.Header().Set("Content-Type", "text/plain; charset=utf-8")
		w.Write([]byte("ok\n"))
	})
	mux.HandleFunc("GET /readyz", s.ready)
	mux.Handle("GET /metrics", promhttp.HandlerFor(metrics, promhttp.HandlerOpts{EnableOpenMetrics: true}))
	mux.HandleFunc("GET /api/series", s.list)
	mux.HandleFunc("GET /api/series/{topic}", s.latest)
	mux.HandleFunc("GET /api/series/{topic}/chart.svg", s.chart)
	mux.HandleFunc("GET /api/partitions", s.partitions)
	mux.HandleFunc("GET /{$}", s.index)
	mux.HandleFunc("GET /series/{topic}", s.page)
	return mux
}

type server struct {
	src  Source
	info Info
}

func (s *server) ready(w http.ResponseWriter, r *http.Request) {
	w.Header().Set("Content-Type", "text/plain; charset=utf-8")
	select {
	case <-s.src.Ready():
		w.Write([]byte("ready\n"))
	default:
		http.Error(w, "not ready: loading state", http.StatusServiceUnavailable)
	}
}

// Summary is one series in /api/series.
type Summary struct {
	Topic         string         `json:"topic"`
	Kind          string         `json:"kind"`
	Status        string         `json:"status"`
	Step          int64          `json:"step_seconds"`
	Closed        uint64         `json:"closed_buckets"`
	LastValue     *float64       `json:"last_value"`
	Origin        time.Time      `json:"origin,omitzero"`
	Model         string         `json:"model,omitempty"`
	Rejects       uint64         `json:"rejects"`
	Late          uint64         `json:"late"`
	RefitFailures uint64         `json:"refit_failures"`
	Alerts        []AlertSummary `json:"alerts"`
	// Partition and Owner, in cluster mode: the series' partition and
	// the instance that owns it (owners.go).
	Partition *int   `json:"partition,omitempty"`
	Owner     string `json:"owner,omitempty"`
	// Coverage: per level, the realised coverage of the series' recent
	// bands (View.Coverage); absent when the series does not calibrate.
	Coverage []CoverageSummary `json:"coverage,omitempty"`
}

// CoverageSummary is the realised coverage of one level in a Summary:
// the nominal level in percent, the share of recent forecasts whose value
// fell inside the band (null before any was resolved) and the weighted
// number of forecasts behind it.
type CoverageSummary struct {
	Level    float64  `json:"level"`
	Realised *float64 `json:"realised"`
	Weight   float64  `json:"weight"`
}

// AlertSummary is the state of one alert rule in a Summary.
type AlertSummary struct {
	Rule        string   `json:"rule"`
	State       string   `json:"state"` // "raised" or "cleared" (ITU-T X.733)
	Direction   string   `json:"direction"`
	Threshold   float64  `json:"threshold"`
	Probability *float64 `json:"probability"`
}

// Summarize is the JSON summary of v.
func Summarize(v *View) Summary {
	sm := Summary{Topic: v.Topic, Kind: v.Kind, Status: v.Status, Step: v.StepSeconds, Closed: v.Closed,
		Model: v.Model.Spec, Rejects: v.Rejects, Late: v.Late, RefitFailures: v.RefitFailures,
		Alerts: []AlertSummary{}}
	if x := v.LastValue(); finite(x) {
		sm.LastValue = &x
	}
	if v.Forecast != nil {
		sm.Origin = v.Forecast.Origin
	}
	for _, r := range v.Rules {
		a := AlertSummary{Rule: r.Name, State: stateWord(r.Raised), Direction: direction(r.Above), Threshold: r.Threshold}
		if p := r.Probability; finite(p) {
			a.Probability = &p
		}
		sm.Alerts = append(sm.Alerts, a)
	}
	for _, c := range v.Coverage {
		cs := CoverageSummary{Level: c.Level, Weight: c.Weight}
		if x := c.Share; finite(x) {
			cs.Realised = &x
		}
		sm.Coverage = append(sm.Coverage, cs)
	}
	return sm
}

// stateWord names an alert rule's state with the alarm states of ITU-T
// X.733: "raised" or "cleared".
func stateWord(raised bool) string {
	if raised {
		return "raised"
	}
	return "cleared"
}

func direction(above bool) string {
	if above {
		return "above"
	}
	return "below"
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

func sortViews(vs []View) {
	slices.SortFunc(vs, func(a, b View) int { return strings.Compare(a.Topic, b.Topic) })
}

// views reads the source and answers the request itself when that fails.
func (s *server) views(w http.ResponseWriter, r *http.Request, topic string, history int) ([]View, bool) {
	vs, err := s.src.Views(r.Context(), topic, history)
	switch {
	case errors.Is(err, ErrNotRunning):
		http.Error(w, "the daemon is not running", http.StatusServiceUnavailable)
		return nil, false
	case err != nil:
		http.Error(w, err.Error(), http.StatusInternalServerError)
		return nil, false
	}
	vs = s.owned(vs)
	sortViews(vs)
	return vs, true
}

// one reads a single topic, answering 404 when there is none.
func (s *server) one(w http.ResponseWriter, r *http.Request, history int) (*View, bool) {
	topic := r.PathValue("topic")
	if s.elsewhere(w, topic, false) {
		return nil, false
	}
	vs, ok := s.views(w, r, topic, history)
	if !ok {
		return nil, false
	}
	for i := range vs {
		if vs[i].Topic == topic {
			return &vs[i], true
		}
	}
	http.Error(w, fmt.Sprintf("no series %q", topic), http.StatusNotFound)
	return nil, false
}

func (s *server) list(w http.ResponseWriter, r *http.Request) {
	vs, ok := s.views(w, r, "", 1)
	if !ok {
		return
	}
	out := make([]Summary, len(vs))
	c := s.cluster()
	for i := range vs {
		out[i] = Summarize(&vs[i])
		s.annotate(c, &out[i])
	}
	writeJSON(w, http.StatusOK, out)
}

func (s *server) latest(w http.ResponseWriter, r *http.Request) {
	if s.elsewhere(w, r.PathValue("topic"), true) {
		return
	}
	b, ok := s.src.Latest(r.PathValue("topic"))
	if !ok {
		writeJSON(w, http.StatusNotFound, map[string]string{"error": "no forecast for this topic yet"})
		return
	}
	w.Header().Set("Content-Type", "application/json")
	w.Write(b)
}

// intParam reads an integer query parameter within [lo, hi]; absent means def.
func intParam(r *http.Request, name string, def, lo, hi int) (int, error) {
	s := r.URL.Query().Get(name)
	if s == "" {
		return def, nil
	}
	n, err := strconv.Atoi(s)
	if err != nil || n < lo || n > hi {
		return 0, fmt.Errorf("query parameter %s=%q: want a whole number from %d to %d", name, s, lo, hi)
	}
	return n, nil
}

// DefaultPoints is the history shown by default: five forecast horizons,
// at least 120 buckets.
func DefaultPoints(v *View) int {
	if v.Forecast == nil {
		return 600
	}
	return max(120, 5*len(v.Forecast.Points))
}

func (s *server) chart(w http.ResponseWriter, r *http.Request) {
	wpx, err1 := intParam(r, "w", LargeWidth, chart.MinWidth, chart.MaxWidth)
	hpx, err2 := intParam(r, "h", LargeHeight, chart.MinHeight, chart.MaxHeight)
	points, err3 := intParam(r, "points", 0, 1, 1<<20)
	if err := errors.Join(err1, err2, err3); err != nil {
		http.Error(w, err.Error(), http.StatusBadRequest)
		return
	}
	s.drawChart(w, r, wpx, hpx, points)
}

func (s *server) drawChart(w http.ResponseWriter, r *http.Request, wpx, hpx, points int) {
	v, ok := s.one(w, r, -1)
	if !ok {
		return
	}
	if points == 0 {
		points = DefaultPoints(v)
	}
	var buf bytes.Buffer
	if err := chart.Render(&buf, chart.SVG, v.ChartData(points), chart.Options{Width: wpx, Height: hpx}); err != nil {
		http.Error(w, err.Error(), http.StatusInternalServerError)
		return
	}
	w.Header().Set("Content-Type", "image/svg+xml")
	w.Header().Set("Cache-Control", "no-store")
	w.Write(buf.Bytes())
}

func writeJSON(w http.ResponseWriter, code int, v any) {
	b, err := json.MarshalIndent(v, "", "  ")
	if err != nil {
		http.Error(w, err.Error(), http.StatusInternalServerError)
		return
	}
	w.Header().Set("Content-Type", "application/json")
	w.WriteHeader(code)
	w.Write(append(b, '\n'))
}
