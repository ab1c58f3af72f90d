package daemon

import (
	"context"
	"math"
	"runtime"
	"sync/atomic"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/prometheus/client_golang/prometheus"
	dto "github.com/prometheus/client_model/go"

	"forewarn/config"
	"forewarn/engine/alert"
	"forewarn/state"
	"forewarn/stream/streamtest"
)

// Shape of BenchmarkFleetNearCapacity (issue 14 "Acceptance").
const (
	fleetStep    = time.Second
	fleetHorizon = 180
	fleetWithin  = 2 * time.Minute // 120 steps
	// fleetZ places the threshold fleetZ 120-step standard deviations
	// above the 120-step median forecast after the warm-up, where the
	// crossing probability of a random walk is about 2·Q(fleetZ) ≈ 0.32
	// (reflection principle, common practice): in the middle range, and it
	// stays there while each series wanders by a few steps' worth.
	fleetZ = 1.0
)

// fleetRun is one measurement of BenchmarkFleetNearCapacity.
type fleetRun struct {
	rate      float64 // forecasts/s received, every alert evaluation applied
	evals     float64 // rule evaluations in the timed part
	simulated float64 // of which reached the simulation
	late      float64 // answers that came after the series' next observation
	undecided float64 // simulations that used their whole path budget
	waitMean  float64 // mean queue wait of a simulated evaluation, seconds
	paths     float64 // paths drawn per simulated evaluation
	pMean     float64 // mean crossing probability over the series at the end
	threshold float64
}

// BenchmarkFleetNearCapacity: 10 000 gauges, each the rig's random walk
// (ARIMA(1,1,1) increments, see rig.stepLevel; every series starts from
// the same level and warm-up path, then draws its own shocks), step 1 s,
// horizon 180, every message closing a bucket and publishing a 180-step
// forecast. It runs twice in one benchmark, on fresh rigs: without rules,
// and with one rule per series, "above T within 2m with probability 0.9",
// T placed fleetZ standard deviations of the 120-step forecast above its
// median after the warm-up, so that each rule's crossing probability stays
// in the middle range and needs a simulation (alert workers) at nearly
// every close. The timed part ends when a subscriber has received every
// forecast and, with rules, every evaluation has been applied. Reported:
// forecasts/s for both (norule_fc/s, rule_fc/s), their ratio (ratio;
// target ≥ 0.5), the share of evaluations that reached the simulation
// (sim_share; it must be at least 0.9 for the run to count), late answers
// (late), evaluations that used their whole path budget (undecided) and
// the mean queue wait (wait_ms). Run it with a fixed count, for instance
//
//	go test ./stream/daemon -run '^$' -bench FleetNearCapacity -benchtime 100000x
func BenchmarkFleetNearCapacity(b *testing.B) {
	no := runFleet(b, false)
	with := runFleet(b, true)
	if b.N >= rigSeries && with.simulated < 0.9*with.evals {
		b.Fatalf("%v of %v evaluations simulated: the rules are not near their thresholds (T = %.2f)",
			with.simulated, with.evals, with.threshold)
	}
	b.ReportMetric(no.rate, "norule_fc/s")
	b.ReportMetric(with.rate, "rule_fc/s")
	b.ReportMetric(with.rate/no.rate, "ratio")
	b.ReportMetric(with.simulated/math.Max(with.evals, 1), "sim_share")
	b.ReportMetric(with.late, "late")
	b.ReportMetric(with.undecided, "undecided")
	b.ReportMetric(1e3*with.waitMean, "wait_ms")
	b.ReportMetric(with.paths, "paths/eval")
	b.ReportMetric(with.pMean, "p_mean")
	b.ReportMetric(0, "ns/op")
}

func runFleet(b *testing.B, withRule bool) fleetRun {
	b.StopTimer()
	o := rigOptions{step: fleetStep, horizon: fleetHorizon}
	r := newRigConfig(b, o)
	for i := range r.level {
		r.level[i] = 1000 // one starting level: one threshold suits every series
	}
	store, err := state.Open(r.cfg.State.Dir)
	if err != nil {
		b.Fatal(err)
	}
	r.start(streamtest.Connect(b, r.url), store)
	r.warm()
	var out fleetRun
	if withRule {
		out.threshold = r.nearRules()
	}
	var got atomic.Int64
	subscribeForecasts(b, r, func(*nats.Msg) { got.Add(1) })
	msgs := r.build(b.N, 1)
	m := r.d.metrics
	sim0, ev0 := counterValue(m.AlertEvaluations[alert.MethodSimulation]), r.evaluations()
	late0, und0 := counterValue(m.AlertsLate), counterValue(m.AlertsUndecided)
	w0, n0 := histogramSum(m.AlertQueueSeconds)
	paths0 := counterValue(m.AlertPaths)
	want := int64(b.N)
	runtime.GC()

	b.StartTimer()
	start := time.Now()
	r.send(msgs)
	waitUntil(b, 600*time.Second, "every forecast received", func() bool { return got.Load() >= want })
	end := waitUntil(b, 600*time.Second, "every alert evaluation applied", func() bool {
		return gaugeValue(m.AlertsQueued) == 0 && gaugeValue(m.Pending) == 0
	})
	b.StopTimer()
	if n := got.Load(); n != want {
		b.Fatalf("received %d forecasts, want %d", n, want)
	}
	out.rate = float64(want) / end.Sub(start).Seconds()
	out.simulated = counterValue(m.AlertEvaluations[alert.MethodSimulation]) - sim0
	out.evals = r.evaluations() - ev0
	out.late = counterValue(m.AlertsLate) - late0
	out.undecided = counterValue(m.AlertsUndecided) - und0
	if out.simulated > 0 {
		out.paths = (counterValue(m.AlertPaths) - paths0) / out.simulated
	}
	r.d.Inspect(context.Background(), func(all map[string]*Entry) {
		for _, e := range all {
			for _, st := range *e.Series().Alerts() {
				out.pMean += st.Probability / float64(len(all))
			}
		}
	})
	w1, n1 := histogramSum(m.AlertQueueSeconds)
	if n1 > n0 {
		out.waitMean = (w1 - w0) / float64(n1-n0)
	}
	if withRule && out.evals != float64(want) {
		b.Fatalf("%v rule evaluations, want one per forecast (%d)", out.evals, want)
	}
	b.Logf("rule %v: %d forecasts in %v (%.0f/s); evaluations %v, simulated %v, late %v, undecided %v, threshold %.2f, %.0f paths per simulation, mean p %.3f",
		withRule, want, end.Sub(start).Round(time.Millisecond), out.rate, out.evals, out.simulated, out.late, out.undecided, out.threshold, out.paths, out.pMean)
	return out
}

// nearRules gives every series the rule "near", above T within
// fleetWithin with probability 0.9, T being fleetZ standard deviations of
// the 120-step forecast of series 0 above its median (after warm, every
// series has the same model and forecast). The rule goes into the
// daemon's configuration and each series takes it as it would at its
// start (Daemon.rulesFor), on the loop. It returns T.
func (r *rig) nearRules() float64 {
	tb := r.tb
	k := int(fleetWithin / fleetStep)
	var thr float64
	ok := r.d.Inspect(context.Background(), func(all map[string]*Entry) {
		f := all[rigTopic(0)].Series().Forecast()
		p := f.Points[k-1]
		// Half-width of the widest central band over its normal quantile.
		top := len(f.Levels) - 1
		z := -math.Sqrt2 * math.Erfcinv(1+f.Levels[top]/100)
		sd := (p.Upper[top].Value - p.Lower[top].Value) / (2 * z)
		thr = p.Mean + fleetZ*sd
		r.d.cfg.Alerts = []config.Alert{{Name: "near", Match: "bench.>", Above: &thr,
			Within: fleetWithin, Probability: 0.9}}
		for _, l := range r.d.loops {
			for topic, e := range l.series {
				sc, _ := r.d.cfg.SeriesFor(topic)
				e.rules = r.d.rulesFor(topic, sc)
			}
		}
	})
	if !ok {
		tb.Fatal("inspect failed")
	}
	return thr
}

// evaluations sums forewarn_alert_evaluations_total over its methods.
func (r *rig) evaluations() float64 {
	var sum float64
	for _, c := range r.d.metrics.AlertEvaluations {
		sum += counterValue(c)
	}
	return sum
}

func gaugeValue(g prometheus.Gauge) float64 {
	var pb dto.Metric
	if err := g.Write(&pb); err != nil {
		panic(err)
	}
	return pb.GetGauge().GetValue()
}

func histogramSum(h prometheus.Histogram) (float64, uint64) {
	var pb dto.Metric
	if err := h.Write(&pb); err != nil {
		panic(err)
	}
	return pb.GetHistogram().GetSampleSum(), pb.GetHistogram().GetSampleCount()
}
