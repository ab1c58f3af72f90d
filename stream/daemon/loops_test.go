package daemon

import (
	"context"
	"encoding/json"
	"fmt"
	"math"
	"reflect"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"forewarn/config"
	"forewarn/engine/alert"
	"forewarn/engine/series"
	"forewarn/stream"
	"forewarn/stream/cluster"
	"forewarn/stream/streamtest"
)

// Test helpers over the loops; only inside Inspect (every loop paused).

// loopFor is the loop that owns topic's series.
func (d *Daemon) loopFor(topic string) *loop { return d.loops[d.route.loopOfTopic(topic)] }

// handleBatch applies batch as the loops would: each message on the loop
// of its partition, in order.
func (d *Daemon) handleBatch(batch []stream.Message) {
	for i := range batch {
		d.loops[d.route.loopOf(&batch[i])].handle(&batch[i])
	}
}

// entryOf is topic's entry, on whichever loop owns it (nil: none).
func (d *Daemon) entryOf(topic string) *entry { return d.loopFor(topic).series[topic] }

// Shape of TestLoopsDeterminism.
const (
	detSeries = 24
	detObs    = 160
	detT0     = 1_700_000_040 // a whole minute
)

func detTopic(i int) string { return fmt.Sprintf("det.s%02d", i) }

// detMsg is observation j of series i: the tests' deterministic walk,
// offset per series, every third series a counter (by its kind header).
func detMsg(i, j int) *nats.Msg {
	v := 1000 + 7*float64(i) + 3*float64(j) + 5*math.Sin(float64(j)*0.7+float64(i))
	if i%3 == 2 {
		v = 10*float64(j*j) + float64(i) // a rising counter
	}
	m := nats.NewMsg("metrics." + detTopic(i))
	m.Data = fmt.Appendf(nil, `{"time": %d, "value": %g}`, detT0+60*j, v)
	if i%3 == 2 {
		m.Header.Set(stream.KindHeader, "counter")
	}
	return m
}

// detRun publishes the input through JetStream to a fresh server and a
// daemon with the given number of loops, waits until every series has
// published the forecast of its last closed bucket and nothing waits on a
// refit or an alert evaluation, stops the daemon and returns every
// series' record and latest forecast message (without "issued", the one
// wall-time field), and how many series each loop owned.
func detRun(t *testing.T, loops int) (map[string]*series.Snapshot, map[string]map[string]any, []int) {
	t.Helper()
	_, url := streamtest.RunServer(t)
	cfg := testConfig(t.TempDir())
	cfg.Intake.Loops = loops
	cfg.Series = append([]config.Series{{Match: "det.>", Kind: "auto", Step: time.Minute, Horizon: 6,
		Levels: []float64{80, 95}, Window: 200, MinPoints: 20, RefitEvery: 25,
		Model: "1,1,0", Transform: "none"}}, cfg.Series...)
	thr := 1000 + 3*float64(detObs)*0.6 // crossed by the gauges half-way: simulations, raises
	cfg.Alerts = []config.Alert{{Name: "high", Match: "det.>", Above: &thr, Within: 3 * time.Minute, Probability: 0.5}}
	cfg = cfg.WithDefaults()
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	r := start(t, url, cfg)
	if r.d.Loops() != loops {
		t.Fatalf("daemon runs %d loops, want %d", r.d.Loops(), loops)
	}
	nc := streamtest.Connect(t, url)
	js, err := jetstream.New(nc)
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	for j := range detObs { // series interleaved, every publication acknowledged
		for i := range detSeries {
			if _, err := js.PublishMsg(ctx, detMsg(i, j)); err != nil {
				t.Fatal(err)
			}
		}
	}
	origin := time.Unix(detT0+60*(detObs-2), 0).UTC().Format(time.RFC3339)
	m := r.d.metrics
	defer func() {
		if t.Failed() {
			for i := range detSeries {
				b, _ := r.d.Latest(detTopic(i))
				t.Logf("%s: %.200s", detTopic(i), b)
			}
			t.Logf("refitting %v pending %v queued %v rejected %v accepted %v want origin %s", gaugeValue(m.Refitting), gaugeValue(m.Pending), gaugeValue(m.AlertsQueued), rejectedTotal(r.d), counterValue(m.Accepted), origin)
		}
	}()
	waitUntil(t, 20*time.Second, "every series' last forecast, nothing waiting", func() bool {
		for i := range detSeries {
			b, ok := r.d.Latest(detTopic(i))
			if !ok || !strings.Contains(string(b), `"origin":"`+origin+`"`) {
				return false
			}
		}
		return gaugeValue(m.Refitting) == 0 && gaugeValue(m.Pending) == 0 && gaugeValue(m.AlertsQueued) == 0
	})
	per := make([]int, loops)
	r.d.Inspect(ctx, func(map[string]*Entry) {
		for k, l := range r.d.loops {
			per[k] = len(l.series)
		}
	})
	fcs := map[string]map[string]any{}
	for i := range detSeries {
		b, _ := r.d.Latest(detTopic(i))
		var f map[string]any
		if err := json.Unmarshal(b, &f); err != nil {
			t.Fatal(err)
		}
		delete(f, "issued")
		fcs[detTopic(i)] = f
	}
	if counterValue(m.Refits) < detSeries*(detObs/25-1) {
		t.Errorf("%v refits: the input should refit every series several times", counterValue(m.Refits))
	}
	if counterValue(m.AlertEvaluations[alert.MethodSimulation]) == 0 {
		t.Error("no alert evaluation reached the alert workers")
	}
	r.stop(t)
	recs := map[string]*series.Snapshot{}
	for i := range detSeries {
		recs[detTopic(i)] = load(t, cfg.State.Dir, detTopic(i))
	}
	return recs, fcs, per
}

// A series' results do not depend on the number of loops (issue 15,
// "Inside one process"; doc.go): the same input through one loop and
// through two gives every series the same record and the same latest
// forecast, byte for byte apart from the forecast's wall-time "issued".
// Property test with a known truth: the single loop's run. The input
// refits every series several times, holds observations behind alert
// simulations, and mixes gauges and counters.
func TestLoopsDeterminism(t *testing.T) {
	recs1, fcs1, _ := detRun(t, 1)
	recs2, fcs2, per := detRun(t, 2)
	for k, n := range per {
		if n == 0 {
			t.Errorf("loop %d of 2 owns no series (per loop: %v): the test would not compare anything", k, per)
		}
	}
	for i := range detSeries {
		topic := detTopic(i)
		if d := snapshotDiff(recs2[topic], recs1[topic]); d != "" {
			t.Errorf("%s: record with 2 loops differs from 1 loop:%s", topic, d)
		}
		if !reflect.DeepEqual(fcs2[topic], fcs1[topic]) {
			t.Errorf("%s: latest forecast with 2 loops differs from 1 loop:\n%v\n%v", topic, fcs2[topic], fcs1[topic])
		}
	}
}

// For owners_web_test.go (package daemon_test, which may import the web
// package): the shared 3-node cluster, the test configuration, and a
// daemon run until the test's end.
var (
	NatsClusterForTest = natsCluster
	TestConfigForTest  = testConfig
	ClPublishForTest   = clPublish
	ClTopicForTest     = clTopic
)

const ClSeriesForTest = clSeries

// StartForTest runs a daemon on cfg until the test ends (or stop is
// called).
func StartForTest(t *testing.T, url string, cfg *config.Config) (d *Daemon, stop func()) {
	r := start(t, url, cfg)
	var once sync.Once
	stop = func() { once.Do(func() { r.stop(t) }) }
	t.Cleanup(stop)
	return r.d, stop
}

// limits.max_series bounds the series of every loop together (CONTRACT
// §2, limits): with two loops and max_series 5, of 20 new topics exactly 5
// become series and 15 are rejected as too_many_series.
func TestMaxSeriesOverLoops(t *testing.T) {
	_, url := streamtest.RunServer(t)
	cfg := testConfig(t.TempDir())
	cfg.Intake.Loops = 2
	cfg.Limits.MaxSeries = 5
	r := start(t, url, cfg)
	defer r.stop(t)
	nc := streamtest.Connect(t, url)
	const topics = 20
	streamtest.PublishAcked(t, nc, topics, func(i int) (string, []byte) {
		return fmt.Sprintf("metrics.max.t%02d", i), []byte(`{"time": 1700000040, "value": 1}`)
	})
	m := r.d.metrics
	waitUntil(t, 30*time.Second, "every message accepted or rejected", func() bool {
		return counterValue(m.Accepted)+rejectedTotal(r.d) >= topics
	})
	var n int
	per := make([]int, 2)
	r.d.Inspect(context.Background(), func(all map[string]*Entry) {
		n = len(all)
		for k, l := range r.d.loops {
			per[k] = len(l.series)
		}
	})
	if n != 5 || counterValue(m.Accepted) != 5 {
		t.Errorf("%d series (per loop %v), %v accepted; want 5 and 5", n, per, counterValue(m.Accepted))
	}
	if got := counterValue(m.Rejected.WithLabelValues(stream.CodeTooManySeries)); got != topics-5 {
		t.Errorf("%v rejected as %s, want %d", got, stream.CodeTooManySeries, topics-5)
	}
	if g := gaugeValue(m.Series); g != 5 {
		t.Errorf("forewarn_series %v, want 5", g)
	}
}

// With cluster.partitions and several loops, each loop acknowledges the
// consumers of the partitions it owns (PartMarker), so that once every
// record is written every partition's consumer is acknowledged up to the
// last message of its partition: a loop that acknowledged only some of
// its partitions would leave the others behind. One instance owns all four partitions of a
// one-server stream here (common practice for the check: the consumer's
// ack floor as the server reports it).
func TestLoopsAckOwnPartitions(t *testing.T) {
	_, url := streamtest.RunServer(t)
	cfg := testConfig(t.TempDir())
	cfg.NATS.URL = url
	cfg.Intake.Stream = "LOOPACK"
	cfg.Intake.Loops = 2
	cfg.Cluster.Partitions = 4
	cfg.Cluster.Instance = "solo"
	cfg.Cluster.Lease = 2 * time.Second
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	r := start(t, url, cfg)
	defer r.stop(t)
	if r.d.Loops() != 2 {
		t.Fatalf("%d loops, want 2", r.d.Loops())
	}
	nc := streamtest.Connect(t, url)
	const ns, nobs = 12, 30
	last := map[int]uint64{} // partition → last stream position
	streamtest.PublishAcked(t, nc, ns*nobs, func(k int) (string, []byte) {
		i, j := k%ns, k/ns
		subj := fmt.Sprintf("metrics.ack.s%02d", i)
		last[cluster.Partition(subj, 4)] = uint64(k + 1) // one stream, positions from 1
		return subj, fmt.Appendf(nil, `{"time": %d, "value": %g}`, detT0+60*j, 100+float64(j%7)+float64(i))
	})
	if len(last) != 4 {
		t.Fatalf("the topics fall in %d of 4 partitions: pick others", len(last))
	}
	js, err := jetstream.New(nc)
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	st, err := js.Stream(ctx, cfg.Intake.Stream)
	if err != nil {
		t.Fatal(err)
	}
	floors := func() map[int]uint64 {
		out := map[int]uint64{}
		for info := range st.ListConsumers(ctx).Info() {
			var p int
			var epoch uint64
			if _, err := fmt.Sscanf(info.Name, cfg.Intake.Consumer+"-p%d-e%d", &p, &epoch); err == nil {
				out[p] = info.AckFloor.Stream
			}
		}
		return out
	}
	var got map[int]uint64
	streamtest.Eventually(t, 30*time.Second, "every partition acknowledged up to its last message", func() bool {
		got = floors()
		for p, want := range last {
			if got[p] != want {
				return false
			}
		}
		return true
	})
}

// TestFlushMaxCountsEveryLoop: state.flush_max counts the daemon's
// messages, whichever loop applies them (issue 15). Two loops share
// one durable consumer; flush_interval is an hour, so only flush_max can
// start a write. 1320 messages, about 660 per loop, exceed flush_max = 1000
// for the daemon but not for either loop alone: the state must be written
// and the consumer acknowledged all the same. (When each loop counted only
// its own, two loops wrote after 2 × flush_max: past the consumer's
// 200 000 unacknowledged messages at the default, where the server stops
// delivering until the next flush_interval.)
func TestFlushMaxCountsEveryLoop(t *testing.T) {
	const nSeries, nObs, flushMax = 60, 22, 1000
	_, url := streamtest.RunServer(t)
	cfg := testConfig(t.TempDir())
	cfg.Intake.Loops = 2
	cfg.State.FlushInterval = time.Hour
	cfg.State.FlushMax = flushMax
	r := start(t, url, cfg)
	defer r.stop(t)
	if r.d.Loops() != 2 {
		t.Fatalf("daemon runs %d loops, want 2", r.d.Loops())
	}
	perLoop := make([]int, 2)
	for i := range nSeries {
		perLoop[r.d.route.loopOfTopic(fmt.Sprintf("fm.s%02d", i))] += nObs
	}
	for k, n := range perLoop {
		if n <= flushMax/2 || n >= flushMax {
			t.Fatalf("loop %d gets %d messages, want between flush_max/2 and flush_max (the test's premise)", k, n)
		}
	}
	nc := streamtest.Connect(t, url)
	streamtest.PublishAcked(t, nc, nSeries*nObs, func(j int) (string, []byte) {
		i, k := j%nSeries, j/nSeries
		return fmt.Sprintf("metrics.fm.s%02d", i), fmt.Appendf(nil, `{"time": %d, "value": %d}`, detT0+60*k, 100+k%7+i)
	})
	waitUntil(t, 30*time.Second, "every observation applied", func() bool {
		return counterValue(r.d.metrics.Accepted) == nSeries*nObs
	})
	js, err := jetstream.New(nc)
	if err != nil {
		t.Fatal(err)
	}
	var floor uint64
	waitUntil(t, 30*time.Second, "the state written and the consumer acknowledged after flush_max messages", func() bool {
		cons, err := js.Consumer(context.Background(), cfg.Intake.Stream, cfg.Intake.Consumer)
		if err != nil {
			t.Fatal(err)
		}
		floor = cons.CachedInfo().AckFloor.Stream
		return floor > 0
	})
	t.Logf("acknowledged up to %d of %d messages (per loop %v)", floor, nSeries*nObs, perLoop)
}
