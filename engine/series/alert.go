package series

import (
	"errors"
	"fmt"

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
//     filter (arima.Filter.PathSystem; nil ps: no simulation possible). A
//     counter takes the exact marginal at the window's end;
//   - the simulation seed is a hash of the topic, the rule name and the
//     forecast origin (data time), so the same input gives the same
//     probability whatever the order or the moment of the evaluation;
//   - the hysteresis (alert.Next) steps on the estimate; since the
//     decision interval holds it, the step agrees with Decide's decision.
//
// ev and ps are the caller's workspaces (one per goroutine); with them
// grown, EvaluateAlerts does not allocate unless a rule changes state or
// fails. A rule that cannot be evaluated keeps its state and its error,
// naming the rule, is joined into err; the other rules are still
// evaluated.
func (s *Series) EvaluateAlerts(dst []AlertEvent, rules []AlertRule, ev *alert.Evaluator, ps *arima.PathSystem) ([]AlertEvent, error) {
	if s.filter == nil {
		return dst, fmt.Errorf("%w: %q", ErrNoForecast, s.snap.Topic)
	}
	if s.mf.End != s.snap.WindowEnd {
		return dst, fmt.Errorf("%w: %q: forecast from bucket %d, window ends at %d (refit pending)",
			ErrNoForecast, s.snap.Topic, s.mf.End, s.snap.WindowEnd)
	}
	var errs []error
	var ss *alert.StateSpace
	filled := false
	gauge := s.set.Kind == "gauge"
	origin := s.mf.Origin()
	for i := range rules {
		r := &rules[i]
		if r.Window < 1 || r.Window > s.set.Horizon {
			errs = append(errs, fmt.Errorf("%w: rule %q: window %d steps, horizon %d", ErrAlertRule, r.Name, r.Window, s.set.Horizon))
			continue
		}
		lv := alert.Rule{Raise: r.Raise, Clear: r.Clear}.WithDefaults()
		if err := lv.Validate(); err != nil {
			errs = append(errs, fmt.Errorf("%w: rule %q: %w", ErrAlertRule, r.Name, err))
			continue
		}
		st := s.alertState(r.Name) // nil: first evaluation, cleared
		lv.Current = alert.StateOf(st != nil && st.Raised)
		var est alert.Estimate
		c, dir, exact, p := s.modelThreshold(r)
		if exact {
			est.P = p
		} else {
			if gauge && r.Window > 1 && !filled && ps != nil {
				filled = true
				if err := s.filter.PathSystem(ps); err == nil {
					ss = (*alert.StateSpace)(ps)
				}
			}
			q := alert.Query{
				Mean: s.mf.Mean, Variance: s.mf.Variance, Threshold: c, Direction: dir,
				Window: r.Window, Monotone: !gauge, Seed: alertSeed(s.snap.Topic, r.Name, origin.Unix()),
			}
			var err error
			if est, err = ev.Decide(&q, ss, lv); err != nil {
				errs = append(errs, fmt.Errorf("series: alert rule %q on %q: %w", r.Name, s.snap.Topic, err))
				continue
			}
		}
		if st == nil {
			s.snap.Alerts = append(s.snap.Alerts, AlertSnapshot{Rule: r.Name})
			st = &s.snap.Alerts[len(s.snap.Alerts)-1]
		}
		raised, changed := alert.Next(st.Raised, est.P, lv)
		st.Probability = est.P
		if !changed {
			continue
		}
		st.Raised, st.Since = raised, s.mf.End
		e := AlertEvent{
			Topic: s.snap.Topic, Rule: r.Name, Raised: raised, Direction: "below", Threshold: r.Threshold,
			Probability: est.P, StdErr: est.StdErr, WithinSeconds: r.WithinSeconds, Origin: origin,
		}
		if r.Above {
			e.Direction = "above"
		}
		if est.Eta > 0 {
			e.ETA, e.HasETA = s.mf.TimeAt(est.Eta), true
		}
		dst = append(dst, e)
	}
	return dst, errors.Join(errs...)
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
