package e2e

import (
	"reflect"
	"testing"
	"time"
)

// restartConfig: one series with a fixed model, so that every forecast is
// a function of the data alone (CONTRACT.md §2: deterministic in data time).
func restartConfig() string {
	return baseConfig(100) + `series:
  - match: "air.>"
    kind: gauge
    step: 1h
    horizon: 12
    levels: [80, 95]
    window: 120
    min_points: 24
    refit_every: 6
    model: ` + fixedModel("1,1,1") + `
    transform: none
    calibrate: false
`
}

// restartConfig leaves calibration off: a record keeps the calibrator's
// fixed state but not the forecasts still pending (29 KB at horizon 60),
// so calibrated bands after a restart differ from an uninterrupted run's
// by at most h·η·max(α, 1 − α) in the multiplier at horizon h, until the
// forecasts issued before the restart have resolved (engine/calibrate;
// state.TestRestartContinuesCalibrator). Everything else is bit-exact.

// publishRange publishes values[from:to] of topic, one observation a
// bucket, bucket i at t0 + i·step.
func publishRange(p *publisher, topic string, step time.Duration, values []float64, from, to int) {
	for i := from; i < to; i++ {
		p.must("metrics."+topic, obsJSON(t0.Add(time.Duration(i)*step), values[i]))
	}
}

// waitOrigin waits for the forecast of topic whose origin is bucket k.
func waitOrigin(t *testing.T, c *collector, topic string, step time.Duration, k int, timeout time.Duration) {
	t.Helper()
	want := t0.Add(time.Duration(k) * step)
	eventually(t, timeout, "forecast of "+topic+" at origin "+want.Format(time.RFC3339), func() bool {
		for _, m := range c.get("forecast", "forewarn.forecast."+topic) {
			if decodeForecast(t, m.Data).Origin.Equal(want) {
				return true
			}
		}
		return false
	})
}

// TestRestartEqualsUninterrupted is issue 4's restart acceptance: stop the
// daemon with SIGTERM halfway through an open-data series, start it again
// with the same --data, keep publishing; every forecast is identical, field
// for field except "issued", to an uninterrupted run's at the same origin.
// Data: R's datasets::AirPassengers (Box & Jenkins 1976, Series G), 144
// monthly totals mapped onto an hourly step.
func TestRestartEqualsUninterrupted(t *testing.T) {
	values := readDataset(t, "AirPassengers.csv")
	const topic = "air.passengers"
	const step = time.Hour
	n := len(values)
	half := n / 2
	for _, mode := range []busMode{external, embedded} {
		t.Run(mode.String(), func(t *testing.T) {
			t.Parallel()
			// Uninterrupted run.
			want := uninterrupted(t, mode, restartConfig(), topic, step, values)
			// Forecasts start once min_points buckets have closed: buckets
			// 0..n-2 close, so origins 23..n-2.
			if len(want) != n-1-23 {
				t.Errorf("uninterrupted run: %d forecast origins, want %d (min_points 24, %d buckets closed)", len(want), n-1-23, n-1)
			}

			// Interrupted run: SIGTERM after the first half.
			b := newDaemon(t, mode, restartConfig())
			bnc, bc, bp := session(t, b)
			publishRange(bp, topic, step, values, 0, half)
			waitOrigin(t, bc, topic, step, half-2, 60*time.Second)
			before := bc.count("forecast", "forewarn.forecast."+topic)
			b.stop()
			b.start()
			waitConnected(t, bnc)
			publishRange(bp, topic, step, values, half, n)
			waitOrigin(t, bc, topic, step, n-2, 60*time.Second)
			b.stop()

			all := bc.get("forecast", "forewarn.forecast."+topic)
			seen, _ := forecastsByOrigin(t, all, onceEach) // SIGTERM: no origin twice
			after := all[before:]
			if len(after) == 0 {
				t.Fatal("no forecast after the restart")
			}
			for _, m := range after {
				f := decodeForecast(t, m.Data)
				w, ok := want[f.Origin]
				if !ok {
					t.Errorf("origin %s after the restart: the uninterrupted run has no forecast there", f.Origin.Format(time.RFC3339))
					continue
				}
				got, exp := normalized(t, m.Data, "issued"), normalized(t, w, "issued")
				if !reflect.DeepEqual(got, exp) {
					t.Errorf("origin %s after the restart differs from the uninterrupted run:\n got %s\nwant %s",
						f.Origin.Format(time.RFC3339), m.Data, w)
				}
			}
			if got := len(seen); got != len(want) {
				t.Errorf("interrupted run: %d origins, uninterrupted %d", got, len(want))
			}
		})
	}
}

// uninterrupted publishes values (one a bucket) to a new daemon, waits for
// the forecast at the last closed bucket, stops the daemon and returns the
// forecasts of topic by origin; an origin published twice fails the test.
func uninterrupted(t *testing.T, mode busMode, cfg, topic string, step time.Duration, values []float64) map[time.Time][]byte {
	t.Helper()
	d := newDaemon(t, mode, cfg)
	_, c, p := session(t, d)
	publishRange(p, topic, step, values, 0, len(values))
	waitOrigin(t, c, topic, step, len(values)-2, 60*time.Second)
	d.stop()
	fs, _ := forecastsByOrigin(t, c.get("forecast", "forewarn.forecast."+topic), onceEach)
	return fs
}
