package series

import (
	"math"
	"math/rand/v2"
	"runtime"
	"testing"
)

// TestMemoryTwoCyclesFullWindow measures what one series holds with a daily
// and a weekly cycle at a one-minute step and a window of 20 160 buckets
// (two weeks), horizon 60, two levels, calibration and the online check
// on: the heap grows by the live heap of n series restored from one fitted
// series' snapshot (each restore builds its own window buffer, filter,
// regressors, calibrator and forecast buffers, as a live series has),
// divided by n (runtime.MemStats.HeapAlloc after a collection). Issue 12's
// target is at most 400 KB. Seeded data: a daily and a weekly shape plus
// AR(1) noise.
func TestMemoryTwoCyclesFullWindow(t *testing.T) {
	if testing.Short() {
		t.Skip("fits 20 160 buckets with two cycles")
	}
	const n, window = 20, 20160
	set := Settings{Kind: "gauge", StepSeconds: 60, Horizon: 60, Levels: []float64{50, 90},
		Window: window, MinPoints: window, RefitEvery: 1 << 30, Model: "auto", Transform: "none",
		Seasons: []float64{86400, 7 * 86400}, Calibrate: true, Guard: true, Fingerprint: "mem"}
	r := rand.New(rand.NewPCG(7, 7))
	y := make([]float64, window+1)
	u := 0.0
	for i := range y {
		d := 2 * math.Pi * float64(i%1440) / 1440
		w := 2 * math.Pi * float64(i%10080) / 10080
		u = 0.6*u + r.NormFloat64()
		y[i] = 500 + 40*math.Sin(d) + 15*math.Cos(2*d) + 25*math.Sin(w) + 5*u
	}
	s, err := New("mem", set)
	if err != nil {
		t.Fatal(err)
	}
	drive(t, s, y, 0)
	if !s.HasModel() || s.model.Spec.NX == 0 {
		t.Fatalf("no model with Fourier terms (model %v)", s.model)
	}
	snap := *s.Snapshot()
	keep := make([]*Series, n)
	var before, after runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&before)
	for i := range keep {
		if keep[i], err = Restore(&snap, set); err != nil {
			t.Fatal(err)
		}
	}
	runtime.GC()
	runtime.ReadMemStats(&after)
	per := float64(after.HeapAlloc-before.HeapAlloc) / n
	runtime.KeepAlive(keep)
	t.Logf("one series, cycles 1d and 7d (%s, %d regressors), window %d at 1m, horizon 60: %.0f bytes (%.1f KB); the window alone is %d KB",
		s.model.Spec.Label(), s.model.Spec.NX, window, per, per/1024, 8*windowCap(window)/1024)
	if per > 400*1024 {
		t.Errorf("one series holds %.1f KB, want ≤ 400 KB", per/1024)
	}
}
