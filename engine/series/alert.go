package series

import (
	"errors"
	"fmt"
	"math"
	"time"

	"forewarn/engine/alert"
	"forewarn/engine/arima"
	"forewarn/engine/transform"
)

// AlertRule is one alert rule as it applies to one series, in raw units:
// the condition is value > Threshold (Above) or value < Threshold, within
// Window steps after the forecast origin.
type AlertRule struct {
	Name          string
	Threshold     float64 // raw units
	Above         bool    // true: "above"; false: "below"
	Window        int     // steps looked ahead, 1 ≤ Window ≤ Settings.Horizon
	WithinSeconds int64   // the window as configured, for the message
	Raise, Clear  float64 // hysteresis levels, 0 < Clear < Raise ≤ 1 (Clear 0: Raise/2)
}

// EvaluateAlerts updates the state of every rule from the latest forecast
// and appends to dst an AlertEvent for each rule whose state changed
// (raised or cleared), in the order of rules. Call it after an outcome
// Published, before the next observation. The states live in the series'
// record (Snapshot.Alerts, by rule name), so a restored series carries on
// where it was: a raised rule is not raised again.
//
// Per rule, on the model scale of the series' transform (package alert,
// Scale):
//   - the raw threshold x maps to c = Forward(x), and "above" stays above
//     under an increasing transform and becomes "below" under a decreasing
//     one (the transform is monotone, so {X > x} = {W > c} or {W < c});
//   - a threshold outside the transform's domain (x ≤ 0 under log or
//     Box–Cox) lies below every value the series can take, and one beyond
//     the largest value it can represent (scaled-exp overflow) above every
//     value on the side the transform's direction gives: p is then 0 or 1
//     exactly;
//   - a gauge is decided by alert.Evaluator.Decide with the rule's current
//     state (alert.Rule.Current), so only the level that can change it is
//     tested, and paths are drawn from ps, filled once per call from the
//     filter (arima.Filter.PathSystem; nil ps: no simulation possible),
//     until the levels are decided, then fresh paths for the published
//     estimate (standard error alert.PrecisionSE near 0, that of
//     alert.PrecisionN draws elsewhere), because the probability is
//     published, not only compared. A
//     counter takes the exact marginal at the window's end;
//   - the simulation seed is a hash of the topic, the rule name and the
//     forecast origin (data time), so the same input gives the same
//     probability whatever the order or the moment of the evaluation;
//   - the hysteresis (alert.Next) steps on the estimate; since the
//     decision interval holds it, the step agrees with Decide's decision.
//
// EvaluateAlerts is PrepareAlerts, AlertWork.Run and FinishAlerts on one
// goroutine, with a workspace the series keeps. ev and ps are the
// caller's workspaces (one per goroutine); with them grown, EvaluateAlerts
// does not allocate unless a rule changes state or fails. A rule that
// cannot be evaluated keeps its state and its error, naming the rule, is
// joined into err; the other rules are still evaluated.
func (s *Series) EvaluateAlerts(dst []AlertEvent, rules []AlertRule, ev *alert.Evaluator, ps *arima.PathSystem) ([]AlertEvent, error) {
	w := &s.work
	w.ps, w.noPS = ps, ps == nil
	if err := s.PrepareAlerts(w, rules, ev); err != nil {
		return dst, err
	}
	if w.Pending() > 0 {
		w.Run(ev)
	}
	return s.FinishAlerts(dst, w)
}

// AlertWork is one bucket close's evaluation of a series' alert rules,
// split so that its costly part can run on another goroutine:
//
//   - PrepareAlerts, on the series' goroutine right after the close,
//     captures what the evaluation needs (the forecast's means and
//     variances, the filter's path system, each rule's model-scale
//     threshold, seed, levels and current state) and answers every rule
//     that the cheap screens decide (exact, marginal, skip bound, bracket);
//   - Run, on any goroutine, simulates the rules left (Pending), touching
//     only the work and the evaluator it is given;
//   - FinishAlerts, back on the series' goroutine, steps the hysteresis of
//     every rule in rule order and returns the events.
//
// The result is the same whatever goroutine runs Run and whenever: the
// inputs are fixed at PrepareAlerts and the seed is a function of data
// only. The rule states read at PrepareAlerts (alert.Rule.Current) must be
// the ones FinishAlerts steps, so a series' next PrepareAlerts must come
// after FinishAlerts of the previous one. A zero AlertWork is ready for
// use and is reused: its buffers grow to the largest horizon and state
// dimension seen.
type AlertWork struct {
	rules          []AlertRule
	items          []alertItem
	mean, variance []float64 // copies of the forecast's, for Run
	offset         []float64 // the regression part of mean (models with regressors), for Run
	own            arima.PathSystem
	ps             *arima.PathSystem // &own unless EvaluateAlerts lends one
	noPS           bool              // EvaluateAlerts was given no path system
	hasPS          bool              // ps holds the filter's path system
	topic          string
	end, step      int64 // forecast origin bucket and step, for times
	pending        int
	prepared       bool
}

// alertItem is one rule of an AlertWork.
type alertItem struct {
	q    alert.Query
	v    []float64 // the calibrated variances (calibration on), kept between calls
	f    []float64 // the calibration factor per step (calibration on), kept between calls
	cal  bool      // v and f are in use
	lv   alert.Rule
	est  alert.Estimate
	err  error
	sim  bool // Run must simulate it
	done bool // est (or err) is the answer
}

// Pending is the number of rules whose answer needs a simulation (Run).
func (w *AlertWork) Pending() int { return w.pending }

// Len is the number of rules of the work.
func (w *AlertWork) Len() int { return len(w.items) }

// Method says how rule i's probability was obtained (MethodNone for a
// rule that failed or whose threshold lies outside the transform's range,
// where p is exact); valid after Run.
func (w *AlertWork) Method(i int) alert.Method { return w.items[i].est.Method }

// Failed reports whether rule i could not be evaluated (FinishAlerts
// returns its error).
func (w *AlertWork) Failed(i int) bool { return w.items[i].err != nil }

// Paths is the number of paths drawn for rule i (0 without simulation).
func (w *AlertWork) Paths(i int) int { return w.items[i].est.Paths }

// Undecided reports whether rule i's simulation ran out of paths before
// its decision was known (the estimate is used anyway).
func (w *AlertWork) Undecided(i int) bool {
	it := &w.items[i]
	return it.sim && it.err == nil && it.est.Decision == alert.Undecided
}

// Rule returns the name of rule i.
func (w *AlertWork) Rule(i int) string { return w.rules[i].Name }

// Bucket is the bucket index of the forecast origin the work evaluates.
func (w *AlertWork) Bucket() int64 { return w.end }

// PrepareAlerts starts the evaluation of rules on the latest forecast into
// w (see AlertWork): it fails, with nothing prepared, when the series has
// no forecast of its latest closed bucket. ev is the caller's evaluator;
// it runs only the screens here. rules must not change until FinishAlerts.
func (s *Series) PrepareAlerts(w *AlertWork, rules []AlertRule, ev *alert.Evaluator) error {
	w.prepared = false
	if s.filter == nil {
		return fmt.Errorf("%w: %q", ErrNoForecast, s.snap.Topic)
	}
	if s.mf.End != s.snap.WindowEnd {
		return fmt.Errorf("%w: %q: forecast from bucket %d, window ends at %d (refit pending)",
			ErrNoForecast, s.snap.Topic, s.mf.End, s.snap.WindowEnd)
	}
	if w.ps == nil && !w.noPS {
		w.ps = &w.own
	}
	w.rules, w.topic, w.end, w.step = rules, s.snap.Topic, s.mf.End, s.mf.StepSeconds
	w.pending, w.hasPS = 0, false
	if cap(w.items) < len(rules) {
		w.items = make([]alertItem, len(rules))
	}
	w.items = w.items[:len(rules)]
	gauge := s.set.Kind == "gauge"
	origin := s.mf.Origin()
	for i := range rules {
		r, it := &rules[i], &w.items[i]
		*it = alertItem{v: it.v[:0], f: it.f[:0]}
		if r.Window < 1 || r.Window > s.set.Horizon {
			it.err = fmt.Errorf("%w: rule %q: window %d steps, horizon %d", ErrAlertRule, r.Name, r.Window, s.set.Horizon)
			continue
		}
		// The probability is published (Snapshot, alert messages), so the
		// simulation must make it precise, not only decide the levels.
		lv := alert.Rule{Raise: r.Raise, Clear: r.Clear, Precision: alert.PrecisionSE, PrecisionDraws: alert.PrecisionN}.WithDefaults()
		if err := lv.Validate(); err != nil {
			it.err = fmt.Errorf("%w: rule %q: %w", ErrAlertRule, r.Name, err)
			continue
		}
		st := s.alertState(r.Name) // nil: first evaluation, cleared
		lv.Current = alert.StateOf(st != nil && st.Raised)
		it.lv = lv
		c, dir, exact, p := s.modelThreshold(r)
		if exact {
			it.est.P, it.done = p, true
			continue
		}
		it.q = alert.Query{
			Mean: s.mf.Mean, Variance: s.mf.Variance, Threshold: c, Direction: dir,
			Window: r.Window, Monotone: !gauge, Seed: alertSeed(s.snap.Topic, r.Name, origin.Unix()),
		}
		if s.cal != nil {
			// The calibrated spread, step by step: step j's error times
			// f_j, its calibration factor (alertFactor), so that its
			// variance is f_j² times the model's and the paths keep the
			// model's correlation.
			for j, v := range s.mf.Variance {
				f := s.alertFactor(j + 1)
				it.f = append(it.f, f)
				it.v = append(it.v, v*f*f)
			}
			it.q.Variance, it.q.Scale, it.cal = it.v, it.f, true
		}
		est, done, err := ev.Screen(&it.q, lv)
		if done {
			it.est, it.done = est, true
			if err != nil {
				it.err = fmt.Errorf("series: alert rule %q on %q: %w", r.Name, s.snap.Topic, err)
			}
			continue
		}
		// Only a gauge over more than one step gets here. Without a path
		// system Run reports ErrNoStateSpace for the rule, as Decide does.
		if !w.hasPS && w.ps != nil {
			if err := s.filter.PathSystem(w.ps); err == nil {
				w.hasPS = true
			}
		}
		it.sim = true
		w.pending++
	}
	if w.pending > 0 {
		// Run may happen on another goroutine after the series moved on:
		// it works on copies (a calibrated item's variances are its own).
		w.mean = append(w.mean[:0], s.mf.Mean...)
		w.variance = append(w.variance[:0], s.mf.Variance...)
		var off []float64
		if s.design != nil {
			// the path system describes y − xᵀβ
			w.offset = append(w.offset[:0], s.mf.Mean...)
			s.filter.RegressionMean(w.offset)
			off = w.offset
		}
		for i := range w.items {
			if it := &w.items[i]; it.sim {
				it.q.Mean = w.mean
				it.q.Offset = off
				if !it.cal {
					it.q.Variance = w.variance
				}
			}
		}
	}
	w.prepared = true
	return nil
}

// Run simulates the rules PrepareAlerts left (Pending) with ev, which must
// belong to the calling goroutine. It touches only w and ev.
func (w *AlertWork) Run(ev *alert.Evaluator) {
	var ss *alert.StateSpace
	if w.hasPS {
		ss = (*alert.StateSpace)(w.ps)
	}
	for i := range w.items {
		it := &w.items[i]
		if !it.sim || it.done {
			continue
		}
		// A calibrated item's Query.Scale widens the paths of the
		// model's state space step by step (alert.Query.Scale).
		est, err := ev.Decide(&it.q, ss, it.lv)
		it.est, it.done = est, true
		if err != nil {
			it.err = fmt.Errorf("series: alert rule %q on %q: %w", w.rules[i].Name, w.topic, err)
		}
	}
	w.pending = 0
}

// FinishAlerts steps the hysteresis of every rule of w, prepared on this
// series and run, in rule order, records the states in the series' record
// and appends an AlertEvent to dst for each rule whose state changed (see
// EvaluateAlerts). The errors of the rules that could not be evaluated
// are joined into err; those rules keep their state.
func (s *Series) FinishAlerts(dst []AlertEvent, w *AlertWork) ([]AlertEvent, error) {
	if !w.prepared || w.topic != s.snap.Topic || w.pending > 0 {
		return dst, fmt.Errorf("%w: %q: alert work not prepared on this series or not run", ErrAlertRule, s.snap.Topic)
	}
	w.prepared = false
	var errs []error
	origin := time.Unix(w.end*w.step, 0).UTC()
	for i := range w.items {
		it, r := &w.items[i], &w.rules[i]
		if it.err != nil {
			errs = append(errs, it.err)
			continue
		}
		st := s.alertState(r.Name)
		if st == nil {
			s.snap.Alerts = append(s.snap.Alerts, AlertSnapshot{Rule: r.Name})
			st = &s.snap.Alerts[len(s.snap.Alerts)-1]
		}
		est := &it.est
		raised, changed := alert.Next(st.Raised, est.P, it.lv)
		st.Probability = est.P
		if !changed {
			continue
		}
		st.Raised, st.Since = raised, w.end
		e := AlertEvent{
			Topic: s.snap.Topic, Rule: r.Name, Raised: raised, Direction: "below", Threshold: r.Threshold,
			Probability: est.P, StdErr: est.StdErr, WithinSeconds: r.WithinSeconds, Origin: origin,
		}
		if r.Above {
			e.Direction = "above"
		}
		if est.Eta > 0 {
			e.ETA, e.HasETA = time.Unix((w.end+int64(est.Eta))*w.step, 0).UTC(), true
		}
		dst = append(dst, e)
	}
	return dst, errors.Join(errs...)
}

// alertFactor is the calibration factor of the spread at step k of a
// rule's window: Factor(k, L) of the calibrator, L the widest level, or 1
// without calibration. A rule's probability is a tail probability, which
// the widest band calibrates most closely. Each step's error is widened
// by its own factor, so the marginal at every step is the calibrated
// band's and the paths keep the model's correlation. A non-positive or
// non-finite factor (a threshold at 0) counts as 1.
func (s *Series) alertFactor(k int) float64 {
	if s.cal == nil {
		return 1
	}
	f := s.cal.Factor(k, len(s.set.Levels)-1)
	if !(f > 0) || math.IsInf(f, 0) {
		return 1
	}
	return f
}

// modelThreshold maps a rule's raw threshold onto the model scale: the
// threshold c and the direction there, or, when the threshold lies outside
// what the transform can take, the exact probability p (exact true).
func (s *Series) modelThreshold(r *AlertRule) (c float64, dir alert.Direction, exact bool, p float64) {
	inc := s.tr.Increasing()
	c, err := s.tr.Forward(r.Threshold)
	switch {
	case err == nil:
		// A decreasing transform turns {X > x} into {W < c}.
		dir = alert.Below
		if r.Above == inc {
			dir = alert.Above
		}
		return c, dir, false, 0
	case errors.Is(err, transform.ErrOverflow):
		// Beyond the largest representable value on the side the
		// transform's direction points to: above every value when
		// increasing, below every value when decreasing.
		if r.Above != inc {
			p = 1
		}
	default:
		// Outside the domain (x ≤ 0 under log or Box–Cox, whose values are
		// positive): every value is above it.
		if r.Above {
			p = 1
		}
	}
	return 0, 0, true, p
}

// alertState returns the state of the named rule, nil before its first
// successful evaluation.
func (s *Series) alertState(name string) *AlertSnapshot {
	a := s.snap.Alerts
	for i := range a {
		if a[i].Rule == name {
			return &a[i]
		}
	}
	return nil
}

// alertSeed derives the simulation seed of one rule evaluation from data
// only: FNV-1a (64 bit) of the topic, a zero byte, the rule name and the
// origin's Unix seconds (8 bytes, little-endian), the seed the daemon used
// before this moved here (computed inline: no hash.Hash allocation).
func alertSeed(topic, rule string, origin int64) uint64 {
	const offset, prime = 14695981039346656037, 1099511628211
	h := uint64(offset)
	for i := 0; i < len(topic); i++ {
		h = (h ^ uint64(topic[i])) * prime
	}
	h *= prime // the zero byte
	for i := 0; i < len(rule); i++ {
		h = (h ^ uint64(rule[i])) * prime
	}
	u := uint64(origin)
	for i := 0; i < 8; i++ {
		h = (h ^ (u >> (8 * i) & 0xff)) * prime
	}
	return h
}
