package e2e

import (
	"math"
	"math/rand/v2"
	"strconv"
	"strings"
	"testing"
	"time"
)

// robustConfig: seasonal series with a cycle of 90.5 one-minute steps (not
// whole, so the refit gives it Fourier pairs from the data's own clock),
// one fit after 300 buckets and no refit after it, the model's own bands
// (calibrate off) so that the h = 1 band gives the model's one-step sd, and
// the online check on (outliers: true, the default).
func robustConfig() string {
	return baseConfig(100) + `series:
  - match: "robust.>"
    kind: gauge
    step: 1m
    horizon: 30
    levels: [95]
    window: 600
    min_points: 300
    refit_every: 100000
    seasons: [90.5m]
    transform: none
    calibrate: false
`
}

// robustValues is the seeded truth: 100 + 6 sin(2πφ) + 3 cos(4πφ) + AR(1)
// noise (φ₁ = 0.5, unit innovations), φ the phase of the bucket's data time
// in the 90.5-minute cycle.
func robustValues(n int, walk bool) []float64 {
	r := rand.New(rand.NewPCG(12, 2026))
	const cycle = 5430.0
	y := make([]float64, n)
	u := 0.0
	for i := range y {
		ts := float64(t0.Add(time.Duration(i) * time.Minute).Unix())
		ph := math.Mod(ts, cycle) / cycle
		if walk {
			u += r.NormFloat64()
		} else {
			u = 0.5*u + r.NormFloat64()
		}
		y[i] = 100 + 6*math.Sin(2*math.Pi*ph) + 3*math.Cos(4*math.Pi*ph) + u
	}
	return y
}

// publishBatches publishes values[from:to] of topic as arrays of up to 100
// observations, bucket i at t0 + i minutes.
func publishBatches(p *publisher, topic string, values []float64, from, to int) {
	for i := from; i < to; i += 100 {
		var parts []string
		for k := i; k < min(i+100, to); k++ {
			parts = append(parts, string(obsJSON(t0.Add(time.Duration(k)*time.Minute), values[k])))
		}
		p.must("metrics."+topic, []byte("["+strings.Join(parts, ",")+"]"))
	}
}

// forecastAt returns the forecast of topic at origin bucket k.
func forecastAt(t *testing.T, c *collector, topic string, k int) forecast {
	t.Helper()
	want := t0.Add(time.Duration(k) * time.Minute)
	for _, m := range c.get("forecast", "forewarn.forecast."+topic) {
		if f := decodeForecast(t, m.Data); f.Origin.Equal(want) {
			return f
		}
	}
	t.Fatalf("no forecast of %s at origin %d", topic, k)
	return forecast{}
}

// TestRobustSpikeAndShiftEndToEnd is issue 12's robustness acceptance
// through the daemon, on two seeded seasonal series (90.5-minute cycle,
// one-minute step): a stationary one (AR(1) noise around the seasonal
// mean) and one whose level wanders (a random walk plus the cycle). Each
// runs as four topics: clean; with a single spike of 20σ at bucket 400;
// with that bucket missing; with a level shift of 5σ from bucket 400 on. σ
// is the model's one-step innovation sd (the h = 1 band's half-width over
// the normal quantile, from the clean topic's forecast before the change).
//
//   - Spike: the bucket is taken as an additive outlier (the message's
//     last_bucket says so), never as a level shift. A value after it
//     that is beyond 1.5 on the spike's scale and of its sign joins the
//     spike's run while the check tells a spike from a shift (at most
//     Run − 1 = 2 buckets); the forecasts take it as an ordinary value
//     meanwhile, and for good once the run is called a spike or breaks
//     (engine/arima TestGuardRetractsRun). So from the origin after the
//     spike on the spiked topic's forecasts equal those of the topic
//     without the spike's bucket, within 1e-6 relative (asserted).
//     Against the clean topic the forecasts at the spike's origin differ
//     by what that bucket's ordinary value would have told the filter:
//     its innovation e_t times the gain, which for the wandering series
//     (ARIMA(1,1,0): the level moves by the whole innovation) is about
//     |e_t| itself, here 1.08σ, so no rule that keeps a spike out can
//     meet 1σ there. Asserted below 1σ: every origin of the stationary
//     series, and every origin after the spike's of both series (the
//     AR(1) state is pinned again by the values observed since).
//   - Shift: a bucket is taken as a level shift, and from bucket follow of
//     the new level on every forecast is within 1σ_h of the clean topic's
//     plus 5σ, σ_h its own forecast sd (the band over the normal
//     quantile; engine/arima TestGuardLevelShift's yardstick). The
//     wandering series follows within 5 buckets. The stationary series'
//     long-horizon forecasts are its mean, which a handful of values pins
//     down only to about 0.8σ (AR(1) with φ = 0.5: long-run variance 4σ²);
//     its forecasts are within 1.1σ_h from bucket 5 and within 1σ_h from
//     bucket 8 (asserted), short of the 5.
func TestRobustSpikeAndShiftEndToEnd(t *testing.T) {
	for _, c := range []struct {
		name    string
		walk    bool
		follow  int  // the bucket of the new level from which the forecasts have followed it
		spike1σ bool // the spike moves the forecasts by less than 1σ against the clean topic at every origin
	}{
		{"stationary", false, 8, true},
		{"walk", true, 5, false},
	} {
		t.Run(c.name, func(t *testing.T) { robustRun(t, c.name, c.walk, c.follow, c.spike1σ) })
	}
}

func robustRun(t *testing.T, name string, walk bool, follow int, spike1σ bool) {
	const at, after = 400, 12
	values := robustValues(at+after, walk)
	pre := "robust." + name
	clean, spiked, gap, shifted := pre+".clean", pre+".spike", pre+".gap", pre+".shift"
	topics := []string{clean, spiked, gap, shifted}
	d := newDaemon(t, external, robustConfig())
	_, c, p := session(t, d)
	defer d.stop()
	for _, tp := range topics {
		publishBatches(p, tp, values, 0, at)
	}
	for _, tp := range topics {
		waitOrigin(t, c, tp, time.Minute, at-2, 120*time.Second)
	}
	base := forecastAt(t, c, clean, at-2)
	b := base.Points[0].Bands[0]
	sd := (*b.High - *b.Low) / 2 / 1.959963984540054 // Φ⁻¹(0.975)
	if !(sd > 0.5 && sd < 2) {
		t.Fatalf("one-step sd %v from the clean series' h=1 band: the model is not the seeded truth's (unit innovations)", sd)
	}
	t.Logf("model %s, σ = %.4f", base.Model.Label, sd)

	spike := append([]float64(nil), values...)
	spike[at] += 20 * sd
	shift := append([]float64(nil), values...)
	for i := at; i < len(shift); i++ {
		shift[i] += 5 * sd
	}
	publishBatches(p, clean, values, at, len(values))
	publishBatches(p, spiked, spike, at, len(values))
	publishBatches(p, gap, values, at+1, len(values))
	publishBatches(p, shifted, shift, at, len(values))
	last := len(values) - 2
	for _, tp := range topics {
		waitOrigin(t, c, tp, time.Minute, last, 60*time.Second)
	}

	s := forecastAt(t, c, spiked, at)
	if s.TakenAs != "outlier" || !(s.TakenZ > 4.5) {
		t.Errorf("spike bucket: last_bucket taken as %q with z %v, want an outlier", s.TakenAs, s.TakenZ)
	}
	// the spike bucket's own innovation, in σ: the clean topic's value
	// less its one-step forecast from the origin before
	lost := (values[at] - forecastAt(t, c, clean, at-1).Points[0].Mean) / sd
	worst, worstGap, sawShift := 0.0, 0.0, false
	atSpike, later := 0.0, 0.0
	worstShift, worstShiftSD := 0.0, 0.0
	for k := at; k <= last; k++ {
		cf, sf, hf := forecastAt(t, c, clean, k), forecastAt(t, c, spiked, k), forecastAt(t, c, shifted, k)
		if cf.TakenAs != "" {
			t.Errorf("clean series, origin %d: taken as %q", k, cf.TakenAs)
		}
		dc := 0.0
		for h := range cf.Points {
			dc = math.Max(dc, math.Abs(sf.Points[h].Mean-cf.Points[h].Mean)/sd)
		}
		if k == at {
			atSpike = dc
		} else {
			later = math.Max(later, dc)
		}
		worst = math.Max(worst, dc)
		if k > at {
			// the values after the spike are the model's, also while the
			// check is still telling a spike from a shift
			// (engine/arima TestGuardRetractsRun)
			gf := forecastAt(t, c, gap, k)
			dg, rel := 0.0, 0.0
			for h := range gf.Points {
				d := math.Abs(sf.Points[h].Mean - gf.Points[h].Mean)
				dg = math.Max(dg, d/sd)
				rel = math.Max(rel, d/math.Abs(gf.Points[h].Mean))
			}
			worstGap = math.Max(worstGap, dg)
			if rel > 1e-6 {
				t.Errorf("spiked series, origin %d: forecasts %.3gσ (relative %.3g) from the topic without the spike's bucket, want equal", k, dg, rel)
			}
		}
		sawShift = sawShift || hf.TakenAs == "level_shift"
		if sf.TakenAs == "level_shift" {
			t.Errorf("spiked series, origin %d: a single spike taken as a level shift", k)
		}
		if k < at+follow-1 { // origin at+j is the (j+1)-th bucket of the new level
			continue
		}
		for h, pt := range cf.Points {
			sdh := (*pt.Bands[0].High - *pt.Bands[0].Low) / 2 / 1.959963984540054
			e := hf.Points[h].Mean - cf.Points[h].Mean - 5*sd
			worstShift, worstShiftSD = math.Max(worstShift, math.Abs(e)/sdh), math.Max(worstShiftSD, math.Abs(e)/sd)
			if math.Abs(e) >= sdh {
				t.Errorf("shift, origin %d (bucket %d of the new level), h=%d: %s off the new level",
					k, k-at+1, h+1, strconv.FormatFloat(e/sdh, 'f', 3, 64)+"σ_h")
				break
			}
		}
	}
	t.Logf("spike of 20σ (its bucket's own innovation %.3fσ): against the clean topic %.3fσ at the spike's origin, at most %.3fσ after it; against the topic without that bucket at most %.3gσ; shift of 5σ from bucket %d of the new level on: at most %.3fσ_h (%.3fσ) off it",
		lost, atSpike, later, worstGap, follow, worstShift, worstShiftSD)
	if spike1σ && worst >= 1 {
		t.Errorf("the forecasts after a 20σ spike moved by %.3fσ, want < 1σ", worst)
	}
	if later >= 1 {
		t.Errorf("from the bucket after the spike the forecasts were up to %.3fσ from the clean topic's, want < 1σ", later)
	}
	if !sawShift {
		t.Error("no forecast of the shifted series says level_shift")
	}
}
