package daemon

import (
	"context"
	"errors"
	"io"
	"log/slog"
	"math/rand/v2"
	"os"
	"runtime"
	"runtime/pprof"
	"strconv"
	"testing"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"
	"github.com/prometheus/client_golang/prometheus"
	dto "github.com/prometheus/client_model/go"

	"forewarn/config"
	"forewarn/state"
	"forewarn/stream/streamtest"
)

// The shape of the end-to-end benchmarks (issue 4 "Benchmark"): 10 000
// series with a fixed, cheap model, 24-step forecasts with two levels.
const (
	rigSeries    = 10_000
	rigHorizon   = 24
	rigMinPoints = 20
	rigStep      = 10 * time.Second
	// rigRefitEvery keeps every refit after the first out of the timed part.
	rigRefitEvery = 1_000_000
	// rigFarThreshold is far above every benchmark level (about 1000 ± a
	// few hundred): the far-from-threshold case of issue 5.
	rigFarThreshold = 1e9
)

// rigOptions shape one rig.
type rigOptions struct {
	series  int  // number of series (topics bench.s00000 …)
	durable bool // JetStream intake instead of core subscriptions
	noSync  bool // state.NoSync(): no fsync per flush
	alert   bool // one rule far from every threshold, matching every series
	window  int  // buckets kept; 0: the config default (2000)
	// flushMax is state.flush_max; 0: the config default (150 000 messages).
	flushMax int
	// step and horizon of every series; zero: rigStep, rigHorizon.
	step    time.Duration
	horizon int
	// loops is intake.loops; 0: the config default (one per core).
	loops int
	// partitions is cluster.partitions (with durable): this one instance
	// owns every partition of the rig's server, through the lease bucket.
	partitions int
	// rule, when set, is the one alert rule, matching every series
	// (instead of alert's far rule).
	rule *config.Alert
}

// stepOf is the rig's bucket width.
func (o rigOptions) stepOf() time.Duration {
	if o.step > 0 {
		return o.step
	}
	return rigStep
}

// horizonOf is the rig's forecast horizon.
func (o rigOptions) horizonOf() int {
	if o.horizon > 0 {
		return o.horizon
	}
	return rigHorizon
}

// rig is an in-process bus, a state store under a temporary directory and
// a running Daemon, with a publisher connection and per-series random
// walks (seeded) that the benchmarks turn into observation messages.
type rig struct {
	tb   testing.TB
	srv  *server.Server
	url  string
	d    *Daemon
	cfg  *config.Config
	pub  *nats.Conn
	opts rigOptions

	subjects []string  // metrics.bench.sNNNNN
	level    []float64 // level per series
	diff     []float64 // last first difference per series
	shock    []float64 // last innovation per series
	rng      *rand.Rand
	t0       int64 // unix seconds of bucket 0 (a multiple of the step)
	next     int64 // first bucket not yet used by any series
}

func newRig(tb testing.TB, o rigOptions) *rig {
	tb.Helper()
	r := newRigConfig(tb, o)
	var sopts []state.Option
	if o.noSync {
		sopts = append(sopts, state.NoSync())
	}
	store, err := state.Open(r.cfg.State.Dir, sopts...)
	if err != nil {
		tb.Fatal(err)
	}
	r.start(streamtest.Connect(tb, r.url), store)
	return r
}

// newRigConfig starts the server and the publisher connection and builds
// the configuration; no store is open and no daemon runs yet.
func newRigConfig(tb testing.TB, o rigOptions) *rig {
	tb.Helper()
	if o.series == 0 {
		o.series = rigSeries
	}
	srv, url := streamtest.RunServer(tb)
	pub := streamtest.Connect(tb, url)

	cfg := config.Default()
	cfg.State.Dir = tb.TempDir()
	cfg.HTTP.Listen = ""
	cfg.Intake.Durable = o.durable
	cfg.Intake.Loops = o.loops
	if o.partitions > 0 {
		cfg.NATS.URL = url
		cfg.Cluster.Partitions = o.partitions
		cfg.Cluster.Instance = "bench"
	}
	if o.flushMax > 0 {
		cfg.State.FlushMax = o.flushMax
	}
	cfg.Limits.MaxSeries = max(cfg.Limits.MaxSeries, o.series)
	cfg.Series = []config.Series{{
		Match: "bench.>", Step: o.stepOf(), Horizon: o.horizonOf(), Window: o.window,
		MinPoints: rigMinPoints, RefitEvery: rigRefitEvery,
		Model: "1,1,1", Transform: "none",
	}}
	if o.alert {
		thr := rigFarThreshold
		cfg.Alerts = []config.Alert{{Name: "far-above", Match: "bench.>", Above: &thr,
			Within: rigHorizon * rigStep, Probability: 0.9}}
	}
	if o.rule != nil {
		cfg.Alerts = []config.Alert{*o.rule}
	}
	cfg = cfg.WithDefaults()
	if err := cfg.Validate(); err != nil {
		tb.Fatal(err)
	}
	r := &rig{tb: tb, srv: srv, url: url, cfg: cfg, pub: pub, opts: o,
		rng: rand.New(rand.NewPCG(20240611, 4))}
	step := int64(o.stepOf() / time.Second)
	// Data time starts 12 h back, well inside limits.max_past, so that
	// a benchmark run never reaches limits.max_future.
	r.t0 = (time.Now().Add(-12*time.Hour).Unix() / step) * step
	r.subjects = make([]string, o.series)
	r.level = make([]float64, o.series)
	r.diff = make([]float64, o.series)
	r.shock = make([]float64, o.series)
	for i := range r.subjects {
		r.subjects[i] = "metrics." + rigTopic(i)
		r.level[i] = 1000 + float64(i%97)
	}
	return r
}

func rigTopic(i int) string {
	s := strconv.Itoa(i)
	for len(s) < 5 {
		s = "0" + s
	}
	return "bench.s" + s
}

// start runs a Daemon on nc and store until the test's cleanup.
func (r *rig) start(nc *nats.Conn, store *state.Store) {
	tb := r.tb
	d, err := New(Options{Config: r.cfg, Conn: nc, Store: store,
		Logger: slog.New(slog.NewTextHandler(io.Discard, nil))})
	if err != nil {
		tb.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- d.Run(ctx) }()
	tb.Cleanup(func() {
		cancel()
		if err := <-done; err != nil && !errors.Is(err, context.Canceled) {
			tb.Errorf("daemon: %v", err)
		}
		store.Close()
	})
	select {
	case <-d.Ready():
	case err := <-done:
		tb.Fatalf("daemon stopped: %v", err)
	case <-time.After(60 * time.Second):
		tb.Fatal("daemon not ready within 60s")
	}
	r.d = d
	// Ready waits until the server has registered the intake's
	// subscriptions (a plain subscription has no replay, so a message
	// published before that would be lost): the server routes the intake
	// subjects already.
	sz, err := r.srv.Subsz(&server.SubszOptions{Subscriptions: true, Test: r.subjects[0]})
	if err != nil || len(sz.Subs) == 0 {
		tb.Fatalf("daemon ready, but the server routes %s nowhere (%v)", r.subjects[0], err)
	}
}

// stepLevel moves series i one step along an ARIMA(1,1,1) path,
//
//	Δx_t = φ·Δx_{t−1} + ε_t + θ·ε_{t−1},  φ = 0.6, θ = 0.3, ε_t ~ N(0, 1),
//
// so that the benchmark's fixed model fits the data it sees.
func (r *rig) stepLevel(i int) float64 {
	e := r.rng.NormFloat64()
	r.diff[i] = 0.6*r.diff[i] + e + 0.3*r.shock[i]
	r.shock[i] = e
	r.level[i] += r.diff[i]
	return r.level[i]
}

// appendObs appends one observation of series i at unix time t (seconds)
// as {"time":T,"value":V}, stepping the series' path.
func (r *rig) appendObs(dst []byte, i int, t int64) []byte {
	return r.appendValue(dst, t, r.stepLevel(i))
}

func (r *rig) appendValue(dst []byte, t int64, v float64) []byte {
	dst = append(dst, `{"time":`...)
	dst = strconv.AppendInt(dst, t, 10)
	dst = append(dst, `,"value":`...)
	dst = strconv.AppendFloat(dst, v, 'f', 3, 64)
	return append(dst, '}')
}

// warm publishes min_points+1 buckets to every series (one JSON array
// each), so that every series makes its first fit, and waits until every
// series has a model and has published its first forecast.
func (r *rig) warm() {
	tb := r.tb
	tb.Helper()
	step := int64(r.opts.stepOf() / time.Second)
	// Every series gets the same warm-up path (offset by its own level),
	// one on which the first fit succeeds: on 20 points of an ARIMA(1,1,1)
	// path, maximum likelihood puts the MA root on the unit circle for
	// about one series in twelve, and such a series would stay warming up
	// until its next refit point, after the timed part.
	path := make([]float64, rigMinPoints+1)
	base0 := r.level[0]
	for k := range path {
		path[k] = r.stepLevel(0) - base0
	}
	r.level[0] = base0
	var buf []byte
	for i, subj := range r.subjects {
		base := r.level[i]
		buf = append(buf[:0], '[')
		for k := int64(0); k <= rigMinPoints; k++ {
			if k > 0 {
				buf = append(buf, ',')
			}
			r.level[i] = base + path[k]
			buf = r.appendValue(buf, r.t0+k*step, r.level[i])
		}
		if i > 0 {
			r.diff[i], r.shock[i] = r.diff[0], r.shock[0]
		}
		buf = append(buf, ']')
		if err := r.pub.Publish(subj, buf); err != nil {
			tb.Fatal(err)
		}
	}
	if err := r.pub.Flush(); err != nil {
		tb.Fatal(err)
	}
	// Bucket rigMinPoints is open in every series.
	r.next = rigMinPoints
	n := float64(len(r.subjects))
	deadline := time.Now().Add(120 * time.Second)
	for counterValue(r.d.metrics.Published) < n {
		if time.Now().After(deadline) {
			m := r.d.metrics
			tb.Fatalf("warm-up not done within 120s: %v of %v series published; accepted %v, rejected %v, refits %v, failed refits %v",
				counterValue(m.Published), n, counterValue(m.Accepted), r.rejected(), counterValue(m.Refits), counterValue(m.RefitFailures))
		}
		time.Sleep(2 * time.Millisecond)
	}
	fitted := 0
	if !r.d.Inspect(context.Background(), func(all map[string]*Entry) {
		for _, e := range all {
			if e.Series().HasModel() {
				fitted++
			}
		}
	}) {
		tb.Fatal("inspect failed")
	}
	if fitted != len(r.subjects) {
		tb.Fatalf("%d of %d series fitted after warm-up", fitted, len(r.subjects))
	}
	if got := counterValue(r.d.metrics.Refits); got != n {
		tb.Fatalf("%v refits after warm-up, want %v", got, n)
	}
	// Everything published so far reaches the server before a benchmark
	// subscribes.
	if err := r.d.opt.Conn.Flush(); err != nil {
		tb.Fatal(err)
	}
	r.quiesce()
}

// profileTag tells the rigs of one benchmark apart in the names of their
// profiles (profileTimed): ".loops" and the rig's number of loops.
func (r *rig) profileTag() string { return ".loops" + strconv.Itoa(r.d.Loops()) }

// quiesce waits until the daemon has stored every change (no series
// dirty, no write in flight) and collects garbage, so that what the
// warm-up left behind (its state write, its garbage) runs neither during
// the raw-rate measurements nor during the timed part.
func (r *rig) quiesce() {
	tb := r.tb
	tb.Helper()
	deadline := time.Now().Add(60 * time.Second)
	for {
		idle := false
		if !r.d.Inspect(context.Background(), func(all map[string]*Entry) {
			idle = true
			for _, l := range r.d.loops {
				idle = idle && !l.flusher.writing && l.refits.busy == 0
			}
			for _, e := range all {
				idle = idle && !e.e.dirty
			}
		}) {
			tb.Fatal("inspect failed")
		}
		if idle {
			break
		}
		if time.Now().After(deadline) {
			tb.Fatal("daemon not idle within 60s after warm-up")
		}
		time.Sleep(20 * time.Millisecond)
	}
	runtime.GC()
}

// batch is a list of pre-encoded messages: subjects[j] with payload
// data[off[j]:off[j+1]].
type batch struct {
	series []int32
	off    []int
	data   []byte
}

func (b *batch) payload(j int) []byte { return b.data[b.off[j]:b.off[j+1]] }

// build encodes n messages round-robin over the series. perBucket
// observations go to one bucket of a series before its next bucket opens
// (1: every message closes a bucket). It continues after the buckets used
// so far.
func (r *rig) build(n, perBucket int) *batch {
	step := int64(r.opts.stepOf() / time.Second)
	ns := len(r.subjects)
	b := &batch{series: make([]int32, n), off: make([]int, n+1)}
	b.data = make([]byte, 0, n*40)
	var last int64
	for j := range n {
		i, c := j%ns, int64(j/ns)
		var t int64
		if perBucket == 1 {
			t = r.t0 + (r.next+1+c)*step
			last = max(last, r.next+1+c)
		} else {
			bk := r.next + 1 + c/int64(perBucket)
			t = r.t0 + bk*step + c%int64(perBucket)
			last = max(last, bk)
		}
		b.series[j] = int32(i)
		b.data = r.appendObs(b.data, i, t)
		b.off[j+1] = len(b.data)
	}
	if n > 0 {
		r.next = last
	}
	return b
}

// send publishes every message of b and flushes. With a durable intake
// it publishes through JetStream and waits for every acknowledgement: a
// core publication beyond the stream's ingest queue (100 000 messages in
// nats-server 2.15) is dropped by the server, so a flood of core
// publications would lose observations before the daemon sees them.
func (r *rig) send(b *batch) {
	if r.opts.durable {
		streamtest.PublishAcked(r.tb, r.pub, len(b.series), func(j int) (string, []byte) {
			return r.subjects[b.series[j]], b.payload(j)
		})
		return
	}
	for j := range b.series {
		if err := r.pub.Publish(r.subjects[b.series[j]], b.payload(j)); err != nil {
			r.tb.Fatal(err)
		}
	}
	if err := r.pub.Flush(); err != nil {
		r.tb.Fatal(err)
	}
}

// rejected sums forewarn_observations_rejected_total over its codes.
func (r *rig) rejected() float64 {
	ch := make(chan prometheus.Metric, 64)
	go func() { r.d.metrics.Rejected.Collect(ch); close(ch) }()
	var sum float64
	for m := range ch {
		var pb dto.Metric
		if err := m.Write(&pb); err == nil {
			sum += pb.GetCounter().GetValue()
		}
	}
	return sum
}

func counterValue(c prometheus.Counter) float64 {
	var pb dto.Metric
	if err := c.Write(&pb); err != nil {
		panic(err)
	}
	return pb.GetCounter().GetValue()
}

// heapInUse returns the heap bytes in use after two collections.
func heapInUse() uint64 {
	runtime.GC()
	runtime.GC()
	var ms runtime.MemStats
	runtime.ReadMemStats(&ms)
	return ms.HeapAlloc
}

// waitUntil polls cond every 200 µs and returns the time at which it first
// held, failing tb after timeout.
func waitUntil(tb testing.TB, timeout time.Duration, what string, cond func() bool) time.Time {
	tb.Helper()
	deadline := time.Now().Add(timeout)
	for !cond() {
		if time.Now().After(deadline) {
			tb.Fatalf("not within %s: %s", timeout, what)
		}
		time.Sleep(200 * time.Microsecond)
	}
	return time.Now()
}

// profileTimed starts a CPU profile of the timed part of a benchmark when
// FOREWARN_BENCH_CPUPROFILE names a file (the -cpuprofile flag would
// also profile the warm-up's 10 000 fits), with tag appended to the name;
// the returned function stops it.
func profileTimed(tb testing.TB, tag string) func() {
	path := os.Getenv("FOREWARN_BENCH_CPUPROFILE")
	if path == "" {
		return func() {}
	}
	path += tag
	f, err := os.Create(path)
	if err != nil {
		tb.Fatal(err)
	}
	if err := pprof.StartCPUProfile(f); err != nil {
		tb.Fatal(err)
	}
	return func() {
		pprof.StopCPUProfile()
		f.Close()
	}
}
