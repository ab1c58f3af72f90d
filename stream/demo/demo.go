// Package demo is a simulated publisher for `forewarn run --demo`: three
// invented series of a small software company, published on a simulated
// clock that runs thousands of times faster than the wall clock, so that
// fits, forecasts and an alert appear within a minute. The data are
// invented for the demo only.
//
// The scenario:
//
//   - release.downloads: cumulative downloads of a new release (a counter),
//     growing fast after launch and then slowing; the download service
//     restarts once, so the counter resets and forewarn carries the total.
//   - storage.vol1.used_bytes: bytes used on a volume of 1 TB (a gauge),
//     filling steadily; the rule volume-nearly-full is raised when the
//     volume is likely to pass 900 GB within six hours; at 95 % an operator
//     frees space and the rule is cleared.
//   - shop.orders: cumulative orders of the web shop (a counter) with a
//     daily cycle.
//
// Each series first publishes a few days of history in one burst (as if the
// daemon had just been put next to running services), then one observation
// per simulated step.
//
// The daemon prints one line per forecast (ForecastLine) and per alert
// state change (AlertLine) on standard output, plain and lower-case, with
// values and durations written by package humanfmt; the log goes to
// standard error.
package demo

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"strconv"
	"strings"
	"time"

	"github.com/nats-io/nats.go"

	"forewarn/config"
	"forewarn/engine/series"
	"forewarn/stream/humanfmt"
)

// Tick is the simulated time that passes per Interval of wall time.
const (
	Tick     = 5 * time.Minute
	Interval = 100 * time.Millisecond
)

// Capacity of the demo volume, in bytes.
const Capacity = 1e12

// Series returns the series entries of the scenario, to be put in front of
// the configured ones.
func Series() []config.Series {
	return []config.Series{
		{Match: "release.downloads", Kind: "counter", Step: 15 * time.Minute, Horizon: 48,
			Levels: []float64{50, 90}, Window: 600, MinPoints: 60, RefitEvery: 48, Model: "auto", Transform: "auto"},
		{Match: "storage.*.used_bytes", Kind: "gauge", Step: 5 * time.Minute, Horizon: 72,
			Levels: []float64{50, 90}, Window: 600, MinPoints: 60, RefitEvery: 36, Model: "auto", Transform: "none"},
		{Match: "shop.orders", Kind: "counter", Step: time.Hour, Horizon: 24,
			Levels: []float64{50, 90}, Window: 400, MinPoints: 72, RefitEvery: 24, Model: "auto", Transform: "none", Seasons: []config.Cycle{{Length: config.Day}}},
	}
}

// Alerts returns the scenario's alert rule.
func Alerts() []config.Alert {
	above := 0.9 * Capacity
	return []config.Alert{{Name: "volume-nearly-full", Match: "storage.*.used_bytes", Above: &above,
		Within: 6 * time.Hour, Probability: 0.9}}
}

// Limits returns the limits the simulated clock needs: it runs far ahead
// of the wall clock, so observation times are checked against arrival only
// loosely (a century either way).
func Limits(l config.Limits) config.Limits {
	l.MaxFuture = 100 * 8760 * time.Hour
	l.MaxPast = 100 * 8760 * time.Hour
	return l
}

// world is the simulated state of the three services.
type world struct {
	rng       *rand.Rand
	start     time.Time
	downloads float64 // service's own counter (resets on restart)
	used      float64
	orders    float64
	restarted bool
}

// Run publishes the scenario under prefix (e.g. "metrics.") until ctx is
// cancelled. The history burst covers backlog of simulated time before
// the live part starts.
func Run(ctx context.Context, nc *nats.Conn, prefix string) error {
	backlog := 4 * 24 * time.Hour
	w := &world{
		rng:   rand.New(rand.NewPCG(2026, 12)),
		start: time.Date(2026, 11, 2, 0, 0, 0, 0, time.UTC),
		used:  0.62 * Capacity,
	}
	now := w.start
	var burst strings.Builder
	flush := func(subject string) error {
		if burst.Len() == 0 {
			return nil
		}
		err := nc.Publish(subject, []byte("["+burst.String()+"]"))
		burst.Reset()
		return err
	}
	// History in bursts of at most one simulated day per series and message.
	for day := time.Duration(0); day < backlog; day += 24 * time.Hour {
		var lines [3][]string
		for t := now; t.Before(now.Add(24 * time.Hour)); t = t.Add(Tick) {
			for i, v := range w.step(t) {
				lines[i] = append(lines[i], obs(t, v))
			}
		}
		for i, subject := range subjects(prefix) {
			burst.WriteString(strings.Join(lines[i], ","))
			if err := flush(subject); err != nil {
				return fmt.Errorf("demo: publish: %w", err)
			}
		}
		now = now.Add(24 * time.Hour)
	}
	tick := time.NewTicker(Interval)
	defer tick.Stop()
	for {
		select {
		case <-ctx.Done():
			return nil
		case <-tick.C:
		}
		for i, v := range w.step(now) {
			if err := nc.Publish(subjects(prefix)[i], []byte(obs(now, v))); err != nil {
				return fmt.Errorf("demo: publish: %w", err)
			}
		}
		now = now.Add(Tick)
	}
}

func subjects(prefix string) [3]string {
	return [3]string{prefix + "release.downloads", prefix + "storage.vol1.used_bytes", prefix + "shop.orders"}
}

func obs(t time.Time, v float64) string {
	return `{"time":"` + t.Format(time.RFC3339) + `","value":` + strconv.FormatFloat(v, 'f', 0, 64) + `}`
}

// step advances the world by one tick ending at t and returns the three
// published values.
func (w *world) step(t time.Time) [3]float64 {
	hours := t.Sub(w.start).Hours()
	tick := Tick.Hours()
	// Downloads: a logistic adoption curve of 2 million downloads with its
	// midpoint at day 3, plus a daily rhythm; the service restarts at day 4.5.
	rate := 2e6 * logisticSlope(hours, 72, 18) * (1 + 0.35*math.Sin(2*math.Pi*(hours-8)/24))
	w.downloads += math.Max(0, rate*tick*(1+0.1*w.rng.NormFloat64()))
	if !w.restarted && hours >= 108 {
		w.downloads, w.restarted = 0, true
	}
	// Storage: about 2.6 GB an hour with noise, plus a nightly compaction.
	w.used += 2.6e9*tick + 0.4e9*w.rng.NormFloat64()
	if h := math.Mod(hours, 24); h >= 3 && h < 3+tick {
		w.used -= 4e9
	}
	// At 95 % an operator moves old data away.
	if w.used > 0.95*Capacity {
		w.used = 0.7 * Capacity
	}
	// Orders: a daily cycle peaking in the evening.
	perHour := 40 + 35*math.Sin(2*math.Pi*(hours-13)/24)
	w.orders += math.Max(0, perHour*tick+math.Sqrt(perHour*tick)*w.rng.NormFloat64())
	return [3]float64{math.Round(w.downloads), math.Round(w.used), math.Round(w.orders)}
}

// logisticSlope is the derivative per hour of a logistic curve of unit
// height with midpoint mid and time scale s (hours).
func logisticSlope(t, mid, s float64) float64 {
	e := math.Exp(-(t - mid) / s)
	return e / (s * (1 + e) * (1 + e))
}

// TimeLayout is how the demo's lines write a data time (UTC, minutes).
const TimeLayout = "2006-01-02 15:04"

// ForecastLine is the demo's one readable line for a forecast, in this
// shape (values by humanfmt.Value, spans by humanfmt.Offset):
//
//	<origin> forecast <topic> last <value> median <value> at +<span> <level>% band <low> to <high> transform <name> model <label>
//
// The median and the band are those of the last step of the horizon, the
// band the highest level's (the widest); an unbounded band end is "unbounded". The band
// part is left out when the series has no levels. A missing last value is
// "missing".
func ForecastLine(f *series.Forecast) string {
	var b strings.Builder
	fmt.Fprintf(&b, "%s forecast %s last %s", f.Origin.UTC().Format(TimeLayout), f.Topic, value(f.LastValue))
	if n := len(f.Points); n > 0 {
		p := f.Points[n-1]
		span := time.Duration(p.H) * time.Duration(f.StepSeconds) * time.Second
		fmt.Fprintf(&b, " median %s at %s", value(p.Median), humanfmt.Offset(span))
		if w := len(f.Levels) - 1; w >= 0 && len(p.Lower) > w && len(p.Upper) > w {
			fmt.Fprintf(&b, " %s%% band %s to %s", strconv.FormatFloat(f.Levels[w], 'f', -1, 64), bound(p.Lower[w]), bound(p.Upper[w]))
		}
	}
	fmt.Fprintf(&b, " transform %s model %s", f.Model.Transform, f.Model.Spec)
	return b.String()
}

// AlertLine is the demo's one readable line for an alert state change, in
// this shape (the states are ITU-T X.733's):
//
//	<origin> alert <topic> <rule> raised|cleared p=<probability> above|below <threshold> within <window> eta +<span>|none
//
// p is the chance of crossing within the window, to two decimals; eta is
// when the median forecast is first beyond the threshold, relative to the
// origin, or none when it stays on this side over the horizon.
func AlertLine(e *series.AlertEvent) string {
	state := "cleared"
	if e.Raised {
		state = "raised"
	}
	eta := "none"
	if e.HasETA {
		eta = humanfmt.Offset(e.ETA.Sub(e.Origin))
	}
	return fmt.Sprintf("%s alert %s %s %s p=%.2f %s %s within %s eta %s",
		e.Origin.UTC().Format(TimeLayout), e.Topic, e.Rule, state, e.Probability, e.Direction,
		value(e.Threshold), humanfmt.Duration(time.Duration(e.WithinSeconds)*time.Second), eta)
}

func bound(b series.Bound) string {
	if !b.OK {
		return "unbounded"
	}
	return value(b.Value)
}

func value(v float64) string {
	if math.IsNaN(v) {
		return "missing"
	}
	return humanfmt.Value(v)
}
