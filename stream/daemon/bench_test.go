package daemon

// End-to-end benchmarks of the daemon (issue 4 "Benchmark", issue 5
// "Benchmark"). Each one runs an in-process NATS server, a state store
// under a temporary directory and a Daemon with 10 000 series of a fixed
// ARIMA(1,1,1) model (transform none, 24-step forecasts at levels 80 and
// 95), pre-warmed before the timer starts: min_points+1 buckets are
// published to every series, and the benchmark waits until every series
// has fitted and published. refit_every is large, so no refit runs in the
// timed part. One benchmark operation is one observation message.
//
// Rates are set against two raw NATS publish→subscribe rates for messages
// of the same size, both measured on the same server in the same run,
// after the warm-up's state write and a garbage collection, each the
// median of three runs:
//
//   - raw_msgs/s (pct_raw): the same traffic without the daemon, from
//     streamtest.RawFanInRate: as many messages, round-robin over 10 000
//     subjects of the same length as the benchmark's, to one wildcard
//     subscription, as the daemon's intake (or the forecast subscriber)
//     gets them. This is the baseline of the targets.
//   - raw1_msgs/s (pct_raw1): the same size on a single subject
//     (streamtest.RawPubSubRate), the server's best case: its match cache
//     holds about a thousand subjects, and 10 000 in turn miss it every
//     time, which alone makes the fan-in rate a third to a half of the
//     single-subject one for small messages on this machine.
//
// Each setup takes some seconds (10 000 first fits), so run with a fixed
// count, for instance
//
//	go test ./stream/daemon -run '^$' -bench . -benchtime 200000x
//
// The state store fsyncs at every flush (the default); the flush policy is
// the config default (every second or every 150 000 messages).

import (
	"context"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"sync/atomic"
	"syscall"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"forewarn/engine/alert"
	"forewarn/engine/series"
	"forewarn/state"
	"forewarn/stream"
	"forewarn/stream/streamtest"
)

// BenchmarkIntakeBound: 10 observations per bucket, so one message in ten
// closes a bucket and publishes a forecast. Reported: obs/s, the rate at
// which the daemon applied the observations (from the first publication
// until forewarn_observations_accepted_total counts them all), and its
// ratios in percent to the raw core-NATS rates for messages of the
// observations' size (see the top of this file): pct_raw (target ≥ 50 for
// plain intake) and pct_raw1. The durable case runs the JetStream intake
// against the same core-NATS raw rates, and also against the same traffic
// through JetStream without the daemon (streamtest.RawDurableRate: a file
// stream, a durable AckAll consumer, a publisher waiting for its
// acknowledgements): rawjs_msgs/s and pct_rawjs. The plain_flush_1s case sets
// state.flush_max to its highest value, so that the state is written
// about once a second whatever the rate (instead of every 150 000
// messages): the difference is what the extra writes cost when 10 000
// series take turns, every one of them dirty at every write.
//
// The plain_full_window case starts every series from a stored record
// with a full 2000-bucket window (as a daemon finds them after running for
// a while), instead of the warm-up's 21 buckets: each flush then rewrites
// records of about 16 KB, and each close shifts a full window.
func BenchmarkIntakeBound(b *testing.B) {
	for _, c := range []struct {
		name string
		o    rigOptions
		full bool // start from full windows (newRigFull) instead of warm
	}{
		{"plain", rigOptions{}, false},
		{"durable", rigOptions{durable: true}, false},
		{"plain_flush_1s", rigOptions{flushMax: 1_000_000}, false},
		{"plain_full_window", rigOptions{window: fullWindow}, true},
	} {
		b.Run(c.name, func(b *testing.B) {
			ir := runIntakeBound(b, c.o, c.full)
			b.ReportMetric(ir.rate, "obs/s")
			ir.report(b, "")
		})
	}
}

// intakeRun is one intake-bound measurement, with the raw rates measured
// on the same server just before it.
type intakeRun struct {
	rate, raw, raw1, rawJS float64
	// rawDrain and rawDrainParts: the raw backlog-drain rates
	// (streamtest.RawDrainRate) with one consumer and with one per
	// partition; 0 when not measured.
	rawDrain, rawDrainParts float64
}

// report reports the raw rates and the rate's ratios to them, the names
// prefixed with prefix.
func (ir intakeRun) report(b *testing.B, prefix string) {
	for _, m := range []struct {
		raw       float64
		rate, pct string
	}{
		{ir.raw, "raw_msgs/s", "pct_raw"},
		{ir.raw1, "raw1_msgs/s", "pct_raw1"},
		{ir.rawJS, "rawjs_msgs/s", "pct_rawjs"},
		{ir.rawDrain, "rawdrain_msgs/s", "pct_rawdrain"},
		{ir.rawDrainParts, "rawdrainp_msgs/s", "pct_rawdrainp"},
	} {
		if m.raw > 0 {
			b.ReportMetric(m.raw, prefix+m.rate)
			b.ReportMetric(100*ir.rate/m.raw, prefix+m.pct)
		}
	}
}

// runIntakeBound sends b.N messages, ten per bucket, on a fresh rig and
// times them until every observation is applied (BenchmarkIntakeBound).
func runIntakeBound(b *testing.B, o rigOptions, full bool) intakeRun {
	b.StopTimer()
	r := newIntakeRig(b, o, full)
	ir := r.rawIntake(b.N)
	ir.rate, _ = r.timedIntake(b.N)
	return ir
}

func newIntakeRig(b *testing.B, o rigOptions, full bool) *rig {
	if full {
		return newRigFull(b, o)
	}
	r := newRig(b, o)
	r.warm()
	return r
}

// rawIntake measures the raw rates for n messages of the size of the
// intake-bound benchmark's on the rig's server.
func (r *rig) rawIntake(n int) intakeRun {
	b := r.tb.(*testing.B)
	size := len(r.appendObs(nil, 0, r.t0+r.next*int64(r.opts.stepOf()/time.Second)))
	twins, filter := rawTwins(r.subjects)
	var ir intakeRun
	ir.raw = medianOf3(func() float64 { return streamtest.RawFanInRate(b, r.url, twins, filter, size, max(n, 100_000)) })
	ir.raw1 = medianOf3(func() float64 { return streamtest.RawPubSubRate(b, r.url, size, max(n, 100_000)) })
	if r.opts.durable {
		ir.rawJS = medianOf3(func() float64 {
			return streamtest.RawDurableRate(b, r.url, twins, filter, size, max(n, 100_000))
		})
	}
	return ir
}

// timedIntake sends n messages, ten per bucket, with the benchmark timer
// running, until every observation is applied, checks that every one was
// accepted and every closed bucket published, and returns the rate and
// the cores the process used meanwhile (its CPU time, user and system,
// over the wall time; the in-process server and publisher included).
func (r *rig) timedIntake(n int) (rate, cores float64) {
	return r.timed(n, false)
}

// timedDrain is timedIntake for a backlog (BenchmarkBacklogDrainLoops):
// the intake's consumers are paused while the n messages are published
// (untimed), and the timer runs from their resumption until every
// observation is applied. Durable rigs only.
func (r *rig) timedDrain(n int) (rate, cores float64) {
	return r.timed(n, true)
}

func (r *rig) timed(n int, backlog bool) (rate, cores float64) {
	b := r.tb.(*testing.B)
	msgs := r.build(n, 10)
	acc0, pub0, rej0 := counterValue(r.d.metrics.Accepted), counterValue(r.d.metrics.Published), r.rejected()
	want := acc0 + float64(n)
	timedSend := func() { r.send(msgs) }
	if backlog {
		names := r.pauseIntake()
		r.send(msgs)
		if got := counterValue(r.d.metrics.Accepted); got != acc0 {
			b.Fatalf("%v observations applied while the intake was paused", got-acc0)
		}
		runtime.GC() // the publication's garbage is not the daemon's to collect
		r.resumeIntake(names)
		timedSend = func() {}
	} else {
		runtime.GC() // the raw runs' garbage is not the daemon's to collect
	}

	b.StartTimer()
	stopProfile := profileTimed(b, r.profileTag())
	cpu0 := processCPU()
	start := time.Now()
	timedSend()
	end := waitUntil(b, 120*time.Second, "every observation applied", func() bool {
		return counterValue(r.d.metrics.Accepted) >= want
	})
	cpu := processCPU() - cpu0
	b.StopTimer()
	stopProfile()
	r.checkTimed(n, want, pub0, rej0)
	wall := end.Sub(start).Seconds()
	return float64(n) / wall, cpu.Seconds() / wall
}

// checkTimed checks, after a timed part of n messages, that every
// observation was accepted (want in all), none rejected, and every closed
// bucket published, then waits until the state is quiet.
func (r *rig) checkTimed(n int, want, pub0, rej0 float64) {
	b := r.tb
	if got := counterValue(r.d.metrics.Accepted); got != want {
		b.Fatalf("accepted %v, want %v", got, want)
	}
	if got := r.rejected(); got != rej0 {
		b.Fatalf("%v observations rejected", got-rej0)
	}
	// Bucket closes: every series' buckets before its last one (the rig's
	// series each start a batch with a bucket that the batch opens).
	closes := closesOf(n, len(r.subjects), 10)
	waitUntil(b, 30*time.Second, "forecasts of every closed bucket", func() bool {
		return counterValue(r.d.metrics.Published) >= pub0+float64(closes)
	})
	if got := counterValue(r.d.metrics.Published) - pub0; got != float64(closes) {
		b.Fatalf("published %v forecasts, want %d", got, closes)
	}
	r.quiesce()
}

// pauseIntake pauses every consumer of the intake stream (the durable
// consumer, or the partitions' consumers) and returns their names: the
// server delivers nothing from them until resumeIntake.
func (r *rig) pauseIntake() []string {
	tb := r.tb
	ctx := context.Background()
	js, err := jetstream.New(r.pub)
	if err != nil {
		tb.Fatal(err)
	}
	st, err := js.Stream(ctx, r.cfg.Intake.Stream)
	if err != nil {
		tb.Fatal(err)
	}
	var names []string
	lister := st.ConsumerNames(ctx)
	for name := range lister.Name() {
		names = append(names, name)
	}
	if err := lister.Err(); err != nil || len(names) == 0 {
		tb.Fatalf("intake consumers %v: %v", names, err)
	}
	for _, name := range names {
		if _, err := st.PauseConsumer(ctx, name, time.Now().Add(time.Hour)); err != nil {
			tb.Fatalf("pause %s: %v", name, err)
		}
	}
	return names
}

// resumeIntake ends the pause of the consumers pauseIntake paused and
// returns when the server resumes them. A pause ended by a request
// (ResumeConsumer) does not wake a consumer that has requests waiting
// (nats-server 2.15: it waits for the next message or pull request); one
// that runs out does. So each pause is set to end at one moment, shortly
// ahead, and resumeIntake returns at that moment.
func (r *rig) resumeIntake(names []string) {
	tb := r.tb
	ctx := context.Background()
	js, err := jetstream.New(r.pub)
	if err != nil {
		tb.Fatal(err)
	}
	at := time.Now().Add(200 * time.Millisecond)
	for _, name := range names {
		if _, err := js.PauseConsumer(ctx, r.cfg.Intake.Stream, name, at); err != nil {
			tb.Fatalf("resume %s: %v", name, err)
		}
	}
	if time.Now().After(at) {
		tb.Fatal("pauses not set before they ended")
	}
	time.Sleep(time.Until(at))
}

// processCPU is the process's CPU time so far, user and system.
func processCPU() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		panic(err)
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// loopRounds is how many times BenchmarkIntakeBoundLoops times each rig,
// alternating: on a machine shared with other work single runs swing by a
// factor of two, and alternation exposes both rigs to the same swings.
const loopRounds = 5

// BenchmarkIntakeBoundLoops (issue 15, "One machine, several loops"):
// BenchmarkIntakeBound's traffic through a daemon with one loop and one
// with intake.loops = GOMAXPROCS (at least 2) loops, which split the
// series by internal partition (route.go). Both rigs run side by side,
// each on its own server; the raw rates are measured on each server first
// (see the top of this file), then each rig is timed loopRounds times,
// alternating, b.N messages each time. Reported: the median obs/s of each
// (loop1_obs/s, loops_obs/s), the ratio of the medians (ratio; target
// ≥ 1.3 on a 2-core machine), each rate's ratios to the raw rates, and the
// median cores the process used while timed (loop1_cores, loops_cores:
// CPU time over wall time; on a machine shared with other work they show
// whether a second core was there to use). The
// durable case does the same through the JetStream intake, whose one
// consumer the loops acknowledge together (ackJoin). The partitioned case
// runs cluster mode with cluster.partitions 8 on the rig's one server, the
// instance owning all eight (lease bucket, one consumer per partition):
// there the loops own the stream's partitions, and each acknowledges its
// own consumers (PartMarker). Run it with a fixed count, for instance
//
//	go test ./stream/daemon -run '^$' -bench IntakeBoundLoops -benchtime 400000x
func BenchmarkIntakeBoundLoops(b *testing.B) {
	for _, c := range []struct {
		name string
		o    rigOptions
	}{
		{"plain", rigOptions{}},
		{"durable", rigOptions{durable: true}},
		{"partitioned", rigOptions{durable: true, partitions: 8}},
	} {
		b.Run(c.name, func(b *testing.B) { loopsBench(b, c.o, false, false) })
	}
}

// loopsBench runs one case of BenchmarkIntakeBoundLoops (drain false) or
// BenchmarkBacklogDrainLoops (drain true).
// With full, every series starts from a full window (newRigFull).
func loopsBench(b *testing.B, o rigOptions, drain, full bool) {
	b.StopTimer()
	n := max(2, runtime.GOMAXPROCS(0))
	one, many := o, o
	one.loops, many.loops = 1, n
	r1, rn := newIntakeRig(b, one, full), newIntakeRig(b, many, full)
	if r1.d.Loops() != 1 || rn.d.Loops() != n {
		b.Fatalf("loops %d and %d, want 1 and %d", r1.d.Loops(), rn.d.Loops(), n)
	}
	raw, timed := (*rig).rawIntake, (*rig).timedIntake
	if drain {
		raw, timed = (*rig).rawDrain, (*rig).timedDrain
	}
	i1, in := raw(r1, b.N), raw(rn, b.N)
	var rates1, ratesN, cores1, coresN []float64
	for range loopRounds {
		rate, cores := timed(r1, b.N)
		rates1, cores1 = append(rates1, rate), append(cores1, cores)
		rate, cores = timed(rn, b.N)
		ratesN, coresN = append(ratesN, rate), append(coresN, cores)
	}
	b.Logf("obs/s, 1 loop: %.0f (cores %.2f); %d loops: %.0f (cores %.2f)", rates1, cores1, n, ratesN, coresN)
	median := func(x []float64) float64 {
		x = slices.Clone(x)
		slices.Sort(x)
		return x[len(x)/2]
	}
	i1.rate, in.rate = median(rates1), median(ratesN)
	b.ReportMetric(median(cores1), "loop1_cores")
	b.ReportMetric(median(coresN), "loops_cores")
	b.ReportMetric(i1.rate, "loop1_obs/s")
	b.ReportMetric(in.rate, "loops_obs/s")
	b.ReportMetric(float64(n), "loops")
	b.ReportMetric(in.rate/i1.rate, "ratio")
	i1.report(b, "loop1_")
	in.report(b, "loops_")
	b.ReportMetric(0, "ns/op")
}

// BenchmarkBacklogDrainLoops (issue 15, "One machine, several loops"):
// BenchmarkIntakeBoundLoops for a backlog, the case of a restart's
// catch-up or a handover's replay, where the daemon's consumption and not
// a live publisher sets the pace. Each round pauses the intake's
// consumers, publishes b.N messages (ten per bucket) with JetStream
// acknowledgements, untimed, then times from the consumers' resumption
// until every observation is applied (timedDrain). The raw rates are
// streamtest.RawDrainRate's on each rig's server: the same backlog
// drained without the daemon by one consumer (rawdrain_msgs/s,
// pct_rawdrain) and, for the partitioned case, by one consumer per
// partition (rawdrainp_msgs/s, pct_rawdrainp). Run it with a fixed count,
// for instance
//
//	go test ./stream/daemon -run '^$' -bench BacklogDrainLoops -benchtime 400000x
func BenchmarkBacklogDrainLoops(b *testing.B) {
	for _, c := range []struct {
		name string
		o    rigOptions
		full bool
	}{
		{"durable", rigOptions{durable: true}, false},
		{"partitioned", rigOptions{durable: true, partitions: 8}, false},
		{"durable_full_window", rigOptions{durable: true, window: fullWindow}, true},
	} {
		b.Run(c.name, func(b *testing.B) { loopsBench(b, c.o, true, c.full) })
	}
}

// rawDrain measures the raw backlog-drain rates for n messages of the
// size of the intake-bound benchmark's on the rig's server.
func (r *rig) rawDrain(n int) intakeRun {
	b := r.tb.(*testing.B)
	size := len(r.appendObs(nil, 0, r.t0+r.next*int64(r.opts.stepOf()/time.Second)))
	twins, filter := rawTwins(r.subjects)
	n = max(n, 100_000)
	var ir intakeRun
	ir.rawDrain = medianOf3(func() float64 { return streamtest.RawDrainRate(b, r.url, twins, filter, size, n, 0) })
	if r.opts.partitions > 0 {
		ir.rawDrainParts = medianOf3(func() float64 {
			return streamtest.RawDrainRate(b, r.url, twins, filter, size, n, r.opts.partitions)
		})
	}
	return ir
}

// closesOf counts the bucket closes that n messages sent round-robin over
// ns series, perBucket per bucket, cause when each series starts with an
// open bucket of its own.
func closesOf(n, ns, perBucket int) int {
	total := 0
	for i := range min(n, ns) {
		m := (n - i + ns - 1) / ns // messages to series i
		total += (m + perBucket - 1) / perBucket
	}
	return total
}

// outputRun is one output-bound measurement.
type outputRun struct {
	rate, raw, raw1 float64
	size            int
}

// runOutputBound sends b.N messages that each close a bucket, and counts
// the forecasts on a subscriber of <prefix>.forecast.> until every one has
// arrived.
func runOutputBound(b *testing.B, o rigOptions) outputRun {
	r := newRig(b, o)
	r.warm()
	fc, ok := r.d.Latest(rigTopic(0))
	if !ok {
		b.Fatal("no forecast after warm-up")
	}
	var got atomic.Int64
	sc, sub := subscribeForecasts(b, r, func(*nats.Msg) { got.Add(1) })
	msgs := r.build(b.N, 1)
	fcSubjects := make([]string, len(r.subjects))
	for i := range fcSubjects {
		fcSubjects[i] = r.d.loops[0].pub.forecastSubject(rigTopic(i))
	}
	twins, filter := rawTwins(fcSubjects)
	raw := medianOf3(func() float64 { return streamtest.RawFanInRate(b, r.url, twins, filter, len(fc), max(b.N, 50_000)) })
	raw1 := medianOf3(func() float64 { return streamtest.RawPubSubRate(b, r.url, len(fc), max(b.N, 50_000)) })
	acc0, pub0 := counterValue(r.d.metrics.Accepted), counterValue(r.d.metrics.Published)
	want := int64(b.N)
	runtime.GC()

	b.ResetTimer()
	stopProfile := profileTimed(b, "")
	start := time.Now()
	r.send(msgs)
	end := waitUntil(b, 120*time.Second, "every forecast received", func() bool { return got.Load() >= want })
	b.StopTimer()
	stopProfile()

	// Exact counts: one accepted observation and one forecast per message,
	// every forecast received once.
	if err := r.d.opt.Conn.Flush(); err != nil {
		b.Fatal(err)
	}
	if err := sc.Flush(); err != nil {
		b.Fatal(err)
	}
	if n := got.Load(); n != want {
		b.Fatalf("received %d forecasts, want %d", n, want)
	}
	if d, _ := sub.Dropped(); d != 0 {
		b.Fatalf("subscriber dropped %d forecasts", d)
	}
	if acc := counterValue(r.d.metrics.Accepted) - acc0; acc != float64(want) {
		b.Fatalf("accepted %v observations, want %d", acc, want)
	}
	if pub := counterValue(r.d.metrics.Published) - pub0; pub != float64(want) {
		b.Fatalf("published %v forecasts, want %d", pub, want)
	}
	return outputRun{rate: float64(want) / end.Sub(start).Seconds(), raw: raw, raw1: raw1, size: len(fc)}
}

// BenchmarkOutputBound: every message closes a bucket, so every message
// publishes a 24-step forecast. Reported: forecasts/s as received by a
// subscriber, and its ratios to the raw rates for messages of the encoded
// forecast's size (fc_bytes) on the forecast subjects' shape: pct_raw
// (target ≥ 40) and pct_raw1. The far_rule case adds an alert rule
// that matches every series with a threshold far above its forecasts
// (issue 5: it should cost at most 10 % of the rate).
func BenchmarkOutputBound(b *testing.B) {
	for _, alert := range []bool{false, true} {
		name := "no_rule"
		if alert {
			name = "far_rule"
		}
		b.Run(name, func(b *testing.B) {
			o := runOutputBound(b, rigOptions{alert: alert})
			b.ReportMetric(o.rate, "forecasts/s")
			b.ReportMetric(o.raw, "raw_msgs/s")
			b.ReportMetric(float64(o.size), "fc_bytes")
			b.ReportMetric(100*o.rate/o.raw, "pct_raw")
			b.ReportMetric(o.raw1, "raw1_msgs/s")
			b.ReportMetric(100*o.rate/o.raw1, "pct_raw1")
		})
	}
}

// latencyRate is the offered load of BenchmarkCloseToForecastLatency, in
// messages per second, well under the output-bound rate so that latency is
// not the length of a queue.
const latencyRate = 5_000

// BenchmarkCloseToForecastLatency measures, for every message that closes
// a bucket, the wall time from just before its publication to the arrival
// of its forecast at a subscriber (both timestamps taken in this process;
// per series, forecasts arrive in the order of the messages that caused
// them, so the k-th forecast of a series belongs to its k-th message).
// Messages are paced at latencyRate per second. Reported: p50_us, p99_us
// and max_us.
func BenchmarkCloseToForecastLatency(b *testing.B) {
	r := newRig(b, rigOptions{})
	r.warm()
	ns := len(r.subjects)
	sent := make([]int64, b.N)
	lat := make([]int64, b.N)
	perSeries := make([]int, ns)
	var got atomic.Int64
	prefix := r.cfg.Output.Prefix + ".forecast."
	subscribeForecasts(b, r, func(m *nats.Msg) {
		now := time.Now().UnixNano()
		i, err := strconv.Atoi(m.Subject[len(prefix)+len("bench.s"):])
		if err != nil || i >= ns {
			return
		}
		j := perSeries[i]*ns + i
		perSeries[i]++
		if j < len(lat) {
			lat[j] = now - atomic.LoadInt64(&sent[j])
		}
		got.Add(1)
	})
	msgs := r.build(b.N, 1)

	b.ResetTimer()
	start := time.Now()
	for j := range b.N {
		if due := start.Add(time.Duration(j) * time.Second / latencyRate); time.Until(due) > 0 {
			time.Sleep(time.Until(due))
		}
		atomic.StoreInt64(&sent[j], time.Now().UnixNano())
		if err := r.pub.Publish(r.subjects[msgs.series[j]], msgs.payload(j)); err != nil {
			b.Fatal(err)
		}
	}
	waitUntil(b, 120*time.Second, "every forecast received", func() bool { return got.Load() >= int64(b.N) })
	b.StopTimer()
	if n := got.Load(); n != int64(b.N) {
		b.Fatalf("received %d forecasts, want %d", n, b.N)
	}
	slices.Sort(lat)
	q := func(p float64) float64 { return float64(lat[int(p*float64(len(lat)-1))]) / 1e3 }
	b.ReportMetric(q(0.50), "p50_us")
	b.ReportMetric(q(0.99), "p99_us")
	b.ReportMetric(q(1), "max_us")
}

// BenchmarkStateMemory measures the heap the daemon holds per series with
// full 2000-bucket windows (target ≤ 64 KiB): the series are written to
// the store first (one fitted template series, copied under every topic),
// the daemon loads them (each restored with its model, its latest
// forecast served at once), one bucket closes in every series, the flush
// of all of them is committed (so the daemon's flush batch holds one
// record per series, as it keeps doing once every series is busy), and
// the heap in use after garbage collection, less the heap before the
// daemon started, is divided by the number of series. Reported:
// bytes/series.
// One operation is one whole measurement.
func BenchmarkStateMemory(b *testing.B) {
	const window = fullWindow
	for b.Loop() {
		b.StopTimer()
		r := newRigConfig(b, rigOptions{window: window})
		snap := r.template(window)
		ns := len(r.subjects)
		store := r.seed(snap)
		before := heapInUse()
		b.StartTimer()
		r.start(streamtest.Connect(b, r.url), store)
		b.StopTimer()
		// One close per series: encoder buffers, dirty flags, then a flush.
		r.resumeAfter(snap)
		r.send(r.build(ns, 1))
		waitUntil(b, 60*time.Second, "a forecast per series", func() bool {
			return counterValue(r.d.metrics.Published) >= float64(ns)
		})
		var windows int
		r.d.Inspect(context.Background(), func(all map[string]*Entry) {
			for _, e := range all {
				if len(e.Series().Snapshot().Window) == window {
					windows++
				}
			}
		})
		if windows != ns {
			b.Fatalf("%d of %d series have a full window", windows, ns)
		}
		r.quiesce() // the flush of every series is written: the batch holds them all
		after := heapInUse()
		b.ReportMetric(float64(after-before)/float64(ns), "bytes/series")
		b.StartTimer()
	}
}

// fullWindow is the window of the full-window benchmarks: the config
// default, the size the state-memory target names.
const fullWindow = 2000

// newRigFull is newRig for series that have run for a while: every series
// is restored from a stored copy of one fitted template series whose
// window (o.window buckets) is full, and the rig's paths continue the
// template's. Like warm, it returns once the state is quiet.
func newRigFull(tb testing.TB, o rigOptions) *rig {
	tb.Helper()
	r := newRigConfig(tb, o)
	snap := r.template(o.window)
	r.start(streamtest.Connect(tb, r.url), r.seed(snap))
	r.resumeAfter(snap)
	r.quiesce()
	return r
}

// seed opens the rig's store and writes snap to it under every rig topic,
// 1000 records per transaction. No daemon has the store yet.
func (r *rig) seed(snap *series.Snapshot) *state.Store {
	tb := r.tb
	tb.Helper()
	store, err := state.Open(r.cfg.State.Dir)
	if err != nil {
		tb.Fatal(err)
	}
	ns := len(r.subjects)
	for lo := 0; lo < ns; lo += 1000 {
		var batch []*series.Snapshot
		for i := lo; i < min(lo+1000, ns); i++ {
			s := *snap
			s.Topic = rigTopic(i)
			batch = append(batch, &s)
		}
		if err := store.Save(batch); err != nil {
			tb.Fatal(err)
		}
	}
	return store
}

// resumeAfter makes the rig's next messages follow the seeded template:
// the first goes into its open bucket, and every series' path continues
// from the template's last level, difference and innovation (template
// stepped series 0's path).
func (r *rig) resumeAfter(snap *series.Snapshot) {
	r.next = snap.OpenBucket - r.t0/int64(rigStep/time.Second) // relative to r.t0
	for i := range r.subjects {
		r.level[i], r.diff[i], r.shock[i] = r.level[0], r.diff[0], r.shock[0]
	}
}

// template returns the snapshot of one series that has seen window+1
// buckets (so its window is full and one bucket is open) and made its
// first fit at min_points, as the daemon would have built it.
func (r *rig) template(window int) *series.Snapshot {
	tb := r.tb
	sc, ok := r.cfg.SeriesFor(rigTopic(0))
	if !ok {
		tb.Fatal("no series entry")
	}
	s, err := series.New(rigTopic(0), settingsOf(sc, ""))
	if err != nil {
		tb.Fatal(err)
	}
	step := int64(rigStep / time.Second)
	for k := range int64(window + 1) {
		out, err := s.Observe((r.t0+k*step)*int64(time.Second), r.stepLevel(0))
		if err != nil {
			tb.Fatal(err)
		}
		if out == series.NeedFit {
			if _, err := s.Install(s.FitJob().Run()); err != nil {
				tb.Fatal(err)
			}
		}
	}
	if !s.HasModel() {
		tb.Fatal("template series has no model")
	}
	return s.Snapshot()
}

// BenchmarkClosePath times the per-close path in process, without the
// bus: one observation that closes a bucket of a fitted series with a
// full 2000-bucket window (filter step, raw-unit forecast), the forecast's
// encoding, and, in the far_rule case, the daemon's evaluation of a rule
// whose threshold is far above the forecast (issue 5: at most 10 % more
// than no_rule). It does not allocate.
func BenchmarkClosePath(b *testing.B) {
	for _, withRule := range []bool{false, true} {
		name := "no_rule"
		if withRule {
			name = "far_rule"
		}
		b.Run(name, func(b *testing.B) {
			const window = 2000
			r := newRigConfig(b, rigOptions{series: 1, alert: true, window: window})
			store, err := state.Open(r.cfg.State.Dir, state.NoSync())
			if err != nil {
				b.Fatal(err)
			}
			defer store.Close()
			d, err := New(Options{Config: r.cfg, Conn: streamtest.Connect(b, r.url), Store: store})
			if err != nil {
				b.Fatal(err)
			}
			topic := rigTopic(0)
			l := d.loops[0]
			sc, _ := r.cfg.SeriesFor(topic)
			s, err := series.Restore(r.template(window), settingsOf(sc, ""))
			if err != nil {
				b.Fatal(err)
			}
			e := &entry{s: s}
			if withRule {
				e.rules = d.rulesFor(topic, sc)
				if len(e.rules) != 1 {
					b.Fatalf("%d rules", len(e.rules))
				}
			}
			step := int64(rigStep / time.Second)
			bucket := s.Snapshot().OpenBucket - r.t0/step // relative to r.t0
			now := time.Now()
			buf := make([]byte, 0, 8192)
			b.ReportAllocs()
			for b.Loop() {
				bucket++
				out, err := s.Observe((r.t0+bucket*step)*int64(time.Second), r.stepLevel(0))
				if err != nil || out != series.Published {
					b.Fatalf("outcome %v, %v", out, err)
				}
				buf = stream.AppendForecast(buf[:0], s.Forecast(), now)
				if len(e.rules) > 0 {
					l.evaluate(topic, e, now)
				}
			}
			if withRule && l.alerts.evaluator.LastMethod() != alert.MethodSkip {
				b.Fatalf("rule evaluated by %v, want the skip bound", l.alerts.evaluator.LastMethod())
			}
			if st := *s.Alerts(); withRule && (len(st) != 1 || st[0].Raised) {
				b.Fatalf("alert states %+v", st)
			}
		})
	}
}

// medianOf3 runs a raw-rate measurement three times, each after a
// garbage collection (as the timed part starts after one), and returns the
// median: single runs on this 2-core machine swing by a factor of up to
// two.
func medianOf3(measure func() float64) float64 {
	var r [3]float64
	for i := range r {
		runtime.GC()
		r[i] = measure()
	}
	slices.Sort(r[:])
	return r[1]
}

// rawTwins returns subjects with the first token of each replaced by one
// of the same length ("raw" padded with '_'), and the wildcard that
// matches them: the same traffic shape, on subjects that neither the
// daemon nor a forecast subscriber listens to.
func rawTwins(subjects []string) ([]string, string) {
	twins := make([]string, len(subjects))
	var first string
	for i, s := range subjects {
		tok, rest, _ := strings.Cut(s, ".")
		first = "raw" + strings.Repeat("_", max(len(tok)-3, 0))
		twins[i] = first + "." + rest
	}
	return twins, first + ".>"
}

// subscribeForecasts counts on every forecast subject with fn, without a
// pending limit (so nothing is dropped on the client side), and returns
// once the server routes them. It returns the subscriber's connection and
// subscription.
func subscribeForecasts(b *testing.B, r *rig, fn nats.MsgHandler) (*nats.Conn, *nats.Subscription) {
	b.Helper()
	sc := streamtest.Connect(b, r.url)
	sub, err := sc.Subscribe(r.cfg.Output.Prefix+".forecast.>", fn)
	if err != nil {
		b.Fatal(err)
	}
	if err := sub.SetPendingLimits(-1, -1); err != nil {
		b.Fatal(err)
	}
	if err := sc.Flush(); err != nil {
		b.Fatal(err)
	}
	return sc, sub
}
