package arima

import (
	"math"
	"math/rand/v2"
	"sort"
	"testing"
)

// guardModels are the models of the robustness checks: the airline model
// of Box & Jenkins (1976, ch. 9; θ and Θ near their fit to the airline
// series), an ARIMA(1,1,1) and a stationary AR(1) with a mean.
func guardModels(t testing.TB) map[string]*Model {
	mk := func(s Spec, p []float64) *Model {
		m, err := NewModel(s, p, 1)
		if err != nil {
			t.Fatal(err)
		}
		return m
	}
	return map[string]*Model{
		"airline12": mk(Spec{D: 1, Q: 1, SD: 1, SQ: 1, Period: 12}, []float64{-0.4, -0.6}),
		"arima111":  mk(Spec{P: 1, D: 1, Q: 1}, []float64{0.5, -0.3}),
		"ar1mean":   mk(Spec{P: 1, Mean: true}, []float64{0.6, 10}),
	}
}

// runGuarded steps a filter of m (with the check when guard) through y and
// returns its forecasts and standard errors for h steps.
func runGuarded(t testing.TB, m *Model, y []float64, h int, guard bool) (mean, se []float64, f *Filter) {
	f, err := NewFilter(m, h)
	if err != nil {
		t.Fatal(err)
	}
	if guard {
		if err := f.SetGuard(DefaultGuard); err != nil {
			t.Fatal(err)
		}
	}
	f.Steps(y)
	mean, v := make([]float64, h), make([]float64, h)
	f.Forecast(mean, v)
	se = make([]float64, h)
	for i := range v {
		se[i] = math.Sqrt(v[i])
	}
	return mean, se, f
}

// maxGap is max_h |a_h − b_h − shift| / se_h.
func maxGap(a, b, se []float64, shift float64) float64 {
	g := 0.0
	for i := range a {
		g = math.Max(g, math.Abs(a[i]-b[i]-shift)/se[i])
	}
	return g
}

// A 20σ spike in a seasonal series (property test, seeded simulations
// with known truth): the check flags it, and the forecasts made right after
// it are exactly those of the same series with that bucket missing (the
// spike leaks nothing into the state, Durbin & Koopman 2012, §4.10). Against
// the clean series (that bucket ordinary) the forecasts move by the
// discarded bucket's own information, gain × its ordinary error: median
// below 0.5σ and at least 90 % of the seeds below 1σ (σ: the clean
// forecast's standard error at each horizon h = 1..24). Without the check
// the spike moves them by more than 10σ in every seed. Five ordinary
// buckets later the forecasts still equal, to 1e-9 σ, those of the series
// with only the spike's bucket missing, also in the seeds where the next
// value joined the spike's run (re-applied when the run ended); their gap
// to the clean series' is logged. Left out of that (and counted): seeds in
// which the spike joined a run a 3σ value had opened just before, and
// seeds in which the spike and the next two values were read as a level
// shift (the run's median beyond 3 on the spike's scale).
func TestGuardSpike(t *testing.T) {
	const n, T, h, reps = 240, 200, 24, 200
	for _, name := range []string{"airline12", "arima111", "ar1mean"} {
		m := guardModels(t)[name]
		var gaps, gaps5 []float64
		joined, preRun, falseShift := 0, 0, 0
		minRaw, falseGap := math.Inf(1), 0.0
		for seed := uint64(1); seed <= reps; seed++ {
			y := simulate(m, n, seed)
			clean := y[:T+1]
			spiky := append([]float64(nil), clean...)
			spiky[T] += 20
			holed := append([]float64(nil), clean...)
			holed[T] = math.NaN()
			mc, se, _ := runGuarded(t, m, clean, h, true)
			ms, _, f := runGuarded(t, m, spiky, h, true)
			if v, z := f.LastVerdict(); v != VerdictOutlier || !(z > 10) {
				t.Fatalf("%s seed %d: verdict %v, z = %.2f; want an outlier with z > 10", name, seed, v, z)
			}
			mh, _, _ := runGuarded(t, m, holed, h, true)
			if g := maxGap(ms, mh, se, 0); g > 1e-9 {
				t.Fatalf("%s seed %d: the flagged spike moved the forecasts by %.3gσ against a missing bucket", name, seed, g)
			}
			// without the check, against the clean series without it (a
			// false shift in the checked clean series would blur this)
			mp, _, _ := runGuarded(t, m, spiky, h, false)
			mu, su, _ := runGuarded(t, m, clean, h, false)
			gaps = append(gaps, maxGap(ms, mc, se, 0))
			minRaw = math.Min(minRaw, maxGap(mp, mu, su, 0))
			// five ordinary buckets later: a value that joined the spike's
			// run has been re-applied (TestGuardRetractsRun), unless the
			// spike joined a run already open or the check read the run
			// as a level shift (counted)
			pre := f.gd.runN != 1
			shifted := false
			for i := T + 1; i <= T+5; i++ {
				f.Step(y[i])
				v, _ := f.LastVerdict()
				if i == T+1 && f.gd.runN == 2 {
					joined++
				}
				shifted = shifted || v == VerdictShift
			}
			switch {
			case pre:
				preRun++
				continue
			case shifted:
				// a spike and two large ordinary values read as a shift:
				// with differencing the level moves by the run's median
				// error, and five buckets on the forecasts are within 1σ_h
				// of the clean series' (with the mean, airline12 reached
				// 1.93σ_h); without differencing the spike stays out of
				// the step's estimate, which the two values make about
				// 3σ: within 2σ_h (1.83 measured; with the spike in it,
				// 5.68)
				falseShift++
				ms5, _, _ := runGuarded(t, m, append(spiky[:T+1:T+1], y[T+1:T+6]...), h, true)
				mc5, se5, _ := runGuarded(t, m, y[:T+6], h, true)
				g := maxGap(ms5, mc5, se5, 0)
				falseGap = math.Max(falseGap, g)
				bound := 1.0
				if m.Spec.D+m.Spec.SD == 0 {
					bound = 2
				}
				if g >= bound {
					t.Errorf("%s seed %d: a spike read as a level shift left the forecasts %.3gσ_h off the clean series' five buckets on, want < %gσ_h", name, seed, g, bound)
				}
				continue
			}
			ms5, _, _ := runGuarded(t, m, append(spiky[:T+1:T+1], y[T+1:T+6]...), h, true)
			mh5, _, _ := runGuarded(t, m, append(holed[:T+1:T+1], y[T+1:T+6]...), h, true)
			mc5, se5, _ := runGuarded(t, m, y[:T+6], h, true)
			if g := maxGap(ms5, mh5, se5, 0); g > 1e-9 {
				t.Errorf("%s seed %d: 5 buckets after the spike the forecasts are %.3gσ from the series with only its bucket missing", name, seed, g)
			}
			gaps5 = append(gaps5, maxGap(ms5, mc5, se5, 0))
		}
		sort.Float64s(gaps)
		sort.Float64s(gaps5)
		below := sort.SearchFloat64s(gaps, 1)
		n5 := len(gaps5)
		t.Logf("%s: 5 buckets after the spike, against the clean series: median %.3f, p95 %.3f, max %.3f over %d seeds, equal to the series with only the spike missing (the next value joined the spike's run in %d/%d seeds; left out: %d with a run open before the spike, %d with a level shift read in the run, at most %.3fσ_h off the clean series' then)",
			name, gaps5[n5/2], gaps5[n5*95/100], gaps5[n5-1], n5, joined, reps, preRun, falseShift, falseGap)
		t.Logf("%s: 20σ spike, max_h |Δ|/σ_h against the clean series: median %.3f, p95 %.3f, max %.3f, %d/%d below 1σ; without the check min %.2f",
			name, gaps[reps/2], gaps[reps*95/100], gaps[reps-1], below, reps, minRaw)
		if name == "airline12" && (gaps[reps/2] >= 0.5 || below < reps*9/10) {
			t.Errorf("%s: median %.3f (want < 0.5), %d/%d below 1σ (want ≥ 90 %%)", name, gaps[reps/2], below, reps)
		}
		if minRaw <= 10 {
			t.Errorf("%s: without the check the spike moved the forecasts by only %.2fσ", name, minRaw)
		}
	}
}

// A level shift of 5σ (property test): the forecasts (h = 1..24) come
// within 1σ_h of the clean series' forecasts plus the shift after at most 5
// buckets in every one of 200 seeds for the differenced models; the check
// reports the shift.
//
// For the stationary AR(1) with a mean, "followed" is measured as on-line
// change detection measures it: the delay until the change is reported,
// and the estimate after it (Basseville & Nikiforov 1993, Detection of
// Abrupt Changes, ch. 4: mean delay for detection against mean time between
// false alarms; the chapter from memory). No rule can do better than the
// efficient estimator that knows when the shift began (its size by GLS from
// the values since, Box & Tiao 1975; shiftOracle), and that estimator's
// own error after k buckets has sd σ/√(1+(k−1)(1−φ)²), 0.78σ at k = 5 with
// φ = 0.6, against a long-horizon σ_h of 1.25σ: it is beyond 1σ_h at the
// fifth bucket in about one seed in seven. guardShiftStationary counts the
// delays, the seeds whose forecasts are the efficient estimator's from the
// report on, and both estimators' seeds within 1σ_h at the fifth bucket.
func TestGuardLevelShift(t *testing.T) {
	const n, T, h, reps = 240, 200, 24, 200
	for _, name := range []string{"airline12", "arima111"} {
		m := guardModels(t)[name]
		within, shifts := 0, 0
		worst := 0
		for seed := uint64(1); seed <= reps; seed++ {
			y := simulate(m, n, seed)
			sh := append([]float64(nil), y...)
			for i := T; i < n; i++ {
				sh[i] += 5
			}
			k := 1
			for ; k <= 5; k++ {
				mc, se, _ := runGuarded(t, m, y[:T+k], h, true)
				ms, _, f := runGuarded(t, m, sh[:T+k], h, true)
				if v, _ := f.LastVerdict(); v == VerdictShift {
					shifts++
				}
				if maxGap(ms, mc, se, 5) < 1 {
					break
				}
			}
			if k <= 5 {
				within++
			}
			worst = max(worst, k)
		}
		t.Logf("%s: 5σ level shift followed within 5 buckets in %d/%d seeds (worst k %d), shift verdicts %d", name, within, reps, worst, shifts)
		if within < reps {
			t.Errorf("%s: followed within 5 buckets in %d/%d seeds, want all", name, within, reps)
		}
	}
	t.Run("ar1mean", func(t *testing.T) { guardShiftStationary(t, guardModels(t)["ar1mean"], n, T, h, reps) })
}

// guardShiftStationary is TestGuardLevelShift's stationary case. Per seed:
// the bucket k ≤ 5 of the new level at which the check reports the shift;
// whether from that bucket to the fifth the forecasts equal the efficient
// estimator's (shiftOracle, to 1e-6 σ_h; they do when the check's run
// began at the shift's first bucket, not when that bucket's own error hid
// it and the run began later, or a run open before the shift took it in);
// and, at the fifth bucket, whether the forecasts are within 1σ_h of the
// clean series' plus the shift, ours and the efficient estimator's. The
// floors are this seeded design's measured counts less a few seeds
// (reported within 5 buckets: 188 of 200; equal to the efficient
// estimator from then on: 169; within 1σ_h at bucket 5: ours 169, the
// efficient estimator 171).
func guardShiftStationary(t *testing.T, m *Model, n, T, h, reps int) {
	detected, efficient, within, oracleWithin := 0, 0, 0, 0
	for seed := uint64(1); seed <= uint64(reps); seed++ {
		y := simulate(m, n, seed)
		sh := append([]float64(nil), y...)
		for i := T; i < n; i++ {
			sh[i] += 5
		}
		at, equal := 0, true
		for k := 1; k <= 5; k++ {
			mc, se, _ := runGuarded(t, m, y[:T+k], h, true)
			ms, _, f := runGuarded(t, m, sh[:T+k], h, true)
			if v, _ := f.LastVerdict(); v == VerdictShift && at == 0 {
				at = k
			}
			mo := shiftOracle(m, sh[:T+k], T, h)
			if at > 0 && maxGap(ms, mo, se, 0) > 1e-6 {
				equal = false
			}
			if k == 5 {
				if maxGap(ms, mc, se, 5) < 1 {
					within++
				}
				if maxGap(mo, mc, se, 5) < 1 {
					oracleWithin++
				}
			}
		}
		if at > 0 {
			detected++
			if equal {
				efficient++
			}
		}
	}
	t.Logf("5σ level shift in an AR(1) with a mean (φ = 0.6): reported within 5 buckets in %d/%d seeds, forecasts equal to the efficient estimator's from then on in %d; within 1σ_h of the truth at bucket 5 in %d seeds, the efficient estimator that knows the shift's start in %d",
		detected, reps, efficient, within, oracleWithin)
	if detected < reps*92/100 {
		t.Errorf("reported within 5 buckets in %d/%d seeds, want ≥ 92 %%", detected, reps)
	}
	if efficient < reps*82/100 {
		t.Errorf("equal to the efficient estimator from the report on in %d/%d seeds, want ≥ 82 %%", efficient, reps)
	}
	if within < oracleWithin-reps*3/100 {
		t.Errorf("within 1σ_h at bucket 5 in %d seeds, the efficient estimator in %d: more than 3 %% of the seeds apart", within, oracleWithin)
	}
}

// shiftOracle is the efficient forecast of an AR(1) with a known mean μ
// after a level shift of unknown size δ that began at bucket T of y (Box &
// Tiao 1975, intervention analysis; GLS). With u_t = y_t − μ and a_t = u_t −
// φu_{t−1}: a_T = δ + e_T and a_t = (1−φ)δ + e_t for t > T, so δ̂ =
// (a_T + (1−φ)Σ_{t>T} a_t) / (1 + (k−1)(1−φ)²) after k buckets, and the
// h-step forecast is μ + δ̂ + φ^h (u_last − δ̂).
func shiftOracle(m *Model, y []float64, T, h int) []float64 {
	phi, mu := m.AR[0], m.Mean
	num, den := y[T]-mu-phi*(y[T-1]-mu), 1.0
	for t := T + 1; t < len(y); t++ {
		num += (1 - phi) * (y[t] - mu - phi*(y[t-1]-mu))
		den += (1 - phi) * (1 - phi)
	}
	d := num / den
	u := y[len(y)-1] - mu - d
	out := make([]float64, h)
	for i := range out {
		u *= phi
		out[i] = mu + d + u
	}
	return out
}

// SetGuard rejects thresholds that make no sense.
func TestSetGuardRejectsBadInput(t *testing.T) {
	f, err := NewFilter(guardModels(t)["arima111"], 5)
	if err != nil {
		t.Fatal(err)
	}
	for _, g := range []Guard{{Spike: 3, Shift: 3, Run: 3}, {Spike: 4.5, Shift: 0, Run: 3}, {Spike: 4.5, Shift: 3, Run: 1},
		{Spike: math.Inf(1), Shift: 3, Run: 3}, {Spike: 4.5, Shift: 3, Run: 3, Inflate: -1}, {Spike: math.NaN(), Shift: 3, Run: 3}} {
		if err := f.SetGuard(g); err == nil {
			t.Errorf("SetGuard(%+v) accepted", g)
		}
	}
}

// After a shift of the constant (no differencing) the state and the
// check's state round-trip.
func TestGuardShiftStateRoundTrip(t *testing.T) {
	m := guardModels(t)["ar1mean"]
	y := simulate(m, 120, 7)
	for i := 100; i < 120; i++ {
		y[i] += 8
	}
	_, _, f := runGuarded(t, m, y[:110], 10, true)
	st := f.AppendState(nil)
	g, _ := NewFilter(m, 10)
	if err := g.SetGuard(DefaultGuard); err != nil {
		t.Fatal(err)
	}
	if err := g.SetState(st); err != nil {
		t.Fatal(err)
	}
	// the check's state carries the shift's learning, whose variance is
	// in the forecasts' while it lasts
	if err := g.SetGuardState(f.AppendGuardState(nil)); err != nil {
		t.Fatal(err)
	}
	a, va, b, vb := make([]float64, 10), make([]float64, 10), make([]float64, 10), make([]float64, 10)
	f.Forecast(a, va)
	g.Forecast(b, vb)
	for i := range a {
		if a[i] != b[i] || va[i] != vb[i] {
			t.Fatalf("h=%d: restored forecast %v ± %v, original %v ± %v", i+1, b[i], vb[i], a[i], va[i])
		}
	}
	if f.gd.shift == 0 {
		t.Fatal("no shift of the constant was applied")
	}
}

// Benchmark: the online step plus a 60-step forecast, check on and off.
func BenchmarkOnlineStepGuard(b *testing.B) {
	for _, on := range []bool{false, true} {
		name := "off"
		if on {
			name = "on"
		}
		b.Run(name, func(b *testing.B) {
			f, y := onlineFilter(b)
			if on {
				if err := f.SetGuard(DefaultGuard); err != nil {
					b.Fatal(err)
				}
			}
			mean, v := make([]float64, 60), make([]float64, 60)
			b.ReportAllocs()
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				f.Step(y[i%len(y)])
				f.Forecast(mean, v)
			}
		})
	}
}

// The check allocates nothing per step, through spikes, runs retracted
// and shifts.
func TestGuardStepAllocs(t *testing.T) {
	f0, y0 := onlineFilter(t)
	fx, _ := benchFilterX(t) // ARIMA(1,0,1) + 10 + 10 Fourier pairs
	yx := make([]float64, 500)
	for i := range yx {
		yx[i] = 100 + math.Sin(float64(2880+i))
	}
	for _, c := range []struct {
		name string
		f    *Filter
		y    []float64
	}{{"arima212", f0, y0}, {"fourier", fx, yx}} {
		f, y := c.f, c.y
		if err := f.SetGuard(DefaultGuard); err != nil {
			t.Fatal(err)
		}
		mean, v := make([]float64, 60), make([]float64, 60)
		i, retracted := 0, 0
		step := func() {
			x := y[i%len(y)]
			if i%23 == 0 {
				x += 1e4 // a spike
			}
			switch i % 23 {
			case 1: // a value that joins the spike's run, then one that breaks it
				x = mean[0] + 2.5*math.Sqrt(f.sigma2*f.gd.runF)
			case 2:
				x = mean[0] - 1
			}
			if i%50 >= 40 {
				x += 1e3 // a level shift for ten steps
			}
			i++
			open := f.gd.runN
			f.Step(x)
			f.Forecast(mean, v)
			if vd, _ := f.LastVerdict(); open == 2 && f.gd.runN < 2 && vd != VerdictShift {
				retracted++ // a run of two retracted (the value may open the next)
			}
		}
		// all allocations of 300 steps (AllocsPerRun's per-call average
		// rounds down, and would hide one in a rare branch)
		allocs := testing.AllocsPerRun(1, func() {
			for k := 0; k < 300; k++ {
				step()
			}
		})
		if allocs != 0 {
			t.Errorf("%s: 300 guarded steps allocate %v times", c.name, allocs)
		}
		if retracted == 0 {
			t.Errorf("%s: no run was retracted", c.name)
		}
		t.Logf("%s: %d runs of two retracted", c.name, retracted)
	}
}

// A filter of a model without differencing saved and restored (AppendState
// and AppendGuardState) at every step around a level shift, before, inside
// the run, at the shift and while its size is learnt, continues bit for
// bit as the uninterrupted one (property of the saved state: the run's
// values and the state at its first step are part of it).
func TestGuardRunStateRoundTrip(t *testing.T) {
	m := guardModels(t)["ar1mean"]
	y := simulate(m, 140, 7)
	for i := 100; i < 140; i++ {
		y[i] += 8
	}
	whole, _, wf := runGuarded(t, m, y, 10, true)
	if wf.gd.shift == 0 {
		t.Fatal("no shift of the constant was applied")
	}
	for cut := 99; cut <= 110; cut++ {
		_, _, f := runGuarded(t, m, y[:cut], 10, true)
		g, _ := NewFilter(m, 10)
		if err := g.SetGuard(DefaultGuard); err != nil {
			t.Fatal(err)
		}
		if err := g.SetState(f.AppendState(nil)); err != nil {
			t.Fatal(err)
		}
		if err := g.SetGuardState(f.AppendGuardState(nil)); err != nil {
			t.Fatal(err)
		}
		g.Steps(y[cut:])
		got, v := make([]float64, 10), make([]float64, 10)
		g.Forecast(got, v)
		for h := range got {
			if got[h] != whole[h] {
				t.Fatalf("cut at %d: h=%d forecast %v, uninterrupted %v", cut, h+1, got[h], whole[h])
			}
		}
	}
}

// While a shift's size is learnt (model without differencing) the
// forecasts' error variances include its variance (property of the
// augmented filter, Durbin & Koopman 2012 §6.2.2: P + A S⁻¹ Aᵀ): right
// after the shift the long-horizon variance exceeds the clean series' by
// Var(b̂) ≈ σ²/Σ x̃²/F, which is at least σ²/n for the n values seen since
// the shift's start (a mean known no better than from n independent
// values) and at most σ² (one value's worth); 100 steps later the
// learning has ended and the variances are the clean series'.
func TestGuardShiftWidensBands(t *testing.T) {
	m := guardModels(t)["ar1mean"]
	y := simulate(m, 320, 3)
	sh := append([]float64(nil), y...)
	for i := 200; i < len(sh); i++ {
		sh[i] += 8
	}
	for _, c := range []struct{ n, after int }{{3, 3}, {5, 5}, {320 - 200, 0}} {
		_, sc, _ := runGuarded(t, m, y[:200+c.n], 24, true)
		_, ss, f := runGuarded(t, m, sh[:200+c.n], 24, true)
		d := ss[23]*ss[23] - sc[23]*sc[23]
		if c.after == 0 {
			if d != 0 || f.gd.learn != 0 {
				t.Errorf("%d steps after the shift: variance differs by %v (learning %d steps more)", c.n, d, f.gd.learn)
			}
			continue
		}
		if !(d >= 1/float64(c.after) && d <= 1) {
			t.Errorf("%d values into the shift: long-horizon variance wider by %.4f σ², want within [1/%d, 1]", c.n, d, c.after)
		}
	}
}

// retractCase is a model of the retraction tests with a constructor of
// its guarded filter (NewFilterX for the one with regressors) and a
// simulated series of n values on the model's scale.
type retractCase struct {
	name string
	m    *Model
	newF func(t testing.TB) *Filter
	y    []float64
}

// retractCases: the three models of guardModels and an ARIMA(1,1,0) with
// the Fourier terms (K = 2) of a 90.5-minute cycle at one-minute steps
// from an absolute start (regression with ARIMA errors, NewFilterX), the
// simulated series its regression part plus an ARIMA(1,1,0) path.
func retractCases(t testing.TB, n int, seed uint64) []retractCase {
	var cs []retractCase
	gm := guardModels(t)
	for _, name := range []string{"airline12", "arima111", "ar1mean"} {
		m := gm[name]
		cs = append(cs, retractCase{name, m, func(t testing.TB) *Filter {
			f, err := NewFilter(m, 24)
			if err != nil {
				t.Fatal(err)
			}
			return f
		}, simulate(m, n, seed)})
	}
	const t0, step = 1717171200.0, 60.0
	fg, err := NewFourier([]Cycle{{Seconds: 5430, K: 2}}, step)
	if err != nil {
		t.Fatal(err)
	}
	beta := []float64{6, 3, -2, 1}
	m, err := NewModel(Spec{P: 1, D: 1, NX: fg.NumRegressors()}, append([]float64{0.5}, beta...), 1)
	if err != nil {
		t.Fatal(err)
	}
	m0, err := NewModel(Spec{P: 1, D: 1}, []float64{0.5}, 1)
	if err != nil {
		t.Fatal(err)
	}
	u := simulate(m0, n, seed)
	row := make([]float64, fg.NumRegressors())
	for i := range u {
		fg.Regressors(row, t0+step*float64(i))
		u[i] += dot(beta, row)
	}
	cs = append(cs, retractCase{"fourier110", m, func(t testing.TB) *Filter {
		f, err := NewFilterX(m, 24, fg, t0, step)
		if err != nil {
			t.Fatal(err)
		}
		return f
	}, u})
	return cs
}

// oneStep returns a filter's one-step forecast and its sd.
func oneStep(f *Filter, mean, v []float64) (float64, float64) {
	f.Forecast(mean, v)
	return mean[0], math.Sqrt(v[0])
}

// A 20σ spike followed by ordinary values that join its run (same sign,
// beyond Shift/2 on the spike's scale) and then either break it (odd
// seeds: the next value on the other side) or make it three long with a
// median below Shift (even seeds: "a spike, not a step"): the forecasts
// take the run's later members as observations (provisionally while the
// run is undecided, for good once it has ended), so from the spike's next
// bucket on the forecasts and their variances equal, to 1e-9 relative, those of the
// same series with only the spike's bucket missing (Durbin & Koopman 2012,
// §4.10: a missing observation only predicts; property test, seeded, the
// reference filter run with the same check). For airline12, arima111,
// ar1mean and ARIMA(1,1,0) with Fourier terms on absolute time. The
// values after the spike are drawn around the reference filter's own
// one-step forecast: 2.2 sd of the spike's own scale (that of the one-step
// error at the spike) at the spike's next bucket (ordinary for the
// reference, whose sd is larger after the gap, but beyond 1.5 on the
// spike's scale), then for the even seeds 2.2 spike-scale sd above the
// forecast of the filter with the run's members missing, by which the
// check judges the run (it joins; the run's median stays below 3), for
// the odd ones the reference's forecast or, if lower, 1.4 spike-scale sd
// above that one (so the run breaks), then N(0, 1) innovations. While the
// run is undecided the check's forecasts take its later members as
// ordinary values, so the forecasts are equal from the spike's next
// bucket on.
func TestGuardRetractsRun(t *testing.T) {
	const n, T, K, h = 240, 200, 20, 24
	for seed := uint64(1); seed <= 40; seed++ {
	cases:
		for _, c := range retractCases(t, n, seed) {
			spiky, holed := spikeRunSeries(t, c, seed, T, K)
			fs, fg := c.newF(t), c.newF(t)
			for _, f := range []*Filter{fs, fg} {
				if err := f.SetGuard(DefaultGuard); err != nil {
					t.Fatal(err)
				}
			}
			ms, vs, mean, v := make([]float64, h), make([]float64, h), make([]float64, h), make([]float64, h)
			for i := range spiky {
				fs.Step(spiky[i])
				fg.Step(holed[i])
				vd, z := fs.LastVerdict()
				switch {
				case i < T:
					continue
				case i == T:
					if vd != VerdictOutlier || !(z > 10) {
						t.Fatalf("%s seed %d: spike taken as %v, z %.2f", c.name, seed, vd, z)
					}
					continue
				case i <= T+2:
					if vg, zg := fg.LastVerdict(); vg != VerdictNone {
						t.Fatalf("%s seed %d: bucket %d is not ordinary without the spike (%v, z %.2f)", c.name, seed, i-T, vg, zg)
					}
				}
				fs.Forecast(ms, vs)
				fg.Forecast(mean, v)
				if i == T+1 && (vd != VerdictNone || fs.gd.runN != 2) {
					t.Fatalf("%s seed %d: the value after the spike did not join its run as an undecided ordinary value (%v, run %d)", c.name, seed, vd, fs.gd.runN)
				}
				if i == T+2 && (vd == VerdictShift || fs.gd.runN != 0) {
					t.Fatalf("%s seed %d: bucket %d taken as %v, run %d open", c.name, seed, i-T, vd, fs.gd.runN)
				}
				for k := range ms {
					if d := math.Abs(ms[k]-mean[k]) / math.Sqrt(v[k]); d > 1e-9 || math.Abs(vs[k]-v[k]) > 1e-9*v[k] {
						t.Errorf("%s seed %d, origin %d after the spike (run of %d open): h=%d forecast %v ± %v, with only the spike missing %v ± %v (%.3gσ)",
							c.name, seed, i-T, fs.gd.runN, k+1, ms[k], math.Sqrt(vs[k]), mean[k], math.Sqrt(v[k]), d)
						continue cases
					}
				}
			}
		}
	}
}

// spikeRunSeries builds the series of TestGuardRetractsRun from c.y: the
// spiked one (T+K+1 values) and the same with only the spike's bucket
// missing, the values after T drawn around the filters' own forecasts.
func spikeRunSeries(t testing.TB, c retractCase, seed uint64, T, K int) (spiky, holed []float64) {
	rng := rand.New(rand.NewPCG(seed, 77))
	fs, fg := c.newF(t), c.newF(t)
	for _, f := range []*Filter{fs, fg} {
		if err := f.SetGuard(DefaultGuard); err != nil {
			t.Fatal(err)
		}
	}
	// fd: the filter the run is judged by (its members missing)
	fd := c.newF(t)
	spiky = append([]float64(nil), c.y[:T]...)
	fs.Steps(spiky)
	fg.Steps(spiky)
	fd.Steps(spiky)
	mean, v, ms, vs := make([]float64, 1), make([]float64, 1), make([]float64, 1), make([]float64, 1)
	_, sd := oneStep(fg, mean, v)
	spiky = append(spiky, c.y[T]+20*sd)
	fs.Step(spiky[T])
	fg.Step(math.NaN())
	fd.Step(math.NaN())
	sdT := math.Sqrt(fs.sigma2 * fs.gd.runF) // the run's scale
	for i := T + 1; i <= T+K; i++ {
		mg, sg := oneStep(fg, mean, v)
		mc, _ := oneStep(fd, ms, vs)
		fd.Step(math.NaN())
		var x float64
		switch {
		case i == T+1:
			x = mg + 2.2*sdT // joins the run (mc = mg: both have only T missing)
		case i == T+2 && seed%2 == 0:
			x = mc + 2.2*sdT // joins; the run's median stays below 3
		case i == T+2:
			x = math.Min(mg, mc+1.4*sdT) // below 1.5: the run breaks
		default:
			x = mg + sg*rng.NormFloat64()
		}
		spiky = append(spiky, x)
		fs.Step(x)
		fg.Step(x)
	}
	holed = append([]float64(nil), spiky...)
	holed[T] = math.NaN()
	return spiky, holed
}

// A filter saved and restored (AppendState and AppendGuardState) at every
// step around a spike whose run takes in ordinary values and is then
// retracted (TestGuardRetractsRun's series, a run that breaks and one the
// median rule ends) continues bit for bit as the uninterrupted one, for
// each model (property of the saved state: while a run is open it holds
// the filter's complete state at the run's start). The filter with
// regressors is rebuilt with a wrong start time: the clock comes from the
// state.
func TestGuardRetractStateRoundTrip(t *testing.T) {
	const n, T, K, h = 240, 200, 8, 12
	for seed := uint64(1); seed <= 2; seed++ {
		for _, c := range retractCases(t, n, seed) {
			spiky, _ := spikeRunSeries(t, c, seed, T, K)
			run := func(f *Filter, y []float64) *Filter {
				if f == nil {
					f = c.newF(t)
					if err := f.SetGuard(DefaultGuard); err != nil {
						t.Fatal(err)
					}
				}
				f.Steps(y)
				return f
			}
			whole := run(nil, spiky)
			wm, wv := make([]float64, h), make([]float64, h)
			whole.Forecast(wm, wv)
			for cut := T - 1; cut <= T+4; cut++ {
				f := run(nil, spiky[:cut])
				g := c.newF(t)
				if c.m.Spec.NX > 0 {
					g.next = -1e9 // wrong clock: SetState restores it
				}
				if err := g.SetGuard(DefaultGuard); err != nil {
					t.Fatal(err)
				}
				if err := g.SetState(f.AppendState(nil)); err != nil {
					t.Fatal(err)
				}
				if err := g.SetGuardState(f.AppendGuardState(nil)); err != nil {
					t.Fatalf("%s cut %d: %v", c.name, cut, err)
				}
				run(g, spiky[cut:])
				gm, gv := make([]float64, h), make([]float64, h)
				g.Forecast(gm, gv)
				for k := range gm {
					if gm[k] != wm[k] || gv[k] != wv[k] {
						t.Fatalf("%s seed %d, cut at %d (run of %d open): h=%d forecast %v ± %v, uninterrupted %v ± %v",
							c.name, seed, cut-T, f.gd.runN, k+1, gm[k], gv[k], wm[k], wv[k])
					}
				}
			}
		}
	}
}

// A check state of the first layout (the run's a and P, no snapshot)
// still loads; one of any other length, or not starting with 1, does not.
func TestGuardStateFirstLayout(t *testing.T) {
	m := guardModels(t)["airline12"]
	_, _, f := runGuarded(t, m, simulate(m, 100, 3), 5, true)
	cur := f.AppendGuardState(nil)
	r, R := f.r, DefaultGuard.Run
	old := append([]float64(nil), cur[:7+2*R]...)
	old = append(old, make([]float64, r+r*r)...)
	old = append(old, cur[7+2*R:]...)
	g, _ := NewFilter(m, 5)
	if err := g.SetGuard(DefaultGuard); err != nil {
		t.Fatal(err)
	}
	if err := g.SetGuardState(old); err != nil {
		t.Fatalf("first layout: %v", err)
	}
	if err := g.SetGuardState(cur); err != nil {
		t.Fatalf("current layout: %v", err)
	}
	for _, bad := range [][]float64{old[:len(old)-1], append(append([]float64(nil), cur...), 0), append([]float64{2}, cur[1:]...)} {
		if err := g.SetGuardState(bad); err == nil {
			t.Errorf("a state of %d values starting with %v loaded", len(bad), bad[0])
		}
	}
}

// A run opened by a moderate value (3.5 sd) that a 20σ spike then joins,
// broken by the next value: the retraction gives the members back
// through the check, so the spike opens a run of its own and stays out.
// The forecasts from the break on equal, to 1e-9 relative, those of the
// series with only the first value missing, run with the same check
// (property test, seeded; Durbin & Koopman 2012, §4.10), and the spike
// moved nothing: absorbed, it would move them by several σ.
func TestGuardRetractKeepsSpikeOut(t *testing.T) {
	const n, T, h = 240, 200, 24
	for seed := uint64(1); seed <= 10; seed++ {
		for _, c := range retractCases(t, n, seed) {
			fs, fg := c.newF(t), c.newF(t)
			for _, f := range []*Filter{fs, fg} {
				if err := f.SetGuard(DefaultGuard); err != nil {
					t.Fatal(err)
				}
			}
			fs.Steps(c.y[:T])
			fg.Steps(c.y[:T])
			if fs.gd.runN != 0 {
				continue // a run already open: another scenario
			}
			ms, vs, mg, vg := make([]float64, h), make([]float64, h), make([]float64, h), make([]float64, h)
			m0, sd0 := oneStep(fs, ms, vs)
			fs.Step(m0 + 3.5*sd0)
			fg.Step(math.NaN())
			m1, sd1 := oneStep(fs, ms, vs)
			fs.Step(m1 + 20*sd1)
			fg.Step(m1 + 20*sd1)
			if fs.gd.runN != 2 {
				t.Fatalf("%s seed %d: the spike did not join the run (run %d)", c.name, seed, fs.gd.runN)
			}
			m2, _ := oneStep(fg, mg, vg)
			x := math.Min(m2, oneStepMean(fs, ms, vs)) - 0.5 // below both: the runs break
			fs.Step(x)
			fg.Step(x)
			for i := T + 3; i < T+10; i++ {
				mm, ss := oneStep(fg, mg, vg)
				x := mm + 0.3*ss
				fs.Step(x)
				fg.Step(x)
			}
			fs.Forecast(ms, vs)
			fg.Forecast(mg, vg)
			for k := range ms {
				if d := math.Abs(ms[k]-mg[k]) / math.Sqrt(vg[k]); d > 1e-9 || math.Abs(vs[k]-vg[k]) > 1e-9*vg[k] {
					t.Errorf("%s seed %d: h=%d forecast %v ± %v, with only the first value missing %v ± %v (%.3gσ)",
						c.name, seed, k+1, ms[k], math.Sqrt(vs[k]), mg[k], math.Sqrt(vg[k]), d)
					break
				}
			}
		}
	}
}

func oneStepMean(f *Filter, mean, v []float64) float64 {
	m, _ := oneStep(f, mean, v)
	return m
}
