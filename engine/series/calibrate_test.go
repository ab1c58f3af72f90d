package series

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

// ar1T returns n values of x_t = c + φ(x_{t−1} − c) + ε_t with ε_t drawn
// from Student's t with 3 degrees of freedom (seeded): heavy tails that a
// Gaussian model's bands misjudge (the misspecification of issue 13).
func ar1T(n int, phi, c float64, seed uint64) []float64 {
	r := rand.New(rand.NewPCG(seed, 7))
	t3 := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: 3, Src: r}
	out := make([]float64, n)
	x := c
	for i := range out {
		x = c + phi*(x-c) + t3.Rand()
		out[i] = x
	}
	return out
}

func calSettings(calibrate bool) Settings {
	return Settings{
		Kind: "gauge", StepSeconds: step, Horizon: 6, Levels: []float64{50, 90},
		Window: 400, MinPoints: 300, RefitEvery: 100000, Model: "1,0,0", Transform: "none",
		Calibrate: calibrate, Fingerprint: "cal",
	}
}

// Property test (seeded simulation with known truth): on an AR(1) with
// t(3) innovations fitted as a Gaussian AR(1), the model's own 50 % band
// over-covers at h = 1 (with the true variance P(|t₃| < 0.674·√3) = 0.67,
// common practice; the fitted variance of 300 values gives about 0.60),
// while the calibrated band of the same series covers
// 0.50 ± 0.03 at h = 1 and h = 6, and the 90 % band 0.90 ± 0.03 (the
// acceptance band of issue 13), over 3000 buckets after the fit.
func TestCalibratedCoverageHeavyTails(t *testing.T) {
	y := ar1T(3300, 0.6, 100, 11)
	cover := func(calibrate bool) (c [2][2]float64) { // [h=1, h=6][level]
		s, err := New("cal", calSettings(calibrate))
		if err != nil {
			t.Fatal(err)
		}
		fs := drive(t, s, y, 0)
		// fs[k] is issued at bucket 299 + k; its point h targets bucket 299 + k + h.
		var hit, n [2][2]float64
		for k, f := range fs {
			for hi, h := range []int{1, 6} {
				i := 299 + k + h
				if i >= len(y) {
					continue
				}
				p := f.Points[h-1]
				for l := range f.Levels {
					n[hi][l]++
					if y[i] >= p.Lower[l].Value && y[i] <= p.Upper[l].Value {
						hit[hi][l]++
					}
				}
			}
		}
		for hi := range c {
			for l := range c[hi] {
				c[hi][l] = hit[hi][l] / n[hi][l]
			}
		}
		return c
	}
	raw, cal := cover(false), cover(true)
	t.Logf("coverage h=1 [50 90]: model %.3f %.3f, calibrated %.3f %.3f; h=6: model %.3f %.3f, calibrated %.3f %.3f",
		raw[0][0], raw[0][1], cal[0][0], cal[0][1], raw[1][0], raw[1][1], cal[1][0], cal[1][1])
	if raw[0][0] < 0.55 {
		t.Errorf("model's own 50 %% band covers %.3f at h=1; the t(3) simulation should over-cover it by more than 0.05", raw[0][0])
	}
	for hi, h := range []int{1, 6} {
		for l, nominal := range []float64{0.5, 0.9} {
			if math.Abs(cal[hi][l]-nominal) > 0.03 {
				t.Errorf("calibrated coverage at h=%d, level %v: %.3f, want %v ± 0.03", h, nominal, cal[hi][l], nominal)
			}
		}
	}
}

// The calibrated bands are the model-scale band median ± Threshold·sd
// mapped through the exact inverse transform (here log: exp), each band's
// Scale is Threshold/z, the median is the model's, and a counter's floor
// still holds (common practice: a monotone map keeps quantiles).
func TestCalibratedBandsExact(t *testing.T) {
	for _, kind := range []string{"gauge", "counter"} {
		set := calSettings(true)
		set.Kind, set.Transform, set.Model, set.MinPoints, set.Window = kind, "log", "0,1,1", 60, 200
		s, err := New("cal", set)
		if err != nil {
			t.Fatal(err)
		}
		y := make([]float64, 150)
		r := rand.New(rand.NewPCG(3, 4))
		x := 1000.0
		for i := range y {
			x *= math.Exp(0.01 + 0.02*r.NormFloat64())
			y[i] = x
		}
		drive(t, s, y, 0)
		f := s.Forecast()
		if !f.Calibrated {
			t.Fatalf("%s: forecast not marked calibrated", kind)
		}
		mean, variance, _ := s.ModelScale()
		c := s.Calibrator()
		zs := []float64{distuv.UnitNormal.Quantile(0.75), distuv.UnitNormal.Quantile(0.95)}
		moved := false
		for i, p := range f.Points {
			sd := math.Sqrt(variance[i])
			for l := range f.Levels {
				k := c.Threshold(i+1, l)
				lo, hi := math.Exp(mean[i]-k*sd), math.Exp(mean[i]+k*sd)
				if kind == "counter" {
					lo, hi = math.Max(lo, f.LastValue), math.Max(hi, f.LastValue)
				}
				if math.Abs(p.Lower[l].Value-lo) > 1e-9*lo || math.Abs(p.Upper[l].Value-hi) > 1e-9*hi {
					t.Errorf("%s h=%d level %v: band [%v, %v], want [%v, %v]", kind, i+1, f.Levels[l], p.Lower[l].Value, p.Upper[l].Value, lo, hi)
				}
				if math.Abs(p.Scale[l]-k/zs[l]) > 1e-12 {
					t.Errorf("%s h=%d level %v: scale %v, want %v", kind, i+1, f.Levels[l], p.Scale[l], k/zs[l])
				}
				if math.Abs(p.Scale[l]-1) > 1e-6 {
					moved = true
				}
				if kind == "counter" && p.Lower[l].Value < f.LastValue {
					t.Errorf("counter band below the last value")
				}
			}
			if math.Abs(p.Median-math.Max(math.Exp(mean[i]), map[bool]float64{true: f.LastValue}[kind == "counter"])) > 1e-9*p.Median {
				t.Errorf("%s h=%d: median %v, want exp(mean)", kind, i+1, p.Median)
			}
		}
		if !moved {
			t.Errorf("%s: every scale is 1: the calibrator was not warmed", kind)
		}
		if c.Updates() == 0 {
			t.Errorf("%s: no online update after %d closed buckets past the fit", kind, len(y)-set.MinPoints)
		}
	}
}

// Calibrate off: no calibrator, the model's own bands, scale 1.
func TestUncalibratedBands(t *testing.T) {
	s, err := New("cal", calSettings(false))
	if err != nil {
		t.Fatal(err)
	}
	drive(t, s, ar1T(320, 0.6, 100, 2), 0)
	f := s.Forecast()
	if f.Calibrated || s.Calibrator() != nil {
		t.Fatal("calibrated with calibrate off")
	}
	for _, p := range f.Points {
		for _, v := range p.Scale {
			if v != 1 {
				t.Fatalf("scale %v with calibrate off", v)
			}
		}
	}
}

// Property test against simulated paths, as the alert tests do: with
// calibration on, a gauge rule's probability of crossing within k = 6
// steps is that of the fitted AR(1)'s paths with each step's error times
// its calibration factor f_j = Factor(j, widest level), W_j = m_j + f_j·e_j,
// estimated here by 40 000 paths simulated directly from the recursion
// x_{t+1} = μ + φ(x_t − μ) + σ·ε, e_j = x_j − m_j (common practice), within
// 4 combined standard errors; and it differs from the uncalibrated
// probability (f = 1) and from one factor for the whole window
// (f_j = Factor(6, widest)) by more than that, so the check can tell them
// apart.
func TestCalibratedAlertProbability(t *testing.T) {
	y := ar1T(900, 0.6, 100, 21)
	s, err := New("cal", calSettings(true))
	if err != nil {
		t.Fatal(err)
	}
	drive(t, s, y, 0)
	ms := s.Snapshot().Model
	phi, mu, sigma := ms.Params[0], ms.Params[1], math.Sqrt(ms.Sigma2)
	last := y[len(y)-2] // the last closed bucket (the last value stays open)
	const k = 6
	f := s.Calibrator().Factor(k, 1)
	if math.Abs(f-1) < 0.05 {
		t.Fatalf("factor %v at h=%d: too close to 1 for the test to tell", f, k)
	}
	mean, variance, _ := s.ModelScale()
	thr := mean[k-1] + 1.3*math.Sqrt(variance[k-1])
	rule := AlertRule{Name: "up", Threshold: thr, Above: true, Window: k, Raise: 0.15, Clear: 0.14} // Raise near p: the evaluator draws every path
	r := newAlertRig(t, s, []AlertRule{rule})
	if _, err := s.EvaluateAlerts(nil, r.rules, r.ev, &r.ps); err != nil {
		t.Fatal(err)
	}
	got := s.Snapshot().Alerts[0].Probability
	mc := func(scale func(j int) float64) (p, se float64) {
		rng := rand.New(rand.NewPCG(99, 1))
		const n = 40000
		hits := 0
		for range n {
			x, m := last, last
			for j := 1; j <= k; j++ {
				x = mu + phi*(x-mu) + sigma*rng.NormFloat64()
				m = mu + phi*(m-mu)
				if m+scale(j)*(x-m) > thr {
					hits++
					break
				}
			}
		}
		p = float64(hits) / n
		return p, math.Sqrt(p * (1 - p) / n)
	}
	want, seW := mc(func(j int) float64 { return s.Calibrator().Factor(j, 1) })
	raw, seR := mc(func(int) float64 { return 1 })
	one, seO := mc(func(int) float64 { return f })
	est := s.work.items[0].est
	tol := 4 * math.Sqrt(seW*seW+est.StdErr*est.StdErr)
	t.Logf("factor at h=%d %.3f: p %.4f (±%.4f, %d paths), simulated %.4f ± %.4f; uncalibrated %.4f ± %.4f; one factor for the window %.4f ± %.4f",
		k, f, got, est.StdErr, est.Paths, want, seW, raw, seR, one, seO)
	if est.Paths != r.ev.Paths() {
		t.Errorf("decided after %d of %d paths: p %.4f is not within Monte Carlo error of Raise %.2f, where the simulated paths put it", est.Paths, r.ev.Paths(), got, rule.Raise)
	}
	if math.Abs(got-want) > tol {
		t.Errorf("calibrated probability %.4f, simulated paths with the calibrated spread %.4f (tolerance %.4f)", got, want, tol)
	}
	if math.Abs(raw-want) <= tol+4*seR {
		t.Errorf("uncalibrated %.4f and calibrated %.4f paths are within the tolerance: the test cannot tell them apart", raw, want)
	}
	if math.Abs(one-want) <= tol+4*seO {
		t.Errorf("one factor for the window %.4f and per-step factors %.4f are within the tolerance: the test cannot tell them apart", one, want)
	}
}

// BenchmarkCloseCalibrate times one bucket close of a fitted series at the
// default horizon (60) and levels (50, 90), with calibration off and on in
// one run: the filter step, the forecast, and with calibration Observe,
// Issue and the thresholds. Neither allocates.
func BenchmarkCloseCalibrate(b *testing.B) {
	for _, cal := range []bool{false, true} {
		name := "off"
		if cal {
			name = "on"
		}
		b.Run(name, func(b *testing.B) {
			set := calSettings(cal)
			set.Horizon, set.Window, set.MinPoints, set.Model = 60, 2000, 300, "1,1,1"
			set.RefitEvery = 1 << 30 // no refit inside the timed loop, however long it runs
			s, err := New("bench", set)
			if err != nil {
				b.Fatal(err)
			}
			y := ar1T(2500, 0.6, 100, 5)
			for i, v := range y {
				o, err := s.Observe(at(int64(i)), v)
				if err != nil {
					b.Fatal(err)
				}
				if o == NeedFit {
					if _, err := s.Install(s.FitJob().Run()); err != nil {
						b.Fatal(err)
					}
				}
			}
			i := int64(len(y))
			b.ReportAllocs()
			for b.Loop() {
				if o, err := s.Observe(at(i), y[i%int64(len(y))]); err != nil || o != Published {
					b.Fatalf("%v %v", o, err)
				}
				s.Forecast()
				i++
			}
		})
	}
}
