package source

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"log/slog"
	"net"
	"net/http"
	"net/http/httptest"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/prometheus/client_golang/prometheus"
	dto "github.com/prometheus/client_model/go"

	"forewarn/config"
	"forewarn/stream"
	"forewarn/stream/streamtest"
)

const omType = "application/openmetrics-text; version=1.0.0; charset=utf-8"

// good serves a gauge and a counter whose values grow with each scrape.
func good() *httptest.Server {
	var mu sync.Mutex
	n := 0
	return httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		mu.Lock()
		n++
		k := n
		mu.Unlock()
		w.Header().Set("Content-Type", omType)
		fmt.Fprintf(w, "# TYPE queue_jobs gauge\nqueue_jobs{shop=\"north\"} %d\n# TYPE printed_pages counter\nprinted_pages_total %d\n# EOF\n", 10+k%3, 100*k)
	}))
}

// collector keeps the messages published under metrics.>.
type collector struct {
	mu   sync.Mutex
	msgs []*nats.Msg
}

func (c *collector) add(m *nats.Msg) { c.mu.Lock(); c.msgs = append(c.msgs, m); c.mu.Unlock() }
func (c *collector) on(subject string) []*nats.Msg {
	c.mu.Lock()
	defer c.mu.Unlock()
	var out []*nats.Msg
	for _, m := range c.msgs {
		if m.Subject == subject {
			out = append(out, m)
		}
	}
	return out
}

func value(t *testing.T, c prometheus.Collector, labels ...string) float64 {
	t.Helper()
	ch := make(chan prometheus.Metric, 256)
	go func() { c.Collect(ch); close(ch) }()
	var sum float64
	for m := range ch {
		var pb dto.Metric
		if err := m.Write(&pb); err != nil {
			t.Fatal(err)
		}
		match := true
		for i := 0; i+1 < len(labels); i += 2 {
			found := false
			for _, l := range pb.GetLabel() {
				if l.GetName() == labels[i] && l.GetValue() == labels[i+1] {
					found = true
				}
			}
			match = match && found
		}
		if match {
			sum += pb.GetCounter().GetValue() + pb.GetGauge().GetValue()
		}
	}
	return sum
}

func src(name, url string, every time.Duration, extra func(*config.Source)) config.Source {
	s := config.Source{Name: name, OpenMetrics: url, Every: every, Timeout: every, MaxBytes: 1 << 20, Kind: "auto", TopicPrefix: name}
	if extra != nil {
		extra(&s)
	}
	return s
}

// Endpoints that hang, answer 500, answer 50 MB, answer garbage, refuse
// the connection, or bring more series than limits.max_series allows are
// each counted under their cause, while a good source beside them keeps
// publishing every scrape (issue 16, Resilience).
func TestBadEndpointsLeaveOthersFlowing(t *testing.T) {
	_, url := streamtest.RunServer(t)
	nc := streamtest.Connect(t, url)
	var col collector
	sub, err := nc.Subscribe("metrics.>", col.add)
	if err != nil {
		t.Fatal(err)
	}
	defer sub.Unsubscribe()
	if err := nc.Flush(); err != nil {
		t.Fatal(err)
	}

	ok := good()
	defer ok.Close()
	hang := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) { <-r.Context().Done() }))
	defer hang.Close()
	fail := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		http.Error(w, "exporter broke", http.StatusInternalServerError)
	}))
	defer fail.Close()
	line := []byte("# TYPE filler gauge\n" + strings.Repeat("filler{i=\"0123456789\"} 1\n", 40))
	huge := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		w.Header().Set("Content-Type", "text/plain; version=0.0.4")
		for written := 0; written < 50<<20; written += len(line) { // 50 MB
			if _, err := w.Write(line); err != nil {
				return // the scraper stopped reading at its limit
			}
		}
	}))
	defer huge.Close()
	garbage := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		w.Header().Set("Content-Type", omType)
		io.WriteString(w, "<html><body>not metrics</body></html>\n")
	}))
	defer garbage.Close()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	refused := "http://" + ln.Addr().String() + "/metrics"
	ln.Close() // nothing listens there any more
	many := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		var b bytes.Buffer
		b.WriteString("# TYPE cells gauge\n")
		for i := range 50 {
			fmt.Fprintf(&b, "cells{i=\"%02d\"} %d\n", i, i)
		}
		b.WriteString("# EOF\n")
		w.Header().Set("Content-Type", omType)
		w.Write(b.Bytes())
	}))
	defer many.Close()

	// A second between scrapes, and as timeout, leaves a loaded machine
	// (the race detector, other tests) time to move a megabyte; the
	// hanging source times out sooner.
	every := time.Second
	sources := []config.Source{
		src("good", ok.URL, every, nil),
		src("hang", hang.URL, 200*time.Millisecond, nil),
		src("fail", fail.URL, every, nil),
		src("huge", huge.URL, every, nil),
		src("garbage", garbage.URL, every, nil),
		src("refused", refused, every, nil),
	}
	log := slog.New(slog.NewTextHandler(io.Discard, nil))
	r, err := New(Options{Sources: sources, Conn: nc, Prefix: "metrics.", MaxSeries: 10, Logger: log})
	if err != nil {
		t.Fatal(err)
	}
	// A runner of its own for the source beyond limits.max_series, so
	// that which source reaches the bound first is not left to chance.
	rm, err := New(Options{Sources: []config.Source{src("many", many.URL, every, nil)}, Conn: nc, Prefix: "metrics.", MaxSeries: 20, Logger: log})
	if err != nil {
		t.Fatal(err)
	}
	m := r.Metrics()
	for _, name := range []string{"good", "hang"} {
		for _, c := range Causes() {
			if v := value(t, m.Failures, "source", name, "cause", c); v != 0 {
				t.Fatalf("%s %s starts at %v, want 0", name, c, v)
			}
		}
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan struct{})
	var wg sync.WaitGroup
	for _, run := range []*Runner{r, rm} {
		wg.Add(1)
		go func() { defer wg.Done(); run.Run(ctx) }()
	}
	go func() { wg.Wait(); close(done) }()

	want := map[string]string{"hang": CauseTimeout, "fail": CauseHTTPStatus, "huge": CauseTooLarge,
		"garbage": CauseMalformed, "refused": CauseRefused}
	streamtest.Eventually(t, 30*time.Second, "every bad source counted twice under its cause while good kept publishing", func() bool {
		for name, cause := range want {
			if value(t, m.Failures, "source", name, "cause", cause) < 2 {
				return false
			}
		}
		return value(t, rm.Metrics().Failures, "source", "many", "cause", CauseTooManySeries) >= 2 &&
			len(col.on("metrics.good.queue_jobs.north")) >= 3
	})
	cancel()
	<-done

	for name, cause := range want {
		for _, c := range Causes() {
			if v := value(t, m.Failures, "source", name, "cause", c); (c == cause) != (v > 0) {
				t.Errorf("source %s, cause %s: %v failures (its cause is %s)", name, c, v, cause)
			}
		}
	}
	if v := value(t, m.Failures, "source", "good"); v != 0 {
		t.Errorf("the good source failed %v times", v)
	}
	if got := value(t, rm.Metrics().Series, "source", "many"); got != 20 {
		t.Errorf("many published %v series a scrape, want limits.max_series = 20", got)
	}
	if d := value(t, rm.Metrics().Dropped, "source", "many", "reason", DropTooManySeries); d < 60 {
		t.Errorf("many dropped %v samples beyond the bound, want 30 a scrape", d)
	}
	// The same 20 series every time: topics in order, cells.00 … cells.19.
	if len(col.on("metrics.many.cells.19")) == 0 || len(col.on("metrics.many.cells.20")) != 0 {
		t.Error("the series kept under limits.max_series are not the first 20 topics")
	}
	gauges, counters := col.on("metrics.good.queue_jobs.north"), col.on("metrics.good.printed_pages_total")
	if len(counters) == 0 {
		t.Fatal("no counter messages")
	}
	if k := gauges[0].Header.Get(stream.KindHeader); k != "gauge" {
		t.Errorf("gauge published with kind %q", k)
	}
	if k := counters[0].Header.Get(stream.KindHeader); k != "counter" {
		t.Errorf("counter published with kind %q", k)
	}
	// Each message is an observation the intake accepts.
	for _, msg := range append(gauges[:1], counters[len(counters)-1]) {
		obs, err := stream.ParsePayload(msg.Data, time.Now(), stream.Limits{}, nil)
		if err != nil || len(obs) != 1 {
			t.Fatalf("%s: %q: %v", msg.Subject, msg.Data, err)
		}
		if d := time.Since(obs[0].Time); d < 0 || d > time.Minute {
			t.Errorf("%s stamped %v, not the scrape's time", msg.Subject, obs[0].Time)
		}
	}
}

// A repeated series publishes its last sample (OpenMetrics 1.0, Data
// Model, MetricFamily: a LabelSet is unique in its family, so the parser's
// second point is the newer); NaN and ±Inf are not published (the intake
// takes finite numbers, CONTRACT.md §2); a topic longer than the bus
// allows is not published. Each is counted by reason.
func TestDuplicateLastWins(t *testing.T) {
	_, url := streamtest.RunServer(t)
	nc := streamtest.Connect(t, url)
	var col collector
	sub, err := nc.Subscribe("metrics.>", col.add)
	if err != nil {
		t.Fatal(err)
	}
	defer sub.Unsubscribe()
	long := strings.Repeat("v", config.MaxTopicLen)
	srv := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		w.Header().Set("Content-Type", omType)
		fmt.Fprintf(w, "# TYPE d gauge\nd{a=\"1\"} 1\nd{a=\"1\"} 2\n# TYPE n gauge\nn NaN\n# TYPE i gauge\ni +Inf\n# TYPE l gauge\nl{a=%q} 1\n# EOF\n", long)
	}))
	defer srv.Close()
	r, err := New(Options{Sources: []config.Source{src("dup", srv.URL, time.Hour, nil)}, Conn: nc, Prefix: "metrics.",
		Logger: slog.New(slog.NewTextHandler(io.Discard, nil))})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan struct{})
	go func() { r.Run(ctx); close(done) }()
	m := r.Metrics()
	streamtest.Eventually(t, 10*time.Second, "one scrape published", func() bool {
		return value(t, m.Published, "source", "dup") == 1 && len(col.on("metrics.dup.d.1")) == 1
	})
	cancel()
	<-done
	if got := string(col.on("metrics.dup.d.1")[0].Data); !strings.HasSuffix(got, `"value":2}`) {
		t.Errorf("published %s, want the last sample, value 2", got)
	}
	for reason, want := range map[string]float64{DropDuplicate: 1, DropNotFinite: 2, DropBadTopic: 1, DropTooManySeries: 0} {
		if got := value(t, m.Dropped, "source", "dup", "reason", reason); got != want {
			t.Errorf("dropped for %s: %v, want %v", reason, got, want)
		}
	}
}
