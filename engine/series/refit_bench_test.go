package series

import (
	"math"
	"math/rand/v2"
	"syscall"
	"testing"
	"time"
)

// cpuTime is the process's user plus system CPU time: on a machine shared
// with other work the wall time of a refit (ns/op) includes waiting for a
// core, the CPU time does not.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if syscall.Getrusage(syscall.RUSAGE_SELF, &ru) != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// benchWindow is two weeks of one-minute data with a daily and a weekly
// shape, AR(1) noise and (when spiky) three spikes and a level shift.
func benchWindow(spiky bool) []float64 {
	r := rand.New(rand.NewPCG(7, 8))
	y := make([]float64, 20160)
	u := 0.0
	for i := range y {
		d := 2 * math.Pi * float64(i%1440) / 1440
		w := 2 * math.Pi * float64(i%10080) / 10080
		u = 0.6*u + r.NormFloat64()
		y[i] = 500 + 40*math.Sin(d) + 15*math.Cos(2*d) + 25*math.Sin(w) + 5*u
	}
	if spiky {
		y[5000] += 80
		y[12000] -= 70
		y[17000] += 90
		y[19800] += 90 // in the last 1000 buckets, which the outlier search covers
		for i := 19900; i < len(y); i++ {
			y[i] -= 40
		}
		for i := 15000; i < len(y); i++ {
			y[i] += 30
		}
	}
	return y
}

// BenchmarkRefitTwoCycles: one refit of a 20 160-bucket window with a
// daily and a weekly cycle at 1m (issue 12: a cold fit ≤ 2 s, a warm refit
// ≤ 300 ms), with and without the refit-time outlier search.
func BenchmarkRefitTwoCycles(b *testing.B) {
	for _, c := range []struct {
		name     string
		outliers bool
	}{{"plain", false}, {"outliers", true}} {
		b.Run(c.name, func(b *testing.B) {
			set := Settings{Kind: "gauge", StepSeconds: 60, Horizon: 60, Levels: []float64{50, 90},
				Window: 20160, MinPoints: 20160, RefitEvery: 1 << 30, Model: "auto", Transform: "none",
				Seasons: []float64{86400, 7 * 86400}, Guard: true, Outliers: c.outliers, Fingerprint: "b"}
			s, err := New("b", set)
			if err != nil {
				b.Fatal(err)
			}
			y := benchWindow(true)
			for i, v := range y {
				o, err := s.Observe(int64(i)*60e9, v)
				if err != nil {
					b.Fatal(err)
				}
				if o == NeedFit {
					b.Fatal("fit due before the window is full")
				}
			}
			if s.CloseOpen() != NeedFit {
				b.Fatal("no fit due")
			}
			cold := s.FitJob().Run()
			if _, err := s.Install(cold); err != nil {
				b.Fatal(err)
			}
			b.Logf("cold fit %v: %s, %d outliers", cold.Elapsed, cold.Choice.Spec.Label(), len(cold.Outliers))
			j := s.FitJob()
			b.ResetTimer()
			c0 := cpuTime()
			for range b.N {
				if r := j.Run(); r.Err != nil {
					b.Fatal(r.Err)
				}
			}
			b.ReportMetric(float64((cpuTime()-c0).Milliseconds())/float64(b.N), "cpu-ms/op")
		})
	}
}

// loadCurve is the shape cmd/forewarn's load tests write: a daily cycle
// around a slow rise, one value a minute, plus seeded Gaussian noise of
// standard deviation sd, written to 3 decimals (ours; the numbers do not
// matter).
func loadCurve(n int, sd float64) []float64 {
	r := rand.New(rand.NewPCG(16, 1))
	x := make([]float64, n)
	for i := range x {
		v := 500 + 0.01*float64(i) + 80*math.Sin(2*math.Pi*float64(i)/1440) + 7*math.Sin(float64(i)*0.37)
		x[i] = math.Round((v+sd*r.NormFloat64())*1000) / 1000
	}
	return x
}

// defaultSettings are config.DefaultSeries' (one-minute step, window
// 2000, refit every 60, automatic model and transform, calibrated).
func defaultSettings() Settings {
	return Settings{Kind: "gauge", StepSeconds: 60, Horizon: 60, Levels: []float64{50, 90},
		Window: 2000, MinPoints: 50, RefitEvery: 60, Model: "auto", Constant: "auto",
		Transform: "auto", Calibrate: true, Fingerprint: "bench"}
}

// BenchmarkRefitDefault2000 is one automatic refit of a full 2000-bucket
// window under the default settings, warm from the previous model: the
// FitJob (order search) and its Install (filter over the window and the
// calibrator's warm start). It is the unit of work of a history load
// (forewarn load), one per refit point. noisy: the curve with noise of
// sd 3; smooth: without noise, only the rounding to 3 decimals (a
// near-deterministic curve that the search fits with a slowly converging
// ARIMA(1,1,5)).
//
//	go test -run '^$' -bench RefitDefault2000 -cpuprofile cpu.out ./engine/series
func BenchmarkRefitDefault2000(b *testing.B) {
	b.Run("noisy", func(b *testing.B) { benchRefit(b, 3) })
	b.Run("smooth", func(b *testing.B) { benchRefit(b, 0) })
}

func benchRefit(b *testing.B, sd float64) {
	s, err := New("bench", defaultSettings())
	if err != nil {
		b.Fatal(err)
	}
	x := loadCurve(2200, sd)
	for i, v := range x {
		out, err := s.Observe(int64(i)*60e9, v)
		if err != nil {
			b.Fatal(err)
		}
		if out == NeedFit {
			if _, err := s.Install(s.FitJob().Run()); err != nil {
				b.Fatal(err)
			}
		}
	}
	var job float64
	for b.Loop() {
		r := s.FitJob().Run()
		if r.Err != nil {
			b.Fatal(r.Err)
		}
		job += r.Elapsed.Seconds()
		if _, err := s.Install(r); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(job/float64(b.N), "job_s/op")
}

// BenchmarkRefitOutlierSearch: the refit-time outlier search alone
// (FitJob.detect on the last outlierSpan buckets, with the choice of a
// warm refit of the 20 160-bucket two-cycle window), to tell its share of
// BenchmarkRefitTwoCycles/outliers.
func BenchmarkRefitOutlierSearch(b *testing.B) {
	set := Settings{Kind: "gauge", StepSeconds: 60, Horizon: 60, Levels: []float64{50, 90},
		Window: 20160, MinPoints: 20160, RefitEvery: 1 << 30, Model: "auto", Transform: "none",
		Seasons: []float64{86400, 7 * 86400}, Guard: true, Outliers: true, Fingerprint: "b"}
	s, err := New("b", set)
	if err != nil {
		b.Fatal(err)
	}
	for i, v := range benchWindow(true) {
		if _, err := s.Observe(int64(i)*60e9, v); err != nil {
			b.Fatal(err)
		}
	}
	s.CloseOpen()
	if _, err := s.Install(s.FitJob().Run()); err != nil {
		b.Fatal(err)
	}
	j := s.FitJob()
	j.Settings.Outliers = false
	base := j.Run()
	if base.Err != nil || base.Choice.Fourier == nil {
		b.Fatalf("warm refit: %v", base.Err)
	}
	n := len(j.Window)
	X := base.Choice.Fourier.Matrix(float64((j.End-int64(n)+1)*60), 60, n)
	found := 0
	b.ResetTimer()
	c0 := cpuTime()
	for range b.N {
		r := base
		r.Design = append([]ColumnSet(nil), base.Design...)
		j.detect(&r, X)
		found = len(r.Outliers)
	}
	b.ReportMetric(float64((cpuTime()-c0).Microseconds())/1000/float64(b.N), "cpu-ms/op")
	b.ReportMetric(float64(found), "effects")
}
