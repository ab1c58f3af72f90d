package daemon

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	dto "github.com/prometheus/client_model/go"
	bolt "go.etcd.io/bbolt"

	"forewarn/config"
	"forewarn/engine/series"
	"forewarn/state"
	"forewarn/stream"
	"forewarn/stream/streamtest"
)

// testConfig is a small durable setup with a fixed model, so that fits are
// quick and deterministic.
func testConfig(dir string) *config.Config {
	c := config.Default()
	c.State.Dir = dir
	c.State.FlushInterval = 50 * time.Millisecond
	c.Limits.MaxPast = 100 * 8760 * time.Hour
	c.Limits.MaxFuture = 100 * 8760 * time.Hour
	c.Series = []config.Series{{Match: ">", Kind: "gauge", Step: time.Minute, Horizon: 6,
		Levels: []float64{80, 95}, Window: 200, MinPoints: 20, RefitEvery: 30,
		Model: "1,1,0", Transform: "none"}}
	return c.WithDefaults()
}

type runningDaemon struct {
	d      *Daemon
	cancel context.CancelFunc
	done   chan error
	store  *state.Store
}

// start runs a daemon on cfg; each of with may change its options.
func start(t *testing.T, url string, cfg *config.Config, with ...func(*Options)) *runningDaemon {
	t.Helper()
	store, err := state.Open(cfg.State.Dir)
	if err != nil {
		t.Fatal(err)
	}
	nc := streamtest.Connect(t, url)
	o := Options{Config: cfg, Conn: nc, Store: store,
		Logger: slog.New(slog.NewTextHandler(os.Stderr, &slog.HandlerOptions{Level: slog.LevelError}))}
	for _, f := range with {
		f(&o)
	}
	d, err := New(o)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	r := &runningDaemon{d: d, cancel: cancel, done: make(chan error, 1), store: store}
	go func() { r.done <- d.Run(ctx) }()
	select {
	case <-d.Ready():
	case err := <-r.done:
		t.Fatalf("daemon stopped at once: %v", err)
	}
	return r
}

func (r *runningDaemon) stop(t *testing.T) {
	t.Helper()
	r.cancel()
	if err := <-r.done; err != nil {
		t.Fatalf("daemon run: %v", err)
	}
	if err := r.store.Close(); err != nil {
		t.Fatal(err)
	}
}

func counter(t *testing.T, c interface{ Write(*dto.Metric) error }) float64 {
	t.Helper()
	var m dto.Metric
	if err := c.Write(&m); err != nil {
		t.Fatal(err)
	}
	if m.Counter != nil {
		return m.Counter.GetValue()
	}
	return m.Gauge.GetValue()
}

// publishWalk publishes n one-per-minute observations of a deterministic
// random-walk-like series on topic, starting at bucket from.
func publishWalk(t *testing.T, url, topic string, from, n int) {
	t.Helper()
	nc := streamtest.Connect(t, url)
	for i := from; i < from+n; i++ {
		v := 1000 + 3*float64(i) + 5*math.Sin(float64(i)*0.7)
		msg := fmt.Sprintf(`{"time": %d, "value": %g}`, 1_700_000_000+60*i, v)
		if err := nc.Publish("metrics."+topic, []byte(msg)); err != nil {
			t.Fatal(err)
		}
	}
	if err := nc.Flush(); err != nil {
		t.Fatal(err)
	}
}

// A record that cannot be read affects only its own series: the others
// resume where they were, the broken one starts afresh, and the reset is
// counted (issue 6). The broken record is set aside as it was found, so
// the fresh series' records do not overwrite it.
func TestCorruptRecordResetsOnlyItsSeries(t *testing.T) {
	_, url := streamtest.RunServer(t)
	dir := t.TempDir()
	cfg := testConfig(dir)
	r := start(t, url, cfg)
	for _, topic := range []string{"a.one", "b.two"} {
		publishWalk(t, url, topic, 0, 40)
	}
	streamtest.Eventually(t, 10*time.Second, "80 observations accepted", func() bool {
		return counter(t, r.d.Metrics().Accepted) == 80
	})
	r.stop(t)

	// Flip one byte inside b.two's record, behind the store's back.
	db, err := bolt.Open(filepath.Join(dir, state.FileName), 0o600, nil)
	if err != nil {
		t.Fatal(err)
	}
	var broken []byte
	err = db.Update(func(tx *bolt.Tx) error {
		b := tx.Bucket([]byte("series"))
		broken = append([]byte(nil), b.Get([]byte("b.two"))...)
		broken[len(broken)/2] ^= 0xff
		return b.Put([]byte("b.two"), broken)
	})
	db.Close()
	if err != nil {
		t.Fatal(err)
	}

	r = start(t, url, cfg)
	if got := counter(t, r.d.Metrics().StateResets); got != 1 {
		t.Fatalf("state resets %v, want 1", got)
	}
	var oneClosed uint64
	var twoKept bool
	ok := r.d.Inspect(context.Background(), func(all map[string]*Entry) {
		if e := all["a.one"]; e != nil {
			oneClosed = e.Series().Snapshot().Closed
		}
		_, twoKept = all["b.two"]
	})
	if !ok {
		t.Fatal("Inspect on a running daemon returned false")
	}
	if oneClosed != 39 || twoKept {
		t.Fatalf("after restart: a.one closed %d (want 39, resumed); b.two kept %v (want false: starts afresh with its next observation)", oneClosed, twoKept)
	}
	// Its next observation starts it afresh.
	publishWalk(t, url, "b.two", 40, 1)
	streamtest.Eventually(t, 10*time.Second, "b.two back", func() bool {
		back := false
		r.d.Inspect(context.Background(), func(all map[string]*Entry) { _, back = all["b.two"] })
		return back
	})
	if _, ok := r.d.Latest("a.one"); !ok {
		t.Error("the intact series serves no forecast after the restart")
	}
	r.stop(t)

	st, err := state.Open(dir, state.ReadOnly())
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	recs, err := st.SetAsideRecords()
	if err != nil {
		t.Fatal(err)
	}
	if len(recs) != 1 || recs[0].Topic != "b.two" || recs[0].Bytes != len(broken) || !errors.Is(recs[0].Err, state.ErrCorrupt) {
		t.Fatalf("set-aside records %+v, want b.two's broken record (%d bytes)", recs, len(broken))
	}
	if snap, err := st.Load("b.two"); err != nil || snap.Closed != 0 {
		t.Fatalf("b.two's new record: %v (closed %v), want the fresh series' (0 closed)", err, snap)
	}
}

// at is one observation of an intake message: bucket b of one minute
// counted from bucket0, sec seconds into it, value v.
type at struct {
	b, sec int64
	v      float64
}

// bucket0 is the first one-minute bucket of intakeMsg: the one starting at
// unix second 1 700 000 040.
const bucket0 = 1_700_000_040 / 60

// intakeMsg is the message at stream position seq on metrics.<topic>: one
// observation as a JSON object, several as a JSON array (CONTRACT.md §2,
// Intake).
func intakeMsg(topic string, seq uint64, obs ...at) stream.Message {
	var data []byte
	if len(obs) > 1 {
		data = append(data, '[')
	}
	for i, o := range obs {
		if i > 0 {
			data = append(data, ',')
		}
		data = fmt.Appendf(data, `{"time": %d, "value": %v}`, 60*(bucket0+o.b)+o.sec, o.v)
	}
	if len(obs) > 1 {
		data = append(data, ']')
	}
	return stream.Message{Subject: "metrics." + topic, Seq: seq, Received: time.Now(), Data: data}
}

// walk is the value publishWalk gives bucket i.
func walk(i int64) float64 { return 1000 + 3*float64(i) + 5*math.Sin(float64(i)*0.7) }

// snapshotDiff names the fields in which two records differ ("" when none
// does), with both values.
func snapshotDiff(got, want *series.Snapshot) string {
	var b strings.Builder
	g, w := reflect.ValueOf(*got), reflect.ValueOf(*want)
	for i := range g.NumField() {
		gv, wv := g.Field(i).Interface(), w.Field(i).Interface()
		if reflect.DeepEqual(gv, wv) {
			continue
		}
		if m, ok := gv.(*series.ModelSnapshot); ok && m != nil {
			gv = *m
		}
		if m, ok := wv.(*series.ModelSnapshot); ok && m != nil {
			wv = *m
		}
		fmt.Fprintf(&b, "\n\t%s: got %v, want %v", g.Type().Field(i).Name, gv, wv)
	}
	return b.String()
}

// A message delivered again has no effect: each record holds the stream
// position it reflects, message and observation within it (doc.go, "What
// is acknowledged"). Every replay below is one that would change the
// state if it were applied:
//
//   - g.open: a message with another value for the still open bucket
//     (the open bucket takes the last value: series.Observe);
//   - cnt.x, a counter: raw values of the open bucket around a reset,
//     alone and in an array (a drop is a reset: a replayed higher value
//     makes the next one another reset);
//   - s.straddle: one array whose third observation reaches the first
//     fit's refit point and whose fourth closes the next bucket, the last
//     it closes: the refit waits for that close (refits due inside one
//     message are coalesced at its last close, series.ObserveIn) and the
//     rest of the array waits for the refit. Its record as saved while
//     that refit ran (position: the array, 4 observations) is put back in
//     the state file, as after a crash before the refit was written;
//     restarted and handed the whole stream again, the series must end
//     exactly as in the uninterrupted run: nothing applied twice, nothing
//     of the array lost.
//
// The messages are handed to the daemon directly with their stream
// positions, as the intake hands over a redelivery after a restart.
func TestRedeliveryHasNoEffect(t *testing.T) {
	_, url := streamtest.RunServer(t)
	dir := t.TempDir()
	cfg := testConfig(dir) // first fit at the 20th closed bucket
	cnt := cfg.Series[0]
	cnt.Match, cnt.Kind = "cnt.>", "counter"
	cfg.Series = []config.Series{cnt, cfg.Series[0]}

	var seq uint64
	msg := func(topic string, obs ...at) stream.Message {
		seq++
		return intakeMsg(topic, seq, obs...)
	}
	byTopic := map[string][]stream.Message{}
	var all []stream.Message
	add := func(topic string, obs ...at) stream.Message {
		m := msg(topic, obs...)
		byTopic[topic] = append(byTopic[topic], m)
		all = append(all, m)
		return m
	}
	for b := range int64(5) {
		add("g.open", at{b: b, v: walk(b)})
	}
	open500 := add("g.open", at{b: 5, v: 500})
	open900 := add("g.open", at{b: 5, sec: 10, v: 900})
	add("g.open", at{b: 5, sec: 20, v: walk(5)})

	add("cnt.x", at{b: 0, v: 100})
	add("cnt.x", at{b: 1, v: 150})
	raw300 := add("cnt.x", at{b: 2, v: 300})
	raw20 := add("cnt.x", at{b: 2, sec: 10, v: 20}) // reset: offset 300
	add("cnt.x", at{b: 2, sec: 20, v: 30})
	resetArray := add("cnt.x", at{b: 2, sec: 30, v: 35}, at{b: 2, sec: 40, v: 5}, at{b: 2, sec: 50, v: 8}) // reset: offset 335

	for b := range int64(19) {
		add("s.straddle", at{b: b, v: walk(b)})
	}
	straddle := add("s.straddle",
		at{b: 18, sec: 30, v: walk(18) + 0.5}, // same open bucket, a later value
		at{b: 19, v: walk(19)},                // closes 18: 19 closed
		at{b: 20, v: walk(20)},                // closes 19: 20 closed, the first fit due; bucket 21 comes later in the array, so it waits
		at{b: 21, v: walk(21)},                // closes 20: 21 closed, the array's last close: the first fit
		at{b: 21, sec: 20, v: walk(21) + 3},
		at{b: 21, sec: 40, v: walk(21) + 1})

	// The uninterrupted run. The record of s.straddle is copied as it
	// stands while its refit waits (the loop is inside Inspect, so the
	// refit cannot have started).
	r := start(t, url, cfg)
	var mid *series.Snapshot
	r.d.Inspect(context.Background(), func(map[string]*Entry) {
		r.d.handleBatch(all)
		e := r.d.entryOf("s.straddle") // begun by handleBatch: not in Inspect's view
		if e == nil {
			return
		}
		var err error
		if mid, err = state.Decode(state.Encode(nil, e.s.Snapshot())); err != nil {
			t.Error(err)
		}
	})
	r.stop(t)
	if mid == nil {
		t.Fatal("no record of s.straddle during its refit")
	}
	if mid.Seq != straddle.Seq || mid.SeqApplied != 4 || mid.Model != nil || mid.Closed != 21 {
		t.Fatalf("s.straddle during its refit: position (%d, %d), model %v, closed %d; want (%d, 4), none, 21",
			mid.Seq, mid.SeqApplied, mid.Model != nil, mid.Closed, straddle.Seq)
	}
	want := map[string]*series.Snapshot{}
	for topic := range byTopic {
		want[topic] = load(t, dir, topic)
		if want[topic].Late != 0 {
			t.Fatalf("%s: %d late observations in the uninterrupted run", topic, want[topic].Late)
		}
	}
	if g := want["g.open"]; g.Closed != 5 || g.OpenBucket != bucket0+5 || g.OpenValue != walk(5) {
		t.Fatalf("g.open: closed %d, open bucket %d value %g; want 5, 5, %g", g.Closed, g.OpenBucket-bucket0, g.OpenValue, walk(5))
	}
	// 100, 150 | 300, reset → 300+20, 300+30, 300+35, reset → 335+5, 335+8.
	if c := want["cnt.x"]; c.OpenValue != 343 || c.CounterResets != 2 || c.CounterLastRaw != 8 {
		t.Fatalf("cnt.x: open %g, %d resets, last raw %g; want 343, 2, 8", c.OpenValue, c.CounterResets, c.CounterLastRaw)
	}
	if s := want["s.straddle"]; s.Closed != 21 || s.Model == nil || s.Seq != straddle.Seq || s.SeqApplied != 6 || s.OpenValue != walk(21)+1 {
		t.Fatalf("s.straddle: closed %d, model %v, position (%d, %d), open %g; want 21, fitted, (%d, 6), %g",
			s.Closed, s.Model != nil, s.Seq, s.SeqApplied, s.OpenValue, straddle.Seq, walk(21)+1)
	}

	// Restart, then replay single messages, then the whole stream in order.
	r = start(t, url, cfg)
	replays := []struct {
		what string
		msgs []stream.Message
	}{
		{"g.open, value 500 for the open bucket", []stream.Message{open500}},
		{"g.open, value 900 for the open bucket", []stream.Message{open900}},
		{"g.open, a closed bucket", byTopic["g.open"][:1]},
		{"cnt.x, raw 300", []stream.Message{raw300}},
		{"cnt.x, raw 20 (a reset)", []stream.Message{raw20}},
		{"cnt.x, an array with a reset", []stream.Message{resetArray}},
		{"s.straddle, the array", []stream.Message{straddle}},
		{"every message, in order", all},
	}
	r.d.Inspect(context.Background(), func(map[string]*Entry) { // on the loop: t.Error only
		states := func() map[string]*series.Snapshot {
			out := map[string]*series.Snapshot{}
			for topic := range want {
				snap, err := state.Decode(state.Encode(nil, r.d.entryOf(topic).s.Snapshot()))
				if err != nil {
					t.Error(err)
				}
				out[topic] = snap
			}
			return out
		}
		before := states()
		for topic, w := range want {
			if d := snapshotDiff(before[topic], w); d != "" {
				t.Errorf("%s restarted: state differs from the record: %s", topic, d)
			}
		}
		for _, rp := range replays {
			r.d.handleBatch(rp.msgs)
			after := states()
			for topic := range want {
				if d := snapshotDiff(after[topic], before[topic]); d != "" {
					t.Errorf("replay of %s changed %s (want: as before it): %s", rp.what, topic, d)
				}
			}
			before = after
		}
	})
	r.stop(t) // the metrics stay readable
	accepted, rejected := counter(t, r.d.Metrics().Accepted), rejectedTotal(r.d)
	if accepted != 0 || rejected != 0 {
		t.Errorf("replays: %v observations accepted, %v rejected; want none either way", accepted, rejected)
	}
	for topic, w := range want {
		if d := snapshotDiff(load(t, dir, topic), w); d != "" {
			t.Errorf("%s: the replays changed the state: %s", topic, d)
		}
	}

	// Crash during the refit: s.straddle's record is the one saved while
	// its refit ran. Restarted, the refit runs again; the stream
	// redelivers everything from the start.
	st, err := state.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	if err := st.Save([]*series.Snapshot{mid}); err != nil {
		t.Fatal(err)
	}
	if err := st.Close(); err != nil {
		t.Fatal(err)
	}
	r = start(t, url, cfg)
	r.d.Inspect(context.Background(), func(map[string]*Entry) { r.d.handleBatch(byTopic["s.straddle"]) })
	r.stop(t) // applies what waited on the refit
	accepted = counter(t, r.d.Metrics().Accepted)
	if accepted != 2 {
		t.Errorf("after the crash: %v observations accepted, want 2 (the rest of the array)", accepted)
	}
	if d := snapshotDiff(load(t, dir, "s.straddle"), want["s.straddle"]); d != "" {
		t.Errorf("s.straddle restored mid-refit and redelivered: state differs from the uninterrupted run: %s", d)
	}
}

// rejectedTotal sums forewarn_observations_rejected_total over its codes.
func rejectedTotal(d *Daemon) float64 {
	ch := make(chan prometheus.Metric, 64)
	go func() { d.metrics.Rejected.Collect(ch); close(ch) }()
	var sum float64
	for m := range ch {
		var pb dto.Metric
		if err := m.Write(&pb); err == nil {
			sum += pb.GetCounter().GetValue()
		}
	}
	return sum
}

// load reads one record of a stopped daemon's state file.
func load(t *testing.T, dir, topic string) *series.Snapshot {
	t.Helper()
	s, err := state.Open(dir, state.ReadOnly())
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	snap, err := s.Load(topic)
	if err != nil {
		t.Fatal(err)
	}
	return snap
}

// clock is a settable wall clock for Options.Now.
type clock struct {
	mu sync.Mutex
	t  time.Time
}

func (c *clock) now() time.Time {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.t
}

func (c *clock) set(t time.Time) {
	c.mu.Lock()
	c.t = t
	c.mu.Unlock()
}

// With close_after, an open bucket closes after that much wall time
// without data, without waiting for a later bucket's observation
// (CONTRACT.md §2, Intake), and not before. The daemon's clock
// (Options.Now) stands still at the test's start until the test moves it
// past close_after, so the test waits on events, never on the wall clock:
// the flush tick, which checks for idle buckets before it writes, must
// leave the bucket open; the first tick after the clock has moved must
// close it.
func TestCloseAfterClosesIdleBucket(t *testing.T) {
	_, url := streamtest.RunServer(t)
	cfg := testConfig(t.TempDir())
	cfg.Series[0].CloseAfter = time.Hour
	clk := &clock{t: time.Now()} // before any message arrives
	r := start(t, url, cfg, func(o *Options) { o.Now = clk.now })
	defer r.stop(t)
	publishWalk(t, url, "d.four", 0, 3) // buckets 0 and 1 close; bucket 2 stays open
	type view struct {
		closed        uint64
		open, written bool
	}
	look := func() view {
		var v view
		r.d.Inspect(context.Background(), func(map[string]*Entry) {
			if e := r.d.entryOf("d.four"); e != nil {
				sn := e.s.Snapshot()
				v = view{closed: sn.Closed, open: sn.HasOpen, written: !e.dirty}
			}
		})
		return v
	}
	streamtest.Eventually(t, 5*time.Second, "3 observations accepted", func() bool {
		return counter(t, r.d.Metrics().Accepted) == 3
	})
	// The third observation made the series dirty before it was counted:
	// once it is clean again, a tick has run the idle check after it.
	streamtest.Eventually(t, 5*time.Second, "a flush tick after the third observation", func() bool { return look().written })
	if v := look(); v.closed != 2 || !v.open {
		t.Fatalf("before close_after: %d buckets closed, open bucket %v; want 2 closed and bucket 2 open", v.closed, v.open)
	}
	clk.set(time.Now().Add(cfg.Series[0].CloseAfter + time.Minute))
	streamtest.Eventually(t, 5*time.Second, "the idle bucket closed", func() bool { return look().closed == 3 })
	if v := look(); v.open {
		t.Fatal("after close_after: a bucket is still open")
	}
}
