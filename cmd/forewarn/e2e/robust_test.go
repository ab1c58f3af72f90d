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
// Each case is also held against the best any rule can do, an estimator
// told what the bucket or the shift is.
//
//   - Spike: the bucket is taken as an additive outlier (the message's
//     last_bucket says so), never as a level shift. At every origin from
//     the spike's own on, the forecasts equal, within 1e-6 relative, those
//     of an estimator told the bucket is a spike: the spike's origin those
//     of the topic without that bucket from the origin before, one step on
//     (the filter with the bucket missing, Durbin & Koopman 2012 §4.10);
//     later origins those of the topic without the bucket. A value after
//     it that is beyond 1.5 on the spike's scale and of its sign joins the
//     spike's run while the check tells a spike from a shift (at most Run
//     − 1 = 2 buckets); the forecasts take it as an ordinary value
//     meanwhile (engine/arima TestGuardRetractsRun). Against the clean
//     topic they move by less than 1σ at every origin of the stationary
//     series and every origin after the spike's of both; at the spike's
//     own origin in the wandering series (ARIMA(1,1,0): the level moves
//     by the whole innovation) they differ by what that bucket's ordinary
//     value would have told the filter, its innovation e_t times the gain,
//     here 1.05σ for |e_t| = 1.08σ: the told estimator's figure too.
//   - Shift: a bucket is taken as a level shift within 5 buckets of the
//     new level. The wandering series' forecasts are within 1σ_h of the
//     clean topic's plus 5σ from bucket 5 on, σ_h the clean forecast's sd
//     at each horizon (engine/arima TestGuardLevelShift's yardstick). The
//     stationary series' long-horizon forecasts are its mean, which a
//     handful of values pins down only to about 0.7σ (AR(1) with φ = 0.5);
//     from the report on its forecasts equal, to 1e-6 σ_h, those of an
//     estimator told when the shift began (the shift's size by GLS from the
//     values since, Box & Tiao 1975, closed form for the AR(1) the daemon
//     fitted), whose own distance to the truth on this seed is 1.11σ_h at
//     bucket 5 and 1.20σ_h at bucket 6; both are within 1σ_h from bucket 8
//     (asserted). engine/arima TestGuardLevelShift gives the rates over
//     200 seeds.
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
	// an estimator told the bucket is a spike: the filter with it missing,
	// whose forecasts from the spike's origin are those of the origin
	// before, one step on (the topic without the bucket has that origin)
	told := forecastAt(t, c, gap, at-1)
	for h := 0; h+1 < len(told.Points); h++ {
		want, got := told.Points[h+1], s.Points[h]
		if rel := math.Abs(got.Mean-want.Mean) / math.Abs(want.Mean); rel > 1e-6 || !got.Time.Equal(want.Time) {
			t.Errorf("spike's origin, h=%d: forecast %v at %v, the filter told the bucket is a spike %v at %v",
				h+1, got.Mean, got.Time, want.Mean, want.Time)
		}
	}
	shiftReport := efficientShift(t, c, values, clean, shifted, at, last, 5*sd, walk)
	if shiftReport < 1 || shiftReport > 5 {
		t.Errorf("the shift reported at bucket %d of the new level, want within 5", shiftReport)
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
	t.Logf("shift reported at bucket %d of the new level", shiftReport)
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

// efficientShift returns the bucket of the new level (1 for bucket at) at
// which the shifted topic's forecast first says level_shift (0: none by
// origin last). For the stationary series (not walk) it checks that from
// that bucket on the forecasts equal, to 1e-6 σ_h (σ_h the clean
// forecast's sd at each horizon), those of the efficient estimator told
// that a shift of unknown size began at bucket at (Box & Tiao 1975: GLS
// of a step's coefficient given the model), and logs that estimator's own
// distance to the truth (the clean forecasts plus size). For the AR(1)
// with regressors the daemon fitted, with e_t the clean topic's one-step
// errors and φ read off its forecasts: after k buckets the estimate's
// error is δ̂ − δ = (e_at + (1−φ)Σ_{at<t<at+k} e_t) / (1 + (k−1)(1−φ)²),
// and the h-step forecast is the clean one plus δ + (δ̂ − δ)(1 − φ^h).
func efficientShift(t *testing.T, c *collector, values []float64, clean, shifted string, at, last int, size float64, walk bool) int {
	t.Helper()
	report := 0
	for k := at; k <= last && report == 0; k++ {
		if forecastAt(t, c, shifted, k).TakenAs == "level_shift" {
			report = k - at + 1
		}
	}
	if walk || report == 0 {
		return report
	}
	if l := forecastAt(t, c, clean, at).Model.Label; !strings.HasPrefix(l, "ARIMA 1,0,0 ") {
		t.Fatalf("stationary series fitted as %q: the efficient estimator here is written for an AR(1)", l)
	}
	// φ from the clean forecasts: f_k(h) − f_{k−1}(h+1) = φ^{h−1} e_k
	f1, f0 := forecastAt(t, c, clean, at+3), forecastAt(t, c, clean, at+2)
	phi := (f1.Points[1].Mean - f0.Points[2].Mean) / (f1.Points[0].Mean - f0.Points[1].Mean)
	num, den := 0.0, 0.0
	for k := at; k <= last; k++ {
		e := values[k] - forecastAt(t, c, clean, k-1).Points[0].Mean
		if k == at {
			num, den = e, 1
		} else {
			num, den = num+(1-phi)*e, den+(1-phi)*(1-phi)
		}
		cf, hf := forecastAt(t, c, clean, k), forecastAt(t, c, shifted, k)
		worst, oracle := 0.0, 0.0
		for h, pt := range cf.Points {
			sdh := (*pt.Bands[0].High - *pt.Bands[0].Low) / 2 / 1.959963984540054
			off := num / den * (1 - math.Pow(phi, float64(h+1)))
			worst = math.Max(worst, math.Abs(hf.Points[h].Mean-(pt.Mean+size+off))/sdh)
			oracle = math.Max(oracle, math.Abs(off)/sdh)
		}
		j := k - at + 1
		t.Logf("bucket %d of the new level: the estimator told the shift's start is %.3fσ_h from the truth; the daemon's forecasts %.2gσ_h from it", j, oracle, worst)
		if j >= report && worst > 1e-6 {
			t.Errorf("bucket %d of the new level (shift reported at %d): forecasts %.3gσ_h from the efficient estimator's", j, report, worst)
		}
	}
	return report
}
