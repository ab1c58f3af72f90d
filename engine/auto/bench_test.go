package auto

import (
	"encoding/json"
	"math"
	"os"
	"os/exec"
	"sync"
	"testing"
	"time"

	"forewarn/engine/internal/refdata"
)

// hourly24 is a deterministic hourly series of 2000 points with a daily
// period: a daily profile 20·sin(2πt/24) plus the airline model
// (0,1,1)(0,1,1)[24], θ = −0.4, Θ = −0.6, σ = 1, simulated from a seeded
// generator around a level of 500 (positive, so log and boxcox are
// candidates too).
func hourly24(b testing.TB) []float64 {
	m := mustModel(b, "0,1,1 x 0,1,1", 24, false, []float64{-0.4, -0.6}, 1)
	y := simulate(b, m, 2000, 500, 2024)
	for i := range y {
		y[i] += 20 * math.Sin(2*math.Pi*float64(i)/24)
	}
	return y
}

// BenchmarkSelectHourly24 is a cold automatic choice (transform, d, D,
// stepwise orders) for 2000 hourly points with s = 24. Target: < 1 s.
func BenchmarkSelectHourly24(b *testing.B) {
	y := hourly24(b)
	b.ReportAllocs()
	var fits int
	for b.Loop() {
		c, err := Select(y, Options{Period: 24})
		if err != nil {
			b.Fatal(err)
		}
		fits = len(c.Tried)
	}
	b.ReportMetric(float64(fits), "fits/op")
}

// BenchmarkWarmHourly24 is a warm-started refit of the same series from
// its cold choice, after 24 new points. Target: < 50 ms.
func BenchmarkWarmHourly24(b *testing.B) {
	y := hourly24(b)
	c, err := Select(y[:1976], Options{Period: 24})
	if err != nil {
		b.Fatal(err)
	}
	w := &Warm{Spec: c.Spec, Params: c.Result.Model.Params(), Transform: c.Transform}
	b.ReportAllocs()
	var fits int
	for b.Loop() {
		c, err := Select(y, Options{Period: 24, Warm: w})
		if err != nil {
			b.Fatal(err)
		}
		fits = len(c.Tried)
	}
	b.ReportMetric(float64(fits), "fits/op")
}

// BenchmarkSelectMinuteDailyWeekly is a cold automatic choice on 14 days
// of one-minute data (20 160 points) with daily and weekly cycles (the
// seeded series of TestSeasonsChoiceMinute). Target (issue 12): ≤ 2 s.
func BenchmarkSelectMinuteDailyWeekly(b *testing.B) {
	const t0 = 1.7e9
	y := minuteSeries(b, 20160, t0)
	o := Options{Seasons: []float64{day, week}, Step: 60, Start: t0}
	b.ReportAllocs()
	var fits int
	for b.Loop() {
		c, err := Select(y, o)
		if err != nil {
			b.Fatal(err)
		}
		fits = len(c.Tried)
	}
	b.ReportMetric(float64(fits), "fits/op")
}

// BenchmarkWarmMinuteDailyWeekly is a warm refit of the same series after
// 60 new minutes, from the cold choice. Target (issue 12): ≤ 300 ms.
func BenchmarkWarmMinuteDailyWeekly(b *testing.B) {
	const t0 = 1.7e9
	y := minuteSeries(b, 20160, t0)
	o := Options{Seasons: []float64{day, week}, Step: 60, Start: t0 + 3600}
	c, err := Select(y[60:], o)
	if err != nil {
		b.Fatal(err)
	}
	o.Start = t0
	o.Warm = &Warm{Spec: c.Spec, Params: c.Result.Model.Params(), Transform: c.Transform, Seasons: c.Seasons}
	b.ReportAllocs()
	var fits int
	for b.Loop() {
		c, err := Select(y, o)
		if err != nil {
			b.Fatal(err)
		}
		fits = len(c.Tried)
	}
	b.ReportMetric(float64(fits), "fits/op")
}

// BenchmarkSelectTaylor is a cold automatic choice on the first 3 984
// values of taylor with cycles 48 and 336 (Fourier terms for both): the
// fit R forecast 8.20's dynamic harmonic regression makes at the last
// origin of testdata/r/taylor_accuracy.R, whose seconds per fit that JSON
// records (issue 12 asks for at least 50× R).
func BenchmarkSelectTaylor(b *testing.B) {
	x := refdata.Dataset(b, "taylor")[:3984]
	b.ReportAllocs()
	for b.Loop() {
		if _, err := Select(x, Options{Seasons: []float64{48, 336}, Start: 1}); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkSelectMSTLTaylor is the decomposition-plus-ARIMA route
// (SelectMSTL) on the same 3 984 values of taylor, cycles 48 and 336; R
// forecast 8.20's stlm takes the seconds testdata/r/taylor_accuracy.json
// records as stlm_seconds.
func BenchmarkSelectMSTLTaylor(b *testing.B) {
	x := refdata.Dataset(b, "taylor")[:3984]
	b.ReportAllocs()
	for b.Loop() {
		if _, err := SelectMSTL(x, []int{48, 336}, Options{}); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkSelectTaylorVsR is BenchmarkSelectTaylor with R's time taken in
// the same run: when Rscript is on the PATH and FOREWARN_R_SPEED=1, it first
// runs testdata/r/taylor_speed.R (R 4.2.2, forecast 8.20: one
// auto.arima(xreg = fourier(K = c(10, 10))) fit and one stlm fit of the
// same 3 984 values) and reports R's seconds and the ratio R/ours
// (issue 12: at least 50× R's dynamic harmonic regression fit).
func BenchmarkSelectTaylorVsR(b *testing.B) {
	x := refdata.Dataset(b, "taylor")[:3984]
	rDHR, rSTLM := rSpeedOnce(b)
	b.ReportAllocs()
	start := time.Now()
	for b.Loop() {
		if _, err := Select(x, Options{Seasons: []float64{48, 336}, Start: 1}); err != nil {
			b.Fatal(err)
		}
	}
	ours := time.Since(start).Seconds() / float64(b.N)
	if rDHR > 0 {
		b.ReportMetric(rDHR, "R-dhr-s")
		b.ReportMetric(rSTLM, "R-stlm-s")
		b.ReportMetric(rDHR/ours, "x-faster-than-R-dhr")
	}
}

var rSpeed struct {
	once      sync.Once
	dhr, stlm float64
}

// rSpeedOnce runs testdata/r/taylor_speed.R once per process (see
// BenchmarkSelectTaylorVsR); zeros when R is not asked for or not present.
func rSpeedOnce(b *testing.B) (dhr, stlm float64) {
	rSpeed.once.Do(func() {
		if os.Getenv("FOREWARN_R_SPEED") != "1" {
			return
		}
		rs, err := exec.LookPath("Rscript")
		if err != nil {
			b.Log("Rscript not found: R's time not measured")
			return
		}
		cmd := exec.Command(rs, "testdata/r/taylor_speed.R")
		cmd.Dir = "../.."
		out, err := cmd.Output()
		if err != nil {
			b.Logf("taylor_speed.R: %v", err)
			return
		}
		var r struct {
			DHR  []float64 `json:"dhr_seconds"`
			STLM []float64 `json:"stlm_seconds"`
		}
		if err := json.Unmarshal(out, &r); err != nil || len(r.DHR) == 0 || len(r.STLM) == 0 {
			b.Logf("taylor_speed.R output %q: %v", out, err)
			return
		}
		rSpeed.dhr, rSpeed.stlm = r.DHR[0], r.STLM[0]
	})
	return rSpeed.dhr, rSpeed.stlm
}

// BenchmarkWarmTaylor is a warm refit of taylor one day later (4 032
// values) from the cold choice at 3 984 (the profile route, which the
// refit keeps: MSTL again, the ARIMA errors warm).
func BenchmarkWarmTaylor(b *testing.B) {
	x := refdata.Dataset(b, "taylor")
	c, err := Select(x[:3984], Options{Seasons: []float64{48, 336}, Start: 1})
	if err != nil {
		b.Fatal(err)
	}
	w := c.warm()
	b.ReportAllocs()
	for b.Loop() {
		if _, err := Select(x[:4032], Options{Seasons: []float64{48, 336}, Start: 1, Warm: w}); err != nil {
			b.Fatal(err)
		}
	}
}
