package main

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"log/slog"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync/atomic"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"forewarn/config"
	"forewarn/state"
	"forewarn/stream/daemon"
	"forewarn/stream/streamtest"
)

// writeCSV writes n one-minute rows of a daily cycle around a slow rise,
// ending an hour before now, plus seeded Gaussian noise of standard
// deviation 3 (the shape is ours, the numbers do not matter).
func writeCSV(t testing.TB, dir string, n int) (string, time.Time) {
	return writeCurveCSV(t, dir, n, 3)
}

// writeCurveCSV is writeCSV with noise of standard deviation sd; 0 leaves
// a near-deterministic curve (rounded to 3 decimals) that the automatic
// model search fits with a slowly converging ARIMA(1,1,5), about twice
// the cost of a refit of the noisy one.
func writeCurveCSV(t testing.TB, dir string, n int, sd float64) (string, time.Time) {
	t.Helper()
	end := time.Now().UTC().Truncate(time.Minute).Add(-time.Hour)
	start := end.Add(-time.Duration(n-1) * time.Minute)
	r := rand.New(rand.NewPCG(16, 1))
	var b bytes.Buffer
	b.WriteString("time,value\n")
	for i := range n {
		at := start.Add(time.Duration(i) * time.Minute)
		v := 500 + 0.01*float64(i) + 80*math.Sin(2*math.Pi*float64(i)/1440) + 7*math.Sin(float64(i)*0.37)
		fmt.Fprintf(&b, "%s,%.3f\n", at.Format(time.RFC3339), v+sd*r.NormFloat64())
	}
	path := filepath.Join(dir, "print.queue.csv")
	if err := os.WriteFile(path, b.Bytes(), 0o600); err != nil {
		t.Fatal(err)
	}
	return path, start
}

// runningDaemon is an in-process daemon on a durable intake.
func startDaemon(t testing.TB, url string, series config.Series) func() {
	t.Helper()
	cfg := config.Default()
	cfg.State.Dir = t.TempDir()
	cfg.State.FlushInterval = 100 * time.Millisecond
	cfg.Series = []config.Series{series}
	cfg = cfg.WithDefaults()
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	store, err := state.Open(cfg.State.Dir)
	if err != nil {
		t.Fatal(err)
	}
	nc := streamtest.Connect(t, url)
	d, err := daemon.New(daemon.Options{Config: cfg, Conn: nc, Store: store,
		Logger: slog.New(slog.NewTextHandler(io.Discard, nil))})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- d.Run(ctx) }()
	select {
	case <-d.Ready():
	case err := <-done:
		t.Fatal(err)
	}
	return func() {
		cancel()
		if err := <-done; err != nil {
			t.Error(err)
		}
		store.Close()
	}
}

// latest returns the daemon's latest forecast's origin, or ok false.
func latest(t testing.TB, nc *nats.Conn, topic string) (origin time.Time, ok bool) {
	m, err := nc.Request("forewarn.query."+topic, nil, 2*time.Second)
	if err != nil {
		return time.Time{}, false
	}
	var f struct {
		Origin string `json:"origin"`
	}
	if json.Unmarshal(m.Data, &f) != nil || f.Origin == "" {
		return time.Time{}, false
	}
	o, err := time.Parse(time.RFC3339, f.Origin)
	return o, err == nil
}

// A quick fixed model keeps the test's refits short; the benchmark uses
// the default entry.
func quickSeries() config.Series {
	return config.Series{Match: ">", MinPoints: 50, Window: 500, RefitEvery: 500, Horizon: 12, Model: "1,1,0", Transform: "none"}
}

// forewarn load publishes a file's history; the daemon applies it as any
// input (a forecast is there once load returns and the daemon caught up);
// loading it again says how many rows would be late before sending and
// leaves them out (issue 16, forewarn load).
func TestLoadThenForecast(t *testing.T) {
	_, url := streamtest.RunServer(t)
	stop := startDaemon(t, url, quickSeries())
	defer stop()
	path, start := writeCSV(t, t.TempDir(), 600)
	var out, errb bytes.Buffer
	if code := runLoad([]string{"--nats", url, path}, &out, &errb); code != exitOK {
		t.Fatalf("load: exit %d: %s", code, errb.String())
	}
	if !strings.Contains(out.String(), "published 600 observations of print.queue in 1 acknowledged messages") {
		t.Errorf("load said %q", out.String())
	}
	nc := streamtest.Connect(t, url)
	// The last row's bucket stays open: the last closed one is row 599's.
	want := start.Add(598 * time.Minute)
	streamtest.Eventually(t, 30*time.Second, "forecast at the last closed bucket", func() bool {
		o, ok := latest(t, nc, "print.queue")
		return ok && o.Equal(want)
	})
	out.Reset()
	errb.Reset()
	if code := runLoad([]string{"--nats", url, path}, &out, &errb); code != exitOK {
		t.Fatalf("second load: exit %d: %s", code, errb.String())
	}
	if !strings.Contains(errb.String(), "599 of 600 rows fall in buckets up to "+want.Format(time.RFC3339)) ||
		!strings.Contains(out.String(), "published 1 observations") {
		t.Errorf("second load: stderr %q stdout %q; want 599 late rows named and 1 published", errb.String(), out.String())
	}
}

// Bad rows are named with their lines and nothing is published, unless
// --skip-bad; times must increase (CONTRACT.md §1 and §3).
func TestLoadBadRows(t *testing.T) {
	_, url := streamtest.RunServer(t)
	nc := streamtest.Connect(t, url)
	js, err := jetstream.New(nc)
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	st, err := js.CreateStream(ctx, jetstream.StreamConfig{Name: "T", Subjects: []string{"metrics.>"}})
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "q.csv")
	os.WriteFile(path, []byte("time,value\n"+
		"2026-01-01T00:00:00Z,1\n"+ // line 2
		"2026-01-01T00:01:00Z,abc\n"+ // line 3: not a number
		"2026-01-01T00:02:00Z,NA\n"+ // line 4: missing, not bad
		"yesterday,4\n"+ // line 5: bad time
		"2026-01-01T00:01:30Z,5\n"+ // line 6: good
		"2026-01-01T00:01:00Z,6\n"+ // line 7: does not increase
		"2026-01-01T00:03:00Z,7\n"), 0o600)
	var out, errb bytes.Buffer
	code := runLoad([]string{"--nats", url, path}, &out, &errb)
	for _, want := range []string{path + ":3: column \"value\": \"abc\"", path + ":5: time \"yesterday\"",
		path + ":7: time 2026-01-01T00:01:00Z does not come after", "3 bad rows, the first on line 3; nothing was published"} {
		if !strings.Contains(errb.String(), want) {
			t.Errorf("stderr lacks %q:\n%s", want, errb.String())
		}
	}
	if code != exitUsage {
		t.Errorf("exit %d, want %d", code, exitUsage)
	}
	if info, _ := st.Info(ctx); info.State.Msgs != 0 {
		t.Fatalf("%d messages published despite bad rows", info.State.Msgs)
	}
	errb.Reset()
	if code := runLoad([]string{"--nats", url, "--skip-bad", "--topic", "q", path}, &out, &errb); code != exitOK {
		t.Fatalf("--skip-bad: exit %d: %s", code, errb.String())
	}
	m, err := st.GetLastMsgForSubject(ctx, "metrics.q")
	if err != nil {
		t.Fatal(err)
	}
	// The good rows at 00:00, 00:01:30 and 00:03 (Unix seconds of 2026-01-01T00:00:00Z: 1767225600).
	if got := string(m.Data); got != `[{"time":1767225600,"value":1},{"time":1767225690,"value":5},{"time":1767225780,"value":7}]` {
		t.Errorf("published %s", got)
	}
}

// BenchmarkLoad20160 loads 14 days of minutes (20 160 rows) into a running
// daemon with the default series entry and reports, in the same run:
// load_s (load until every message is acknowledged), forecast_s (until
// the daemon's forecast is at the last closed bucket), rows/s of each,
// and raw_rows/s: the same rows published with JetStream one row a
// message, acknowledged the same way, without the daemon (the raw baseline
// of DEVELOPERS.md); rawbatch_rows/s: the same payloads as load. noisy is
// writeCSV's curve, smooth the same without noise (writeCurveCSV).
// noisy/batch1 sends one row a message (--batch 1): the refit schedule of
// one observation a message, every 60 closes, as before refits were
// coalesced within a message (series.ObserveIn): the baseline.
//
//	go test -run '^$' -bench Load20160 -benchtime 1x ./cmd/forewarn
func BenchmarkLoad20160(b *testing.B) {
	b.Run("noisy", func(b *testing.B) { benchLoad(b, 3, loadMaxBatch) })
	b.Run("smooth", func(b *testing.B) { benchLoad(b, 0, loadMaxBatch) })
	b.Run("noisy/batch1", func(b *testing.B) { benchLoad(b, 3, 1) })
}

func benchLoad(b *testing.B, sd float64, batch int) {
	const n = 20160
	for b.Loop() {
		_, url := streamtest.RunServer(b)
		stop := startDaemon(b, url, config.Series{Match: ">"})
		path, start := writeCurveCSV(b, b.TempDir(), n, sd)
		nc := streamtest.Connect(b, url)
		t0 := time.Now()
		if code := runLoad([]string{"--nats", url, "--batch", strconv.Itoa(batch), path}, io.Discard, io.Discard); code != exitOK {
			b.Fatalf("load: exit %d", code)
		}
		loadTook := time.Since(t0)
		want := start.Add((n - 2) * time.Minute)
		var firstAt atomic.Int64
		streamtest.Eventually(b, 10*time.Minute, "forecast at the last closed bucket", func() bool {
			o, ok := latest(b, nc, "print.queue")
			if ok && firstAt.Load() == 0 {
				firstAt.Store(int64(time.Since(t0)))
			}
			return ok && o.Equal(want)
		})
		fcTook := time.Since(t0)
		stop()

		// Raw baselines on a fresh server: a stream on other subjects,
		// no daemon.
		_, rurl := streamtest.RunServer(b)
		rnc := streamtest.Connect(b, rurl)
		js, _ := jetstream.New(rnc, jetstream.WithPublishAsyncMaxPending(64))
		if _, err := js.CreateStream(context.Background(), jetstream.StreamConfig{Name: "RAW", Subjects: []string{"raw.>"}, Storage: jetstream.FileStorage}); err != nil {
			b.Fatal(err)
		}
		f, _ := os.Open(path)
		rows, _, _, err := readLoadCSV(f, path, "")
		f.Close()
		if err != nil {
			b.Fatal(err)
		}
		one := make([][]byte, len(rows))
		counts := make([]int, len(rows))
		for i, r := range rows {
			one[i], counts[i] = appendLoadObs(nil, r), 1
		}
		r0 := time.Now()
		if err := publishAcked(rnc, "raw.print.queue", "", one, counts, 64, time.Minute, nil); err != nil {
			b.Fatal(err)
		}
		rawTook := time.Since(r0)
		payloads, pc := loadPayloads(rows, loadMaxBatch)
		r0 = time.Now()
		if err := publishAcked(rnc, "raw.print.queue", "", payloads, pc, 64, time.Minute, nil); err != nil {
			b.Fatal(err)
		}
		rawBatchTook := time.Since(r0)

		b.ReportMetric(loadTook.Seconds(), "load_s")
		b.ReportMetric(time.Duration(firstAt.Load()).Seconds(), "first_forecast_s")
		b.ReportMetric(fcTook.Seconds(), "caught_up_s")
		b.ReportMetric(n/loadTook.Seconds(), "load_rows/s")
		b.ReportMetric(n/rawTook.Seconds(), "raw_rows/s")
		b.ReportMetric(n/rawBatchTook.Seconds(), "rawbatch_rows/s")
		b.ReportMetric(100*rawTook.Seconds()/loadTook.Seconds(), "pct_raw")
	}
}
