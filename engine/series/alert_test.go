package series

import (
	"errors"
	"hash/fnv"
	"math"
	"math/rand/v2"
	"reflect"
	"testing"

	"forewarn/engine/alert"
	"forewarn/engine/arima"
)

// alertRig drives a series one bucket at a time, running refits inline and
// evaluating the rules after every published forecast, and keeps the
// events.
type alertRig struct {
	t      testing.TB
	s      *Series
	rules  []AlertRule
	ev     *alert.Evaluator
	ps     arima.PathSystem
	events []AlertEvent
	probs  []float64 // the first rule's probability after each forecast
}

func newAlertRig(t testing.TB, s *Series, rules []AlertRule) *alertRig {
	ev, err := alert.NewEvaluator(s.Settings().Horizon, 0)
	if err != nil {
		t.Fatal(err)
	}
	return &alertRig{t: t, s: s, rules: rules, ev: ev}
}

func (r *alertRig) feed(values []float64, from int64) {
	r.t.Helper()
	for i, v := range values {
		o, err := r.s.Observe(at(from+int64(i)), v)
		if err != nil {
			r.t.Fatalf("bucket %d: %v", from+int64(i), err)
		}
		if o == NeedFit {
			if o, err = r.s.Install(r.s.FitJob().Run()); err != nil {
				r.t.Fatalf("refit at bucket %d: %v", from+int64(i), err)
			}
		}
		if o != Published {
			continue
		}
		r.events, err = r.s.EvaluateAlerts(r.events, r.rules, r.ev, &r.ps)
		if err != nil {
			r.t.Fatalf("bucket %d: %v", from+int64(i), err)
		}
		if len(r.rules) > 0 {
			r.probs = append(r.probs, r.s.Snapshot().Alerts[0].Probability)
		}
	}
}

// climbThenDrop is a storage gauge (invented data): a random walk with
// drift 2 per step from 1000 (trend), 150 buckets, then cleaned up: flat
// near 900 for 80 buckets.
func climbThenDrop() (climb, flat []float64) {
	climb = trend(150, 7)
	r := rand.New(rand.NewPCG(7, 2))
	flat = make([]float64, 80)
	for i := range flat {
		flat[i] = 900 + r.NormFloat64()
	}
	return climb, flat
}

// fullRule is "above 1250 within 12 steps with probability 0.9" (clear
// below 0.45); the climb of climbThenDrop passes 1250 near bucket 125.
func fullRule() AlertRule {
	return AlertRule{Name: "vol-full", Threshold: 1250, Above: true, Window: 12, WithinSeconds: 12 * step,
		Raise: 0.9, Clear: 0.45}
}

// A gauge climbing through its threshold and then cleaned up raises the
// rule exactly once, while the median forecast is below the threshold and
// with an eta, and clears it exactly once after the drop (the hysteresis of
// ITU-T X.733 alarm states; the crossing is the scenario's known truth: a
// random walk with drift 2 from 1000 reaches 1250 after about 125 steps,
// so its 12-step median 1000 + 2(t + 12) does near t = 113).
func TestEvaluateAlertsRaiseOnceClearOnce(t *testing.T) {
	climb, flat := climbThenDrop()
	s, err := New("vol.used", settings())
	if err != nil {
		t.Fatal(err)
	}
	r := newAlertRig(t, s, []AlertRule{fullRule()})
	r.feed(climb, 0)
	r.feed(flat, int64(len(climb)))
	if len(r.events) != 2 || !r.events[0].Raised || r.events[1].Raised {
		t.Fatalf("events %+v, want one raise then one clear", r.events)
	}
	up, down := r.events[0], r.events[1]
	if up.Direction != "above" || up.Threshold != 1250 || up.WithinSeconds != 12*step || up.Probability < 0.9 {
		t.Errorf("raise %+v", up)
	}
	// Raised no later than the first bucket above the threshold and not
	// before its 12-step median 1000 + 2(t + 12) is within 3 sd of a
	// 12-step random walk (sd √12) of it, with an eta at most the window
	// ahead.
	ob := up.Origin.Unix() / step
	first := int64(0)
	for climb[first] <= 1250 {
		first++
	}
	if ob > first || climb[ob]+2*12+3*math.Sqrt(12) < 1250 || !up.HasETA || up.ETA.Unix()/step-ob > 12 || up.ETA.Unix()/step <= ob {
		t.Errorf("raised at bucket %d (value %.1f, first above %d), eta %v (has %v)", ob, climb[ob], first, up.ETA, up.HasETA)
	}
	if down.Origin.Unix()/step < int64(len(climb)) || down.Probability >= 0.45 {
		t.Errorf("clear %+v", down)
	}
	st := s.Snapshot().Alerts
	if len(st) != 1 || st[0].Raised || st[0].Since != down.Origin.Unix()/step {
		t.Errorf("states %+v", st)
	}
	t.Logf("raised at bucket %d p %.4f ± %.4f, cleared at bucket %d p %.4f",
		ob, up.Probability, up.StdErr, down.Origin.Unix()/step, down.Probability)
}

// A series restored from its record mid-alert does not raise the rule
// again, and from then on gives the same probabilities and events as the
// uninterrupted run, bit for bit (the seed comes from data time).
func TestEvaluateAlertsNoRepeatAfterRestore(t *testing.T) {
	climb, flat := climbThenDrop()
	whole, err := New("vol.used", settings())
	if err != nil {
		t.Fatal(err)
	}
	a := newAlertRig(t, whole, []AlertRule{fullRule()})
	a.feed(climb, 0)
	a.feed(flat, int64(len(climb)))

	first, err := New("vol.used", settings())
	if err != nil {
		t.Fatal(err)
	}
	b := newAlertRig(t, first, []AlertRule{fullRule()})
	b.feed(climb[:140], 0)
	if len(b.events) != 1 || !b.events[0].Raised {
		t.Fatalf("before the restart: events %+v, want one raise", b.events)
	}
	restored, err := Restore(cloneSnapshot(first.Snapshot()), settings())
	if err != nil {
		t.Fatal(err)
	}
	c := newAlertRig(t, restored, []AlertRule{fullRule()})
	c.feed(climb[140:], 140)
	c.feed(flat, int64(len(climb)))
	if len(c.events) != 1 || c.events[0].Raised {
		t.Fatalf("after the restart: events %+v, want only the clear", c.events)
	}
	if c.events[0] != a.events[1] {
		t.Errorf("clear after restart %+v, uninterrupted %+v", c.events[0], a.events[1])
	}
	tail := a.probs[len(a.probs)-len(c.probs):]
	for i := range tail {
		if tail[i] != c.probs[i] {
			t.Fatalf("forecast %d after the restart: p %v, uninterrupted %v", i, c.probs[i], tail[i])
		}
	}
}

// Under a decreasing transform, "above x" is "below Forward(x)" on the
// model scale. The series B is the mirror of A: raw values negated and
// the transform none with location and scale negated, so both have the
// same model-scale values, filter and forecasts. A's rule "above 1250"
// and B's rule "below −1250" are the same event, so they must give the
// same probabilities, bit for bit, and raise at the same bucket.
func TestEvaluateAlertsDecreasingTransform(t *testing.T) {
	climb, _ := climbThenDrop()
	set := settings()
	set.RefitEvery = 1000 // no refit after the first fit: the mirror holds
	a, err := New("vol.used", set)
	if err != nil {
		t.Fatal(err)
	}
	ra := newAlertRig(t, a, []AlertRule{fullRule()})
	ra.feed(climb[:100], 0)
	snap := cloneSnapshot(a.Snapshot())
	if snap.Model == nil || snap.Transform.Name != "none" {
		t.Fatalf("no model, or transform %q", snap.Transform.Name)
	}
	for i := range snap.Window {
		snap.Window[i] = -snap.Window[i]
	}
	snap.OpenValue = -snap.OpenValue
	sc := snap.Transform.Scale
	if sc == 0 {
		sc = 1
	}
	snap.Transform.Loc, snap.Transform.Scale, snap.Transform.RunMean = -snap.Transform.Loc, -sc, -snap.Transform.RunMean
	b, err := Restore(snap, set)
	if err != nil {
		t.Fatal(err)
	}
	if b.tr.Increasing() {
		t.Fatal("mirror transform is increasing")
	}
	below := fullRule()
	below.Threshold, below.Above = -1250, false
	rb := newAlertRig(t, b, []AlertRule{below})
	mirror := make([]float64, 50)
	for i := range mirror {
		mirror[i] = -climb[100+i]
	}
	ra.probs, ra.events = ra.probs[:0], ra.events[:0]
	ra.feed(climb[100:150], 100)
	rb.feed(mirror, 100)
	if len(ra.probs) != len(rb.probs) || len(ra.events) != 1 || len(rb.events) != 1 {
		t.Fatalf("A: %d forecasts, events %+v; B: %d forecasts, events %+v", len(ra.probs), ra.events, len(rb.probs), rb.events)
	}
	for i := range ra.probs {
		if ra.probs[i] != rb.probs[i] {
			t.Fatalf("forecast %d: p %v above, mirror %v below", i, ra.probs[i], rb.probs[i])
		}
	}
	ea, eb := ra.events[0], rb.events[0]
	if eb.Direction != "below" || eb.Threshold != -1250 || eb.Origin != ea.Origin || eb.Probability != ea.Probability || eb.ETA != ea.ETA {
		t.Errorf("mirror event %+v, event %+v", eb, ea)
	}
}

// The seed of a rule's simulation depends on the topic, the rule and the
// forecast origin only: evaluating the rules in another order, or with an
// evaluator that has just worked on another series, gives the same
// probabilities. The seed is FNV-1a 64 (hash/fnv of the standard library)
// of topic, a zero byte, rule and the origin's Unix seconds
// (little-endian), as the daemon derived it before.
func TestEvaluateAlertsSeedIndependentOfOrder(t *testing.T) {
	climb, _ := climbThenDrop()
	s, err := New("vol.used", settings())
	if err != nil {
		t.Fatal(err)
	}
	newAlertRig(t, s, []AlertRule{fullRule()}).feed(climb[:110], 0)
	snap := cloneSnapshot(s.Snapshot())
	// Three rules in the middle range at this origin (simulated).
	rules := []AlertRule{fullRule(), fullRule(), fullRule()}
	rules[0].Name, rules[0].Threshold = "r0", 1245
	rules[1].Name, rules[1].Threshold = "r1", 1250
	rules[2].Name, rules[2].Threshold, rules[2].Window = "r2", 1248, 8
	probs := func(order []int, warm bool) map[string]float64 {
		x, err := Restore(cloneSnapshot(snap), settings())
		if err != nil {
			t.Fatal(err)
		}
		ev, _ := alert.NewEvaluator(12, 0)
		var ps arima.PathSystem
		if warm { // the evaluator first works on another series
			y, _ := Restore(cloneSnapshot(snap), settings())
			other := fullRule()
			other.Threshold = 1230
			if _, err := y.EvaluateAlerts(nil, []AlertRule{other}, ev, &ps); err != nil {
				t.Fatal(err)
			}
		}
		var rs []AlertRule
		for _, i := range order {
			rs = append(rs, rules[i])
		}
		if _, err := x.EvaluateAlerts(nil, rs, ev, &ps); err != nil {
			t.Fatal(err)
		}
		out := map[string]float64{}
		for _, st := range x.Snapshot().Alerts {
			out[st.Rule] = st.Probability
		}
		if ev.LastMethod() != alert.MethodSimulation {
			t.Fatalf("last rule evaluated by %v, want simulation", ev.LastMethod())
		}
		return out
	}
	want := probs([]int{0, 1, 2}, false)
	for name, p := range want {
		if !(p > 0.05 && p < 0.95) {
			t.Fatalf("rule %s: p %v not in the middle range", name, p)
		}
	}
	for _, o := range [][]int{{2, 1, 0}, {1, 2, 0}} {
		for _, warm := range []bool{false, true} {
			got := probs(o, warm)
			for name, p := range want {
				if got[name] != p {
					t.Errorf("order %v warm %v: rule %s p %v, want %v", o, warm, name, got[name], p)
				}
			}
		}
	}
	t.Logf("probabilities %v", want)

	h := fnv.New64a()
	h.Write([]byte("vol.used\x00r1"))
	h.Write([]byte{0x40, 0xe2, 0x01, 0, 0, 0, 0, 0}) // 123456
	if got := alertSeed("vol.used", "r1", 123456); got != h.Sum64() {
		t.Errorf("seed %x, hash/fnv %x", got, h.Sum64())
	}
}

// Bad rules and a series without a forecast give clear errors; the other
// rules are still evaluated.
func TestEvaluateAlertsBadInput(t *testing.T) {
	s, err := New("vol.used", settings())
	if err != nil {
		t.Fatal(err)
	}
	ev, _ := alert.NewEvaluator(12, 0)
	if _, err := s.EvaluateAlerts(nil, []AlertRule{fullRule()}, ev, nil); !errors.Is(err, ErrNoForecast) {
		t.Fatalf("no model: err %v, want ErrNoForecast", err)
	}
	climb, _ := climbThenDrop()
	newAlertRig(t, s, []AlertRule{fullRule()}).feed(climb[:60], 0)
	long, badLevels := fullRule(), fullRule()
	long.Name, long.Window = "long", 13
	badLevels.Name, badLevels.Raise, badLevels.Clear = "levels", 0.4, 0.5
	far := fullRule()
	far.Name, far.Threshold = "far", 1e6
	for _, bad := range []AlertRule{long, badLevels} {
		_, err = s.EvaluateAlerts(nil, []AlertRule{bad, far}, ev, nil)
		if !errors.Is(err, ErrAlertRule) || !contains(err.Error(), `"`+bad.Name+`"`) {
			t.Errorf("rule %s: err %v, want ErrAlertRule naming it", bad.Name, err)
		}
	}
	// A rule that failed has no state; the far one was evaluated.
	st := s.Snapshot().Alerts
	if len(st) != 2 || st[1].Rule != "far" || !(st[1].Probability < 1e-6) {
		t.Errorf("states %+v, want only the far rule added", st)
	}
}

func contains(s, sub string) bool {
	for i := 0; i+len(sub) <= len(s); i++ {
		if s[i:i+len(sub)] == sub {
			return true
		}
	}
	return false
}

// BenchmarkEvaluateAlertsK120 is one evaluation of one gauge rule near
// its threshold at k = 120: a series with horizon 120 fitted with
// ARIMA(1,1,1)(1,0,0)[6] (state dimension m = 8) on a random walk with
// drift, and the rule "above the 120-step median + 0.5 sd within 120
// steps", p in the middle range. clear_near_p sets Clear next to p, the
// case in which testing both levels would draw every path while the
// cleared rule asks only about Raise.
func BenchmarkEvaluateAlertsK120(b *testing.B) {
	set := Settings{
		Kind: "gauge", StepSeconds: step, Horizon: 120, Levels: []float64{80, 95}, Window: 400,
		MinPoints: 200, RefitEvery: 1000, Model: "1,1,1 x 1,0,0", Period: 6, Transform: "none",
		Fingerprint: "bench",
	}
	s, err := New("vol.used", set)
	if err != nil {
		b.Fatal(err)
	}
	r := newAlertRig(b, s, nil)
	r.feed(trend(300, 3), 0)
	if !s.HasModel() {
		b.Fatal("no model")
	}
	mean, variance := s.mf.Mean, s.mf.Variance
	thr := mean[119] + 0.5*math.Sqrt(variance[119])
	rule := AlertRule{Name: "near", Threshold: thr, Above: true, Window: 120, Raise: 0.9, Clear: 0.45}
	var dst []AlertEvent
	if dst, err = s.EvaluateAlerts(dst, []AlertRule{rule}, r.ev, &r.ps); err != nil {
		b.Fatal(err)
	}
	p := s.Snapshot().Alerts[0].Probability
	if !(p > 0.05 && p < 0.95) || r.ev.LastMethod() != alert.MethodSimulation {
		b.Fatalf("p %v by %v, want a simulated p in the middle range", p, r.ev.LastMethod())
	}
	for _, name := range []string{"clear_0.45", "clear_near_p"} {
		b.Run(name, func(b *testing.B) {
			rl := rule
			if name == "clear_near_p" {
				rl.Clear = p - 0.005
			}
			rules := []AlertRule{rl}
			b.ReportAllocs()
			for b.Loop() {
				dst, err = s.EvaluateAlerts(dst[:0], rules, r.ev, &r.ps)
				if err != nil || len(dst) != 0 {
					b.Fatalf("%v, events %+v", err, dst)
				}
			}
			b.ReportMetric(p, "p")
		})
	}
}

// The split evaluation (PrepareAlerts on the series' goroutine, Run on
// another goroutine with its own evaluator, FinishAlerts back) gives the
// same probabilities and events, bit for bit, as EvaluateAlerts on the
// same data, whatever evaluator ran before: the property the daemon's
// alert workers rely on (a seeded simulation with known truth: the
// raise and clear of TestEvaluateAlertsRaiseOnceClearOnce).
func TestAlertWorkSplitMatchesEvaluate(t *testing.T) {
	climb, flat := climbThenDrop()
	values := append(append([]float64(nil), climb...), flat...)
	rules := []AlertRule{fullRule(), fullRule()}
	rules[1].Name, rules[1].Threshold, rules[1].Window = "near", 1240, 8

	whole, err := New("vol.used", settings())
	if err != nil {
		t.Fatal(err)
	}
	ref := newAlertRig(t, whole, rules)
	ref.feed(values, 0)

	split, err := New("vol.used", settings())
	if err != nil {
		t.Fatal(err)
	}
	loopEv, _ := alert.NewEvaluator(settings().Horizon, 0)
	workEv, _ := alert.NewEvaluator(settings().Horizon, 0)
	jobs, results := make(chan *AlertWork), make(chan *AlertWork)
	go func() {
		for w := range jobs {
			w.Run(workEv)
			results <- w
		}
		close(results)
	}()
	var events []AlertEvent
	var probs []float64
	simulated := 0
	// The work of close i is simulated while the series applies the next
	// observation (and so closes the next bucket): Run must use what
	// PrepareAlerts captured, not the series' forecast of the moment.
	var inFlight *AlertWork
	finish := func() {
		w := <-results
		var err error
		if events, err = split.FinishAlerts(events, w); err != nil {
			t.Fatal(err)
		}
		probs = append(probs, split.Snapshot().Alerts[0].Probability)
		inFlight = nil
	}
	works := [2]AlertWork{} // alternated, as a pool would hand them out
	for i, v := range values {
		o, err := split.Observe(at(int64(i)), v)
		if err != nil {
			t.Fatal(err)
		}
		if inFlight != nil {
			finish()
		}
		if o == NeedFit {
			if o, err = split.Install(split.FitJob().Run()); err != nil {
				t.Fatal(err)
			}
		}
		if o != Published {
			continue
		}
		w := &works[i%2]
		if err := split.PrepareAlerts(w, rules, loopEv); err != nil {
			t.Fatal(err)
		}
		if w.Pending() > 0 {
			simulated++
		}
		inFlight = w
		jobs <- w
	}
	if inFlight != nil {
		finish()
	}
	close(jobs)
	if simulated < 5 {
		t.Fatalf("%d closes needed a simulation, want at least 5 for the test to mean something", simulated)
	}
	if !reflect.DeepEqual(events, ref.events) {
		t.Errorf("split events %+v\nwhole events %+v", events, ref.events)
	}
	if !reflect.DeepEqual(probs, ref.probs) {
		t.Errorf("probabilities differ:\nsplit %v\nwhole %v", probs, ref.probs)
	}
	if !reflect.DeepEqual(split.Snapshot().Alerts, whole.Snapshot().Alerts) {
		t.Errorf("states %+v, want %+v", split.Snapshot().Alerts, whole.Snapshot().Alerts)
	}
	t.Logf("%d of %d closes simulated on the worker; %d events", simulated, len(probs), len(events))

	// A work not prepared, or prepared on another series, is refused.
	var w AlertWork
	if _, err := split.FinishAlerts(nil, &w); !errors.Is(err, ErrAlertRule) {
		t.Errorf("finish of an unprepared work: %v, want ErrAlertRule", err)
	}
	if err := whole.PrepareAlerts(&w, rules, loopEv); err != nil {
		t.Fatal(err)
	}
	other, _ := New("vol.other", settings())
	if _, err := other.FinishAlerts(nil, &w); !errors.Is(err, ErrAlertRule) {
		t.Errorf("finish on another series: %v, want ErrAlertRule", err)
	}
}
