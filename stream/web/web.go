// Package web is forewarn's HTTP surface: health and readiness, the
// daemon's own metrics as OpenMetrics text, and a JSON view of the series.
// It reads the daemon only through Daemon.Inspect and Daemon.Latest, so it
// never races the loop that owns the series.
package web

import (
	"context"
	"encoding/json"
	"net/http"
	"sort"
	"strings"
	"time"

	"github.com/prometheus/client_golang/prometheus/promhttp"

	"forewarn/config"
	"forewarn/stream/daemon"
)

// Handler serves the HTTP surface of d.
func Handler(d *daemon.Daemon, cfg *config.Config) http.Handler {
	mux := http.NewServeMux()
	mux.HandleFunc("GET /healthz", func(w http.ResponseWriter, r *http.Request) {
		w.Header().Set("Content-Type", "text/plain; charset=utf-8")
		w.Write([]byte("ok\n"))
	})
	mux.HandleFunc("GET /readyz", func(w http.ResponseWriter, r *http.Request) {
		select {
		case <-d.Ready():
			w.Write([]byte("ready\n"))
		default:
			http.Error(w, "loading state", http.StatusServiceUnavailable)
		}
	})
	mux.Handle("GET /metrics", promhttp.HandlerFor(d.Metrics().Registry, promhttp.HandlerOpts{EnableOpenMetrics: true}))
	mux.HandleFunc("GET /api/series", func(w http.ResponseWriter, r *http.Request) {
		list, ok := summaries(r.Context(), d)
		if !ok {
			http.Error(w, "daemon not running", http.StatusServiceUnavailable)
			return
		}
		writeJSON(w, list)
	})
	mux.HandleFunc("GET /api/series/{topic...}", func(w http.ResponseWriter, r *http.Request) {
		topic := r.PathValue("topic")
		if strings.HasSuffix(topic, "/chart.svg") {
			http.NotFound(w, r)
			return
		}
		b, ok := d.Latest(topic)
		if !ok {
			http.Error(w, `{"error": "no forecast for this topic yet"}`, http.StatusNotFound)
			return
		}
		w.Header().Set("Content-Type", "application/json")
		w.Write(b)
	})
	return mux
}

// Summary is one series in /api/series.
type Summary struct {
	Topic     string    `json:"topic"`
	Kind      string    `json:"kind"`
	Status    string    `json:"status"`
	Step      int64     `json:"step_seconds"`
	Closed    uint64    `json:"closed_buckets"`
	LastValue *float64  `json:"last_value"`
	Origin    time.Time `json:"origin,omitzero"`
	Model     string    `json:"model,omitempty"`
	Rejects   uint64    `json:"rejects"`
}

func summaries(ctx context.Context, d *daemon.Daemon) ([]Summary, bool) {
	var out []Summary
	ok := d.Inspect(ctx, func(all map[string]*daemon.Entry) {
		for topic, e := range all {
			s := e.Series()
			snap := s.Snapshot()
			sm := Summary{Topic: topic, Kind: snap.Kind, Status: e.Status(), Step: snap.StepSeconds,
				Closed: snap.Closed, Rejects: e.Rejects()}
			if n := len(snap.Window); n > 0 {
				v := snap.Window[n-1]
				if v == v {
					sm.LastValue = &v
				}
			}
			if snap.Model != nil {
				sm.Model = snap.Model.Spec
				sm.Origin = s.Forecast().Origin
			}
			out = append(out, sm)
		}
	})
	sort.Slice(out, func(i, j int) bool { return out[i].Topic < out[j].Topic })
	return out, ok
}

func writeJSON(w http.ResponseWriter, v any) {
	w.Header().Set("Content-Type", "application/json")
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	enc.Encode(v)
}
