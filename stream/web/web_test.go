package web

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"maps"
	"math"
	"net/http"
	"net/http/httptest"
	"strings"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	dto "github.com/prometheus/client_model/go"
	"github.com/prometheus/common/expfmt"

	"forewarn/config"
	"forewarn/state"
	"forewarn/stream"
	"forewarn/stream/daemon"
	"forewarn/stream/streamtest"
	"forewarn/stream/web/internal/webtest"
	"forewarn/stream/web/site"
)

// live is a running daemon on an in-process NATS server, fed with open
// datasets, and its HTTP surface.
type live struct {
	d   *daemon.Daemon
	cfg *config.Config
	nc  *nats.Conn
	srv *httptest.Server
	// accepted counts the observations published (missing values are
	// not sent).
	accepted int
}

func ptr(x float64) *float64 { return &x }

// startLive runs the daemon with two fitted series (the log airline model
// of Box & Jenkins on AirPassengers with six missing months, and on UKgas
// with period 4) and one still warming up (lh, 48 buckets), each bucket a
// minute of data time ending now. Datasets: R 4.2.2 `datasets`.
func startLive(t *testing.T) *live {
	t.Helper()
	_, url := streamtest.RunServer(t)
	nc := streamtest.Connect(t, url)
	cfg := config.Default()
	cfg.State.Dir = t.TempDir()
	cfg.HTTP.Listen = ""
	cfg.Series = []config.Series{
		{Match: "air.*", Step: time.Minute, Horizon: 24, MinPoints: 60, RefitEvery: 40, Window: 400,
			Model: "0,1,1 x 0,1,1", Seasons: []config.Cycle{{Steps: 12}}, Transform: "log",
			Outliers: new(false)}, // the airline model alone, without outlier terms (its label is checked)
		{Match: "uk.gas", Step: time.Minute, Horizon: 12, MinPoints: 40, RefitEvery: 30, Window: 400,
			Model: "0,1,1 x 0,1,1", Seasons: []config.Cycle{{Steps: 4}}, Transform: "log"},
		{Match: ">", Step: time.Minute, Horizon: 10, MinPoints: 60, Window: 400, Model: "1,0,0"},
	}
	cfg.Alerts = []config.Alert{
		{Name: "busy-summer", Match: "air.*", Above: ptr(600), Within: 20 * time.Minute, Probability: 0.5},
		{Name: "gas-low", Match: "uk.gas", Below: ptr(50), Within: 10 * time.Minute, Probability: 0.9},
	}
	cfg = cfg.WithDefaults()
	d := runDaemon(t, nc, cfg)
	l := &live{d: d, cfg: cfg, nc: nc}
	now := time.Now().Truncate(time.Minute)
	for topic, name := range map[string]string{"air.passengers": "AirPassengers_na", "uk.gas": "UKgas", "lab.hormone": "lh"} {
		_, vs := webtest.Dataset(t, name)
		t0 := now.Add(-time.Duration(len(vs)) * time.Minute)
		var batch []map[string]any
		for i, v := range vs {
			if math.IsNaN(v) {
				continue
			}
			batch = append(batch, map[string]any{"time": t0.Add(time.Duration(i) * time.Minute).Unix(), "value": v})
		}
		b, _ := json.Marshal(batch)
		if err := nc.Publish("metrics."+topic, b); err != nil {
			t.Fatal(err)
		}
		l.accepted += len(batch)
	}
	// One message that is not JSON (code not_json) and one observation
	// for a bucket long closed (code late), both on lab.hormone.
	old := fmt.Sprintf(`{"time": %d, "value": 2.5}`, now.Add(-40*time.Minute).Unix())
	for _, p := range []string{"{value: 3", old} {
		if err := nc.Publish("metrics.lab.hormone", []byte(p)); err != nil {
			t.Fatal(err)
		}
	}
	if err := nc.Flush(); err != nil {
		t.Fatal(err)
	}
	streamtest.Eventually(t, 60*time.Second, "forecasts for air.passengers and uk.gas", func() bool {
		_, a := d.Latest("air.passengers")
		_, g := d.Latest("uk.gas")
		return a && g
	})
	// Wait until every observation is applied and the reject counted.
	streamtest.Eventually(t, 60*time.Second, "all observations applied", func() bool {
		var a, r1, r2 dto.Metric
		d.Metrics().Accepted.Write(&a)
		d.Metrics().Rejected.WithLabelValues("not_json").Write(&r1)
		d.Metrics().Rejected.WithLabelValues("late").Write(&r2)
		return int(a.GetCounter().GetValue()) == l.accepted && r1.GetCounter().GetValue() == 1 &&
			r2.GetCounter().GetValue() == 1
	})
	l.srv = httptest.NewServer(Handler(d, cfg))
	t.Cleanup(l.srv.Close)
	return l
}

// runDaemon runs a daemon on nc with cfg (defaults filled in) until the
// test ends, and waits until it is ready.
func runDaemon(t *testing.T, nc *nats.Conn, cfg *config.Config) *daemon.Daemon {
	t.Helper()
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	store, err := state.Open(cfg.State.Dir)
	if err != nil {
		t.Fatal(err)
	}
	d, err := daemon.New(daemon.Options{Config: cfg, Conn: nc, Store: store,
		Logger: slog.New(slog.NewTextHandler(io.Discard, nil))})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- d.Run(ctx) }()
	t.Cleanup(func() {
		cancel()
		if err := <-done; err != nil && !errors.Is(err, context.Canceled) {
			t.Errorf("daemon: %v", err)
		}
		store.Close()
	})
	select {
	case <-d.Ready():
	case err := <-done:
		t.Fatalf("daemon stopped: %v", err)
	case <-time.After(20 * time.Second):
		t.Fatal("daemon not ready")
	}
	return d
}

func (l *live) get(t *testing.T, path string, header ...string) (*http.Response, []byte) {
	t.Helper()
	req, err := http.NewRequest("GET", l.srv.URL+path, nil)
	if err != nil {
		t.Fatal(err)
	}
	for i := 0; i+1 < len(header); i += 2 {
		req.Header.Set(header[i], header[i+1])
	}
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	if err != nil {
		t.Fatal(err)
	}
	return resp, b
}

// scrapeOpenMetrics gets /metrics from srv as OpenMetrics 1.0 text and
// reads it with the client library's own parser (prometheus/common expfmt,
// OpenMetrics 1.0 ABNF grammar). family looks a family up by its name, a
// counter's with or without _total (OpenMetrics counter families drop it).
func scrapeOpenMetrics(t *testing.T, l *live) (body []byte, family func(name string) *dto.MetricFamily) {
	t.Helper()
	resp, body := l.get(t, "/metrics", "Accept", "application/openmetrics-text; version=1.0.0")
	ct := resp.Header.Get("Content-Type")
	if !strings.HasPrefix(ct, "application/openmetrics-text") {
		t.Fatalf("Content-Type %q, want OpenMetrics", ct)
	}
	if expfmt.ResponseFormat(resp.Header).FormatType() != expfmt.TypeOpenMetrics {
		t.Fatalf("format %q", expfmt.ResponseFormat(resp.Header))
	}
	dec := expfmt.NewDecoder(strings.NewReader(string(body)), expfmt.FmtOpenMetrics_1_0_0)
	fams := map[string]*dto.MetricFamily{}
	for {
		mf := new(dto.MetricFamily)
		err := dec.Decode(mf)
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatalf("OpenMetrics parse: %v\n%s", err, body)
		}
		fams[mf.GetName()] = mf
	}
	return body, func(name string) *dto.MetricFamily {
		if f, ok := fams[name]; ok {
			return f
		}
		return fams[strings.TrimSuffix(name, "_total")]
	}
}

// rejectsByCode returns the samples of forewarn_observations_rejected_total
// by their code label.
func rejectsByCode(f *dto.MetricFamily) map[string]float64 {
	got := map[string]float64{}
	for _, m := range f.GetMetric() {
		for _, lp := range m.GetLabel() {
			if lp.GetName() == "code" {
				got[lp.GetValue()] = m.GetCounter().GetValue()
			}
		}
	}
	return got
}

// /metrics is OpenMetrics 1.0 text as the client library's own parser
// reads it.
func TestMetricsParseAsOpenMetrics(t *testing.T) {
	l := startLive(t)
	body, family := scrapeOpenMetrics(t, l)
	// CONTRACT.md §2 names these; issue 7 asks for refit durations,
	// queue depths, the state file's size and series by status.
	for _, name := range []string{"forewarn_observations_accepted_total", "forewarn_observations_rejected_total",
		"forewarn_forecasts_published_total", "forewarn_refits_total", "forewarn_series",
		"forewarn_refit_duration_seconds", "forewarn_pending_observations", "forewarn_state_file_bytes",
		"forewarn_series_by_status"} {
		if family(name) == nil {
			t.Errorf("no metric family %s", name)
		}
	}
	if f := family("forewarn_observations_accepted_total"); f != nil {
		if got := f.Metric[0].GetCounter().GetValue(); int(got) != l.accepted {
			t.Errorf("accepted %v, published %d observations", got, l.accepted)
		}
	}
	if f := family("forewarn_observations_rejected_total"); f != nil {
		got := rejectsByCode(f)
		want := map[string]float64{}
		for _, c := range stream.RejectCodes() {
			want[c] = 0
		}
		want["not_json"], want["late"] = 1, 1
		if !maps.Equal(got, want) {
			t.Errorf("rejects by code %v, want one not_json, one late and every other code at 0", got)
		}
	}
	if f := family("forewarn_refit_duration_seconds"); f != nil && f.GetType() != dto.MetricType_HISTOGRAM {
		t.Errorf("refit durations are a %v", f.GetType())
	}
	if f := family("forewarn_series_by_status"); f != nil {
		got := map[string]float64{}
		for _, m := range f.Metric {
			got[m.Label[0].GetValue()] = m.GetGauge().GetValue()
		}
		// air.passengers and uk.gas are fitted (or refitting), lab.hormone
		// has 48 buckets, fewer than min_points.
		if got["warming_up"] != 1 || got["fitted"]+got["refitting"] != 2 {
			t.Errorf("series by status %v", got)
		}
	}
	if !strings.HasSuffix(string(body), "# EOF\n") {
		t.Error("OpenMetrics exposition does not end with # EOF")
	}
}

// Before any input, /metrics already has every counter CONTRACT.md §2
// names, and forewarn_observations_rejected_total a sample at 0 for every
// reject code ("every code present from the start, at 0"), so that a rate
// or an alert over it is defined before the first reject.
func TestMetricsBeforeAnyInput(t *testing.T) {
	_, url := streamtest.RunServer(t)
	nc := streamtest.Connect(t, url)
	cfg := config.Default()
	cfg.State.Dir = t.TempDir()
	cfg.HTTP.Listen = ""
	cfg = cfg.WithDefaults()
	d := runDaemon(t, nc, cfg)
	l := &live{d: d, cfg: cfg, nc: nc, srv: httptest.NewServer(Handler(d, cfg))}
	t.Cleanup(l.srv.Close)
	_, family := scrapeOpenMetrics(t, l)
	for _, name := range []string{"forewarn_observations_accepted_total", "forewarn_forecasts_published_total",
		"forewarn_refits_total", "forewarn_series"} {
		f := family(name)
		if f == nil || len(f.GetMetric()) != 1 {
			t.Errorf("%s: want one sample before any input, got %v", name, f)
		}
	}
	f := family("forewarn_observations_rejected_total")
	if f == nil {
		t.Fatal("no forewarn_observations_rejected_total before any input")
	}
	got := rejectsByCode(f)
	for _, c := range stream.RejectCodes() {
		if v, ok := got[c]; !ok || v != 0 {
			t.Errorf("code %q: sample %v (present %v), want 0 from the start", c, v, ok)
		}
	}
	if len(got) != len(stream.RejectCodes()) {
		t.Errorf("rejects by code %v, want exactly the %d codes of stream.RejectCodes", got, len(stream.RejectCodes()))
	}
}

// The daemon's views reach the JSON API intact.
func TestLiveSeriesAPI(t *testing.T) {
	l := startLive(t)
	_, body := l.get(t, "/api/series")
	var list []site.Summary
	if err := json.Unmarshal(body, &list); err != nil {
		t.Fatalf("%v: %s", err, body)
	}
	byTopic := map[string]site.Summary{}
	for _, s := range list {
		byTopic[s.Topic] = s
	}
	air := byTopic["air.passengers"]
	if air.Model != "ARIMA 0,1,1 × 0,1,1 s=12" || air.Status == "warming_up" || len(air.Alerts) != 1 {
		t.Errorf("air.passengers %+v", air)
	}
	// The last AirPassengers value (Dec 1960) is still in the open bucket;
	// the last closed one is Nov 1960: 390 (R `datasets`).
	if air.LastValue == nil || *air.LastValue != 390 {
		t.Errorf("air.passengers last closed value %v, want 390", air.LastValue)
	}
	// Both rejects count against the series: the message-level not_json
	// and the observation-level late one.
	if s := byTopic["lab.hormone"]; s.Status != "warming_up" || s.Model != "" || s.Rejects != 2 || s.Late != 1 {
		t.Errorf("lab.hormone %+v", s)
	}
	_, body = l.get(t, "/api/series/air.passengers")
	var fc struct {
		Topic  string
		Points []struct{ H int }
	}
	if err := json.Unmarshal(body, &fc); err != nil || fc.Topic != "air.passengers" || len(fc.Points) != 24 {
		t.Errorf("latest forecast: %v %s", err, body)
	}
	resp, svg := l.get(t, "/api/series/air.passengers/chart.svg?w=900&h=400")
	if resp.StatusCode != 200 || !strings.Contains(string(svg), "busy-summer: above 600") {
		t.Errorf("chart: %d, threshold line missing", resp.StatusCode)
	}
	if resp, _ := l.get(t, fmt.Sprintf("/series/%s", "no.such")); resp.StatusCode != 404 {
		t.Errorf("unknown series page: %d", resp.StatusCode)
	}
}
