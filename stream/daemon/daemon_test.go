package daemon

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"math"
	"os"
	"path/filepath"
	"testing"
	"time"

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

func start(t *testing.T, url string, cfg *config.Config) *runningDaemon {
	t.Helper()
	store, err := state.Open(cfg.State.Dir)
	if err != nil {
		t.Fatal(err)
	}
	nc := streamtest.Connect(t, url)
	d, err := New(Options{Config: cfg, Conn: nc, Store: store,
		Logger: slog.New(slog.NewTextHandler(os.Stderr, &slog.HandlerOptions{Level: slog.LevelError}))})
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

// A message delivered again after a restart has no effect: the state
// records the stream position it reflects.
func TestRedeliveryHasNoEffect(t *testing.T) {
	_, url := streamtest.RunServer(t)
	dir := t.TempDir()
	cfg := testConfig(dir)
	r := start(t, url, cfg)
	publishWalk(t, url, "c.three", 0, 30)
	streamtest.Eventually(t, 10*time.Second, "30 observations accepted", func() bool {
		return counter(t, r.d.Metrics().Accepted) == 30
	})
	r.stop(t)
	before := load(t, dir, "c.three")

	// Hand the daemon the same stored messages again, as a redelivery
	// would: handle them directly with their stream positions.
	r = start(t, url, cfg)
	var replay []stream.Message
	for i := range 30 {
		v := 1000 + 3*float64(i) + 5*math.Sin(float64(i)*0.7)
		replay = append(replay, stream.Message{Subject: "metrics.c.three", Seq: uint64(i + 1), Received: time.Now(),
			Data: fmt.Appendf(nil, `{"time": %d, "value": %g}`, 1_700_000_000+60*i, v)})
	}
	r.d.Inspect(context.Background(), func(map[string]*Entry) { r.d.handleBatch(replay) })
	r.stop(t)
	after := load(t, dir, "c.three")
	if after.Closed != before.Closed || after.Seq != before.Seq || after.SeqApplied != before.SeqApplied ||
		len(after.Window) != len(before.Window) || after.OpenValue != before.OpenValue {
		t.Fatalf("replayed messages changed the state: closed %d→%d seq %d→%d window %d→%d",
			before.Closed, after.Closed, before.Seq, after.Seq, len(before.Window), len(after.Window))
	}
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

// With close_after, an open bucket closes after that much wall time
// without data, without waiting for a later bucket's observation.
func TestCloseAfterClosesIdleBucket(t *testing.T) {
	_, url := streamtest.RunServer(t)
	cfg := testConfig(t.TempDir())
	cfg.Series[0].CloseAfter = 150 * time.Millisecond
	r := start(t, url, cfg)
	defer r.stop(t)
	publishWalk(t, url, "d.four", 0, 3) // buckets 0 and 1 close; bucket 2 stays open
	closed := func() uint64 {
		var n uint64
		r.d.Inspect(context.Background(), func(all map[string]*Entry) {
			if e := all["d.four"]; e != nil {
				n = e.Series().Snapshot().Closed
			}
		})
		return n
	}
	streamtest.Eventually(t, 5*time.Second, "3 observations accepted", func() bool {
		return counter(t, r.d.Metrics().Accepted) == 3
	})
	if n := closed(); n > 3 {
		t.Fatalf("closed %d buckets from 3 observations", n)
	}
	streamtest.Eventually(t, 5*time.Second, "the idle bucket closed", func() bool { return closed() == 3 })
}
