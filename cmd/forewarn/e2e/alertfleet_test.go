package e2e

import (
	"bufio"
	"fmt"
	"math/rand/v2"
	"net/http"
	"strconv"
	"strings"
	"testing"
	"time"
)

// TestAlertFleetNearThreshold is issue 14's end-to-end acceptance: 200
// storage gauges near the threshold of a 2-hour rule (step 1 min, so 120
// steps, the costly case of the issue) through the built binary, stopped
// with SIGTERM halfway and started again. Data (invented, seeded): per
// series a random walk x_t = x_{t−1} + μ_t + ε_t from 1000, ε standard
// normal, μ = +0.2 for 70 buckets (the volume fills toward 1015) and then
// −2 for 30 (cleaned up). For a driftless walk with unit steps the chance
// of passing 1015 within 120 steps from x is about 2·Q((1015 − x)/√120)
// (reflection principle, common practice): 0.17 at the start, in the
// middle range while the series climb, so nearly every close needs a
// simulation (checked on /metrics), and near 0 after the drop.
//
// Checked: the stop takes at most 5 s (issue 14's bound, measured); per
// series the alerts alternate raised, cleared, … starting with raised
// (once each: no repeat after the restart), each raised one with
// probability ≥ 0.9 and each cleared one below the clear level 0.45, and
// every series that was raised ends cleared; at least a fifth of the
// series are raised (they are near their threshold for real).
func TestAlertFleetNearThreshold(t *testing.T) {
	t.Parallel()
	const nSeries, n, half = 200, 100, 50
	const step = time.Minute
	cfg := baseConfig(nSeries+10) + `series:
  - match: "fleet.>"
    kind: gauge
    step: 1m
    horizon: 120
    levels: [90]
    window: 300
    min_points: 30
    refit_every: 1000
    model: ` + fixedModel("0,1,0") + `
    transform: none
alerts:
  - {name: fill, match: "fleet.>", above: 1015, within: 2h, probability: 0.9}
`
	values := make([][]float64, nSeries)
	for i := range values {
		rng := rand.New(rand.NewPCG(uint64(i), 14))
		x, v := 1000.0, make([]float64, n)
		for b := range v {
			mu := 0.2
			if b >= 70 {
				mu = -2
			}
			x += mu + rng.NormFloat64()
			v[b] = x
		}
		values[i] = v
	}
	topic := func(i int) string { return fmt.Sprintf("fleet.vol%03d.used", i) }

	d := newDaemon(t, external, cfg)
	nc, c, p := session(t, d)
	publishAll := func(from, to int) {
		for b := from; b < to; b++ {
			for i := range nSeries {
				p.must("metrics."+topic(i), obsJSON(t0.Add(time.Duration(b)*step), values[i][b]))
			}
		}
	}
	publishAll(0, half)
	simulated := metricValue(t, d.httpAddr, `forewarn_alert_evaluations_total{method="simulation"}`)
	start := time.Now()
	d.stop()
	stop := time.Since(start)
	t.Logf("first half: %v evaluations simulated before the stop; SIGTERM to exit %v", simulated, stop.Round(time.Millisecond))
	if stop > 5*time.Second {
		t.Errorf("stop took %v, want at most 5 s (issue 14)", stop)
	}

	d.start()
	waitConnected(t, nc)
	publishAll(half, n)
	waitConsumed(t, nc, 3*time.Minute)
	simulated += metricValue(t, d.httpAddr, `forewarn_alert_evaluations_total{method="simulation"}`)
	d.stop()
	if err := nc.Flush(); err != nil {
		t.Fatal(err)
	}

	closes := nSeries * (n - 30) // forecasts from the first fit at bucket 30 on
	if simulated < float64(closes)/2 {
		t.Errorf("%v of about %d evaluations simulated: the series are not near their threshold", simulated, closes)
	}
	raisedSeries, events := 0, 0
	for i := range nSeries {
		as := alertsOf(t, c, topic(i))
		events += len(as)
		for k, a := range as {
			want := alertRaised
			if k%2 == 1 {
				want = alertCleared
			}
			if a.State != want || a.Rule != "fill" || a.Threshold != 1015 {
				t.Errorf("%s: alert %d is %s of %q at %v, want %s of \"fill\" at 1015 (alternating, starting raised): %+v",
					topic(i), k, a.State, a.Rule, a.Threshold, want, as)
				break
			}
			if (want == alertRaised && a.Probability < 0.9) || (want == alertCleared && a.Probability >= 0.45) {
				t.Errorf("%s: %s with probability %g", topic(i), a.State, a.Probability)
			}
		}
		if len(as) > 0 {
			raisedSeries++
			if as[len(as)-1].State != alertCleared {
				t.Errorf("%s: last alert %s after the drop to %.0f, want %s", topic(i), as[len(as)-1].State, values[i][n-1], alertCleared)
			}
		}
	}
	if raisedSeries < nSeries/5 {
		t.Errorf("%d of %d series raised: the data should bring many near and past the threshold", raisedSeries, nSeries)
	}
	t.Logf("%d series raised, %d alert messages, %v evaluations simulated", raisedSeries, events, simulated)
}

// metricValue reads one sample (name with its labels, as written in the
// OpenMetrics text) from the daemon's /metrics.
func metricValue(t *testing.T, httpAddr, sample string) float64 {
	t.Helper()
	resp, err := http.Get("http://" + httpAddr + "/metrics")
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	sc := bufio.NewScanner(resp.Body)
	for sc.Scan() {
		if v, ok := strings.CutPrefix(sc.Text(), sample+" "); ok {
			f, err := strconv.ParseFloat(strings.Fields(v)[0], 64)
			if err != nil {
				t.Fatalf("/metrics: %s: %v", sc.Text(), err)
			}
			return f
		}
	}
	t.Fatalf("/metrics has no sample %s", sample)
	return 0
}
