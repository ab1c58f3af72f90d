package e2e

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
)

// loadRows is issue 16's history size: 14 days of one-minute rows.
const loadRows = 20160

// writeLoadCSV writes n one-minute rows ending an hour before now: a daily
// cycle around a slow rise with seeded Gaussian noise of standard
// deviation 3 (our own scenario; the numbers do not matter), and returns
// the path and the rows' times and values as written.
func writeLoadCSV(t *testing.T, n int) (string, []time.Time, []string) {
	t.Helper()
	end := time.Now().UTC().Truncate(time.Minute).Add(-time.Hour)
	start := end.Add(-time.Duration(n-1) * time.Minute)
	r := rand.New(rand.NewPCG(16, 1))
	times, values := make([]time.Time, n), make([]string, n)
	var b bytes.Buffer
	b.WriteString("time,value\n")
	for i := range n {
		times[i] = start.Add(time.Duration(i) * time.Minute)
		v := 500 + 0.01*float64(i) + 80*math.Sin(2*math.Pi*float64(i)/1440) + 7*math.Sin(float64(i)*0.37) + 3*r.NormFloat64()
		values[i] = strconv.FormatFloat(v, 'f', 3, 64)
		fmt.Fprintf(&b, "%s,%s\n", times[i].Format(time.RFC3339), values[i])
	}
	path := filepath.Join(t.TempDir(), "press.queue.csv")
	if err := os.WriteFile(path, b.Bytes(), 0o600); err != nil {
		t.Fatal(err)
	}
	return path, times, values
}

// TestLoadHistoryThenForecast is issue 16's load acceptance, through the
// built binary against a running daemon with its embedded server and the
// default series entry (window 2000, refit_every 60, automatic model):
// forewarn load sends 14 days of minutes, and the daemon's forecast at the
// last loaded origin (the bucket of the second-to-last row: the last row's
// bucket stays open) arrives on the forecast subject and answers
// forewarn query. Every origin from the first forecast to the last is
// published exactly once. It logs the time from the start of forewarn
// load to that forecast, and, in the same run on the same server, the
// rate of a raw JetStream publish of the same rows, one a message and in
// load's messages (the 10 s target is BenchmarkLoad20160's, in package
// main: timing here is reported, never asserted).
func TestLoadHistoryThenForecast(t *testing.T) {
	const topic = "press.queue"
	cfg := baseConfig(10) + `series:
  - match: ">"
`
	d := newDaemon(t, embedded, cfg)
	d.start()
	nc := connect(t, d.natsURL)
	path, times, values := writeLoadCSV(t, loadRows)
	last := times[loadRows-2]

	// Every forecast's origin, and when the last origin's arrived.
	var (
		mu      sync.Mutex
		origins = map[time.Time]int{}
		bad     []string
		lastAt  time.Time
	)
	gotLast := make(chan struct{})
	sub, err := nc.Subscribe("forewarn.forecast."+topic, func(m *nats.Msg) {
		var f struct {
			Origin time.Time `json:"origin"`
		}
		now := time.Now()
		mu.Lock()
		defer mu.Unlock()
		if err := json.Unmarshal(m.Data, &f); err != nil {
			bad = append(bad, err.Error())
			return
		}
		origins[f.Origin]++
		if f.Origin.Equal(last) && lastAt.IsZero() {
			lastAt = now
			close(gotLast)
		}
	})
	if err != nil {
		t.Fatal(err)
	}
	sub.SetPendingLimits(-1, -1)
	if err := nc.Flush(); err != nil {
		t.Fatal(err)
	}

	began := time.Now()
	out, errOut, code := cli(t, "load", "--nats", d.natsURL, path)
	loadDone := time.Now()
	if code != 0 {
		t.Fatalf("forewarn load: exit %d: %s", code, errOut)
	}
	if want := fmt.Sprintf("published %d observations of %s in 21 acknowledged messages", loadRows, topic); !strings.Contains(out, want) {
		t.Fatalf("forewarn load said %q; want %q", out, want)
	}
	select {
	case <-gotLast:
	case <-time.After(5 * time.Minute): // a failsafe: the wait is on the event
		t.Fatalf("no forecast at the last loaded origin %s within 5 minutes of the load", last.Format(time.RFC3339))
	}
	mu.Lock()
	toForecast := lastAt.Sub(began)
	mu.Unlock()

	// The query answers with the same origin.
	q, code, qerr := query(t, d.natsURL, topic)
	if code != 0 {
		t.Fatalf("forewarn query: exit %d: %s", code, qerr)
	}
	if f := decodeForecast(t, q); !f.Origin.Equal(last) {
		t.Fatalf("forewarn query: origin %s, want %s", f.Origin.Format(time.RFC3339), last.Format(time.RFC3339))
	}

	// Origins: one forecast each, none missing, from the first to the last.
	nc.Flush()
	mu.Lock()
	if len(bad) > 0 {
		t.Fatalf("undecodable forecasts: %v", bad[0])
	}
	first := last
	for o := range origins {
		if o.Before(first) {
			first = o
		}
	}
	var twice, missing int
	for o := first; !o.After(last); o = o.Add(time.Minute) {
		switch origins[o] {
		case 0:
			missing++
		case 1:
		default:
			twice++
		}
	}
	n := len(origins)
	mu.Unlock()
	if missing > 0 || twice > 0 || n != int(last.Sub(first)/time.Minute)+1 {
		t.Fatalf("origins %s…%s: %d missing, %d published more than once, %d distinct", first.Format(time.RFC3339), last.Format(time.RFC3339), missing, twice, n)
	}

	// The raw baseline on the same server: the same rows to a stream of
	// their own, one row a message, then in load's 21 messages.
	js, err := jetstream.New(nc, jetstream.WithPublishAsyncMaxPending(64))
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	if _, err := js.CreateStream(ctx, jetstream.StreamConfig{Name: "RAW_LOAD", Subjects: []string{"rawload.>"}, Storage: jetstream.FileStorage}); err != nil {
		t.Fatal(err)
	}
	one := make([][]byte, loadRows)
	for i := range one {
		one[i] = fmt.Appendf(nil, `{"time":%d,"value":%s}`, times[i].Unix(), values[i])
	}
	rawOne := rawPublish(t, ctx, js, one)
	var batches [][]byte
	for i := 0; i < loadRows; i += 1000 {
		batches = append(batches, append(append([]byte("["), bytes.Join(one[i:min(i+1000, loadRows)], []byte(","))...), ']'))
	}
	rawBatch := rawPublish(t, ctx, js, batches)

	rate := func(d time.Duration) float64 { return loadRows / d.Seconds() }
	t.Logf("forewarn load %d rows: command %.2f s (%.0f rows/s); forecast at the last origin %.2f s after the load began; %d origins published once each from %s",
		loadRows, loadDone.Sub(began).Seconds(), rate(loadDone.Sub(began)), toForecast.Seconds(), n, first.Format(time.RFC3339))
	t.Logf("raw JetStream publish, same server: one row a message %.2f s (%.0f rows/s), 1000 rows a message %.3f s (%.0f rows/s); load command %.2f× the one-a-message time",
		rawOne.Seconds(), rate(rawOne), rawBatch.Seconds(), rate(rawBatch), loadDone.Sub(began).Seconds()/rawOne.Seconds())
	t.Logf("forewarn load said: %s", strings.TrimSpace(out))
}

// rawPublish publishes payloads on rawload.x with JetStream, at most 64
// unacknowledged, and returns the time until every one is acknowledged.
func rawPublish(t *testing.T, ctx context.Context, js jetstream.JetStream, payloads [][]byte) time.Duration {
	t.Helper()
	began := time.Now()
	futures := make([]jetstream.PubAckFuture, 0, len(payloads))
	for _, p := range payloads {
		f, err := js.PublishAsync("rawload.x", p)
		if err != nil {
			t.Fatal(err)
		}
		futures = append(futures, f)
	}
	select {
	case <-js.PublishAsyncComplete():
	case <-ctx.Done():
		t.Fatal("raw publish: acknowledgements did not come")
	}
	for _, f := range futures {
		select {
		case <-f.Ok():
		case err := <-f.Err():
			t.Fatal(err)
		}
	}
	return time.Since(began)
}
