package daemon

// Tests of the alert pool (issue 14 "Off the loop"): evaluations that need
// a simulation run on the alert workers while their series is held, like
// a refit. The data are seeded simulations with known truth (property
// tests): random walks that climb through a threshold and fall back.

import (
	"context"
	"fmt"
	"math/rand/v2"
	"reflect"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats.go/jetstream"

	"forewarn/config"
	"forewarn/engine/alert"
	"forewarn/engine/arima"
	"forewarn/engine/series"
	"forewarn/state"
	"forewarn/stream"
	"forewarn/stream/streamtest"
)

// poolConfig is testConfig with a horizon of 30 one-minute steps and the
// rule "near": above threshold within 20 minutes with probability 0.9.
func poolConfig(dir string, threshold float64, refitEvery int) *config.Config {
	c := testConfig(dir)
	c.Series[0].Horizon = 30
	c.Series[0].RefitEvery = refitEvery
	c.Alerts = []config.Alert{{Name: "near", Match: ">", Above: &threshold, Within: 20 * time.Minute, Probability: 0.9}}
	return c.WithDefaults()
}

// upAndDown is a random walk (seeded by seed, N(0,1) steps) from 1000 with
// drift +0.4 for n buckets and −0.4 for n more: it climbs through 1015
// and falls back below it.
func upAndDown(seed uint64, n int) []float64 {
	rng := rand.New(rand.NewPCG(seed, 14))
	v := make([]float64, 2*n)
	x := 1000.0
	for i := range v {
		d := 0.4
		if i >= n {
			d = -0.4
		}
		x += d + rng.NormFloat64()
		v[i] = x
	}
	return v
}

// Per series, the alerts the daemon publishes with its evaluations on the
// alert workers (and its refits on the refit pool) are exactly, in order
// and bit for bit, those of the same data run through the series on one
// goroutine (series.EvaluateAlerts after every published forecast): the
// scheduling changes nothing.
func TestAlertsFromPoolMatchOneGoroutine(t *testing.T) {
	_, url := streamtest.RunServer(t)
	const nSeries, n = 12, 60
	cfg := poolConfig(t.TempDir(), 1015, 30)
	var mu sync.Mutex
	got := map[string][]series.AlertEvent{}
	r := start(t, url, cfg, func(o *Options) {
		o.OnAlert = func(e *series.AlertEvent) {
			mu.Lock()
			got[e.Topic] = append(got[e.Topic], *e)
			mu.Unlock()
		}
	})
	values := make([][]float64, nSeries)
	for i := range values {
		values[i] = upAndDown(uint64(i), n)
	}
	topic := func(i int) string { return fmt.Sprintf("pool.s%02d", i) }
	total := nSeries * 2 * n
	streamtest.PublishAcked(t, streamtest.Connect(t, url), total, func(j int) (string, []byte) {
		i, b := j%nSeries, j/nSeries // round robin over the series
		return "metrics." + topic(i), fmt.Appendf(nil, `{"time": %d, "value": %v}`, 60*(bucket0+int64(b)), values[i][b])
	})
	m := r.d.metrics
	streamtest.Eventually(t, 120*time.Second, "every observation applied and every evaluation back", func() bool {
		return counterValue(m.Accepted) == float64(total) && gaugeValue(m.AlertsQueued) == 0 && gaugeValue(m.Pending) == 0
	})
	r.stop(t)
	_, pooled := histogramSum(m.AlertQueueSeconds)
	simulated := counterValue(m.AlertEvaluations[alert.MethodSimulation])
	if pooled == 0 || simulated == 0 {
		t.Fatalf("%d evaluations went through the pool, %v simulated: the test needs both", pooled, simulated)
	}

	sc, _ := cfg.SeriesFor(topic(0))
	ev, err := alert.NewEvaluator(sc.Horizon, 0)
	if err != nil {
		t.Fatal(err)
	}
	var ps arima.PathSystem
	events := 0
	for i := range nSeries {
		s, err := series.New(topic(i), settingsOf(sc, ""))
		if err != nil {
			t.Fatal(err)
		}
		rules := r.d.rulesFor(topic(i), sc)
		var want []series.AlertEvent
		for b, v := range values[i] {
			out, err := s.Observe(60*(bucket0+int64(b))*int64(time.Second), v)
			if err != nil {
				t.Fatal(err)
			}
			if out == series.NeedFit {
				out, _ = s.Install(s.FitJob().Run())
			}
			if out == series.Published {
				if want, err = s.EvaluateAlerts(want, rules, ev, &ps); err != nil {
					t.Fatal(err)
				}
			}
		}
		if !reflect.DeepEqual(got[topic(i)], want) {
			t.Errorf("%s: the daemon published\n%+v\nwant\n%+v", topic(i), got[topic(i)], want)
		}
		events += len(want)
	}
	if events < nSeries {
		t.Fatalf("%d alert events over %d series: the data should raise and clear most rules", events, nSeries)
	}
	t.Logf("%d events; %d evaluations through the pool, %v simulated, %v late",
		events, pooled, simulated, counterValue(m.AlertsLate))
}

// While a series' alert evaluation is away on the pool, its record is not
// written (it would say the close is applied, and a restart would skip the
// close and so the evaluation), and the flush acknowledges nothing that
// series applied since its last record; its next observations wait. Once
// the answer is back, the record, the acknowledgement and the held
// observations follow. The loop is held inside Inspect, so the job cannot
// reach a worker before the flush.
func TestAlertInFlightHoldsRecordAndAck(t *testing.T) {
	_, url := streamtest.RunServer(t)
	dir := t.TempDir()
	cfg := poolConfig(dir, 1015, 1_000_000)
	r := start(t, url, cfg)
	// A climb (upAndDown) fitted at bucket 20; its first close whose
	// probability of passing 1015 within 20 minutes needs a simulation
	// queues an evaluation (checked below).
	var seq uint64
	var msgs []stream.Message
	for b, v := range upAndDown(3, 30) {
		seq++
		msgs = append(msgs, intakeMsg("hold.a", seq, at{b: int64(b), v: v}))
	}
	// The first fit (at the 20th closed bucket) runs on the refit pool.
	r.d.Inspect(context.Background(), func(map[string]*Entry) { r.d.handleBatch(msgs[:21]) })
	streamtest.Eventually(t, 30*time.Second, "the first fit", func() bool {
		fitted := false
		r.d.Inspect(context.Background(), func(all map[string]*Entry) {
			e := all["hold.a"]
			fitted = e != nil && !e.e.held() && e.Series().HasModel()
		})
		return fitted
	})
	var stored, held *series.Snapshot
	var floor, closing uint64
	var queued, pending int
	r.d.Inspect(context.Background(), func(map[string]*Entry) {
		// Apply up to the close that queues an evaluation, then two more.
		for i := 21; i < len(msgs)-2; i++ {
			r.d.handleBatch(msgs[i : i+1])
			if e := r.d.entryOf("hold.a"); e != nil && e.alerting && closing == 0 {
				closing = msgs[i].Seq
				seq++
				b := int64(i) + 1 // two more buckets, each the last value again
				last := upAndDown(3, 30)[i]
				more := []stream.Message{intakeMsg("hold.a", seq, at{b: b, v: last}), intakeMsg("hold.a", seq+1, at{b: b + 1, v: last})}
				seq++
				r.d.handleBatch(more)
				break
			}
		}
		e := r.d.entryOf("hold.a")
		if e == nil || !e.alerting {
			t.Error("no evaluation went to the pool")
			return
		}
		queued, pending = len(r.d.loopFor("hold.a").alerts.queue), len(e.pending)
		h := *e.s.Snapshot() // Snapshot is the live record
		held = &h
		l := r.d.loopFor("hold.a")
		l.flush()
		l.finishFlush()
		floor = l.flusher.floor
		st, err := r.store.Load("hold.a")
		if err == nil {
			stored = st
		}
	})
	if t.Failed() {
		r.stop(t)
		return
	}
	if queued != 1 || pending != 2 {
		t.Errorf("queued evaluations %d, held observations %d; want 1 and 2", queued, pending)
	}
	if stored != nil && stored.Seq >= closing {
		t.Errorf("record written with position %d while the evaluation of the close at %d was away", stored.Seq, closing)
	}
	if held.Seq != closing {
		t.Errorf("series at position %d, want the closing message %d", held.Seq, closing)
	}
	var storedSeq uint64
	if stored != nil {
		storedSeq = stored.Seq
	}
	if floor > storedSeq {
		t.Errorf("flush acknowledged up to %d; the series' stored record is at %d", floor, storedSeq)
	}
	m := r.d.metrics
	streamtest.Eventually(t, 30*time.Second, "the evaluation back and the held observations applied", func() bool {
		return gaugeValue(m.AlertsQueued) == 0 && gaugeValue(m.Pending) == 0
	})
	r.stop(t)
	if s := load(t, dir, "hold.a"); s.Seq != seq || len(s.Alerts) != 1 {
		t.Errorf("after the stop: record at %d with %d alert states, want %d and 1", s.Seq, len(s.Alerts), seq)
	}
	if l := counterValue(m.AlertsLate); l < 1 {
		t.Errorf("%v late answers, want at least 1 (two observations waited for the first)", l)
	}
}

// SIGTERM (the context's end) with a backlog of near-threshold work: 200
// random walks near the threshold of a 2-hour rule (120 steps), 300
// buckets each, published before the daemon can keep up, so that most
// observations wait behind evaluations. Run returns within 5 s (the
// acceptance bound, measured), and every observation the stream counts
// as acknowledged is in the state file (the records' positions).
func TestShutdownWithAlertBacklog(t *testing.T) {
	_, url := streamtest.RunServer(t)
	const nSeries, n = 200, 300
	dir := t.TempDir()
	cfg := testConfig(dir)
	cfg.Series[0].Horizon = 180
	cfg.Series[0].Window = 400
	cfg.Series[0].RefitEvery = 1_000_000
	thr := 1011.0 // about one 120-step sd (√120 ≈ 11) above the start
	cfg.Alerts = []config.Alert{{Name: "near", Match: ">", Above: &thr, Within: 2 * time.Hour, Probability: 0.9}}
	cfg = cfg.WithDefaults()
	r := start(t, url, cfg)
	values := make([][]float64, nSeries)
	for i := range values {
		rng := rand.New(rand.NewPCG(uint64(i), 7))
		x, v := 1000.0, make([]float64, n)
		for b := range v {
			x += rng.NormFloat64()
			v[b] = x
		}
		values[i] = v
	}
	topic := func(i int) string { return fmt.Sprintf("full.v%03d", i) }
	total := nSeries * n
	nc := streamtest.Connect(t, url)
	// In chunks: on a loaded machine one flood of asynchronous
	// publications can stall past the client's limit.
	const chunk = 4000
	for lo := 0; lo < total; lo += chunk {
		streamtest.PublishAcked(t, nc, min(chunk, total-lo), func(j int) (string, []byte) {
			i, b := (lo+j)%nSeries, (lo+j)/nSeries
			return "metrics." + topic(i), fmt.Appendf(nil, `{"time": %d, "value": %v}`, 60*(bucket0+int64(b)), values[i][b])
		})
	}
	m := r.d.metrics
	streamtest.Eventually(t, 120*time.Second, "a backlog: evaluations queued and observations held behind them", func() bool {
		return gaugeValue(m.AlertsQueued) >= nSeries/2 && gaugeValue(m.Pending) >= float64(total)/4
	})
	queued, held := gaugeValue(m.AlertsQueued), gaugeValue(m.Pending)
	t0 := time.Now()
	r.cancel()
	if err := <-r.done; err != nil {
		t.Fatalf("daemon run: %v", err)
	}
	stop := time.Since(t0)
	if err := r.store.Close(); err != nil {
		t.Fatal(err)
	}
	t.Logf("stopped in %v with %v evaluations queued and %v observations held; %v simulated evaluations, %v late",
		stop.Round(time.Millisecond), queued, held, counterValue(m.AlertEvaluations[alert.MethodSimulation]), counterValue(m.AlertsLate))
	if stop > 5*time.Second && !raceEnabled {
		t.Errorf("stop took %v, want at most 5 s (issue 14)", stop)
	}

	js, err := jetstream.New(nc)
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	str, err := js.Stream(ctx, cfg.Intake.Stream)
	if err != nil {
		t.Fatal(err)
	}
	si, err := str.Info(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if si.State.LastSeq != uint64(total) {
		t.Fatalf("stream holds up to %d, want %d (message j at position j+1)", si.State.LastSeq, total)
	}
	con, err := str.Consumer(ctx, cfg.Intake.Consumer)
	if err != nil {
		t.Fatal(err)
	}
	ci, err := con.Info(ctx)
	if err != nil {
		t.Fatal(err)
	}
	acked := ci.AckFloor.Stream
	st, err := state.Open(dir, state.ReadOnly())
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	for i := range nSeries {
		// Message j = b·nSeries + i is at position j+1.
		var last uint64
		for b := range n {
			if p := uint64(b*nSeries + i + 1); p <= acked {
				last = p
			}
		}
		if last == 0 {
			continue
		}
		rec, err := st.Load(topic(i))
		if err != nil {
			t.Fatalf("%s: acknowledged up to %d but no record: %v", topic(i), last, err)
		}
		if rec.Seq < last {
			t.Errorf("%s: acknowledged up to position %d, record at %d", topic(i), last, rec.Seq)
		}
	}
	if acked >= uint64(total) {
		t.Errorf("everything acknowledged (%d): the held observations were not held", acked)
	}
	t.Logf("acknowledged up to %d of %d", acked, total)
}
