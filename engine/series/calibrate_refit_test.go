package series

import (
	"math"
	"testing"

	"forewarn/engine/calibrate"
)

// Property test (seeded simulation; acceptance of issue 13): the long-run
// miss rate of the bands a running series publishes obeys the bound of
// Gibbs & Candès (2021), "Adaptive conformal inference under distribution
// shift", NeurIPS 34, Proposition 1, across the refits of its model. With
// the feedback of horizon h arriving h buckets late (engine/calibrate
// package documentation):
//
//	|(1/T)·Σ_{t≤T} err_t − α| ≤ (max(α_1, 1 − α_1) + hγ)/(γT),
//	α_1 = 1 − q_1/B,  γ = η/B,
//
// behind which lies the identity Σ_t (err_t − α) = (q_{T+1} − q_1)/η: the
// thresholds move by the online update alone. The series is a Gaussian
// AR(1) fitted to an AR(1) with t(3) innovations (misspecSettings: window
// 2000, refit every 60 buckets, calibration on), 6 000 buckets, so about
// a hundred refits fall inside the run. err_t is the miss of the band as
// published (Forecast, judged against the value h buckets later), counted
// over every forecast issued since the first fit whose target closed; q_1
// is the threshold the first forecast was published with and q_{T+1} the
// threshold at the end. Both the identity (to half a miss: a band's end is
// stored as float32 for the update) and the bound are checked at h = 1, 6
// and 24 and both levels. Replacing the thresholds at each refit (the warm
// start) breaks the identity.
func TestSeriesLongRunBoundAcrossRefits(t *testing.T) {
	const n = 6000
	y := ar1T(n, 0.6, 100, 41)
	set := misspecSettings(true)
	s, err := New("bound", set)
	if err != nil {
		t.Fatal(err)
	}
	nominal := [2]float64{0.5, 0.9}
	type band struct{ lo, hi [3][2]float64 }
	bands := make([]band, n)
	issued := make([]bool, n)
	var q1, qEnd [3][2]float64
	first, refits := -1, 0
	var fitted int64 = -1
	for i, v := range y {
		out, err := s.Observe(at(int64(i)), v)
		if err != nil {
			t.Fatalf("bucket %d: %v", i, err)
		}
		if out == NeedFit {
			if out, err = s.Install(s.FitJob().Run()); err != nil {
				t.Fatalf("refit at bucket %d: %v", i-1, err)
			}
		}
		if out != Published {
			continue
		}
		if m := s.Snapshot().Model; m != nil && m.FittedAt != fitted {
			fitted = m.FittedAt
			refits++
		}
		o := i - 1 // Observe at bucket i closed bucket i−1
		f := s.Forecast()
		for k, h := range misspecHorizons {
			for l := range 2 {
				bands[o].lo[k][l], bands[o].hi[k][l] = f.Points[h-1].Lower[l].Value, f.Points[h-1].Upper[l].Value
				if first < 0 {
					q1[k][l] = s.Calibrator().Threshold(h, l)
				}
			}
		}
		if first < 0 {
			first = o
		}
		issued[o] = true
	}
	if refits < 50 {
		t.Fatalf("%d fits during the run, want a hundred or so", refits)
	}
	c := s.Calibrator()
	for k, h := range misspecHorizons {
		for l := range 2 {
			qEnd[k][l] = c.Threshold(h, l)
		}
	}
	// Bucket n−1 never closed (no later value arrived), so the last
	// target resolved is n−2.
	const B, eta = calibrate.DefaultBound, calibrate.DefaultRate
	gamma := eta / B
	for k, h := range misspecHorizons {
		for l, nom := range nominal {
			alpha := 1 - nom
			T, miss := 0, 0
			for o := first; o+h <= n-2; o++ {
				if !issued[o] {
					continue
				}
				T++
				if v := y[o+h]; v < bands[o].lo[k][l] || v > bands[o].hi[k][l] {
					miss++
				}
			}
			if !(q1[k][l] > 0 && q1[k][l] < B && qEnd[k][l] > 0 && qEnd[k][l] < B) {
				t.Fatalf("h=%d level %.0f %%: thresholds %v → %v outside (0, B): the identity below needs them inside", h, 100*nom, q1[k][l], qEnd[k][l])
			}
			drift := (qEnd[k][l] - q1[k][l]) / eta
			if d := float64(miss) - alpha*float64(T) - drift; math.Abs(d) > 0.5 {
				t.Errorf("h=%d level %.0f %%: %d misses of %d, α·T + (q_end − q_1)/η = %.3f: off by %.3f, so the thresholds moved by more than the online update",
					h, 100*nom, miss, T, alpha*float64(T)+drift, d)
			}
			a1 := 1 - q1[k][l]/B
			dev := math.Abs(float64(miss)/float64(T) - alpha)
			bound := (math.Max(a1, 1-a1) + float64(h)*gamma) / (gamma * float64(T))
			if dev > bound {
				t.Errorf("h=%d level %.0f %%: |miss rate − α| = %.4f over %d forecasts exceeds the bound %.4f", h, 100*nom, dev, T, bound)
			}
			t.Logf("h=%2d level %.0f %%: T=%d, miss rate %.4f (α %.2f), |deviation| %.4f, bound %.4f; thresholds %.3f → %.3f",
				h, 100*nom, T, float64(miss)/float64(T), alpha, dev, bound, q1[k][l], qEnd[k][l])
		}
	}
	t.Logf("%d fits during %d buckets", refits, n)
}
