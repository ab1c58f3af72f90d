package series

import (
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"forewarn/engine/auto"
)

// Two cycles of the profile tests: 24 and 168 one-minute steps.
const (
	shortSec = 24 * step
	longSec  = 168 * step
)

// twoCycleAt is the seeded truth of the profile tests: at bucket b the
// mean 50 plus a saw-tooth of the short cycle (0…6 over its 24 steps)
// plus a block of the long cycle (−8 over 40 of its 168 steps), both by
// the phase of absolute data time, plus AR(1) noise (φ₁ = 0.6, sd 0.5).
// Shapes with corners, which few Fourier pairs carry poorly, so that the
// holdout of auto.Select prefers the profile route.
func twoCycleAt(from int64, n int, seed uint64) (y, mean []float64) {
	r := rand.New(rand.NewPCG(seed, 7))
	y, mean = make([]float64, n), make([]float64, n)
	u := 0.0
	for i := range y {
		t := float64((from + int64(i)) * step)
		ps := math.Mod(t, shortSec) / shortSec
		pl := math.Mod(t, longSec) / longSec
		m := 50 + 6*ps
		if pl < 40.0/168 {
			m -= 8
		}
		u = 0.6*u + 0.5*r.NormFloat64()
		y[i], mean[i] = m+u, m
	}
	return y, mean
}

func profileSettings() Settings {
	return Settings{Kind: "gauge", StepSeconds: step, Horizon: 30, Levels: []float64{80, 95},
		Window: 800, MinPoints: 800, RefitEvery: 60, Model: "auto", Transform: "none",
		Seasons: []float64{shortSec, longSec}, Fingerprint: "profile"}
}

// On a seeded series with two cycles of cornered shapes the refit's
// holdout (auto.Select, "Choosing the route") picks the profile route; the
// daemon carries it as a profile column set with phase from data time, and
// its forecast equals the one of the choice's own filter (auto.Choice
// Filter, stepped over the same window) to 1e-9; the label and the cycles
// say "profile"; a warm refit keeps the route.
func TestProfileRouteInDaemon(t *testing.T) {
	const from = 29_000_017 // no multiple of either cycle
	y, _ := twoCycleAt(from, 900, 11)
	s, err := New("p", profileSettings())
	if err != nil {
		t.Fatal(err)
	}
	i := 0
	var r FitResult
	var job *FitJob
	for ; i < len(y); i++ {
		o, err := s.Observe(at(from+int64(i)), y[i])
		if err != nil {
			t.Fatal(err)
		}
		if o == NeedFit {
			job = s.FitJob()
			r = job.Run()
			if _, err := s.Install(r); err != nil {
				t.Fatal(err)
			}
			break
		}
	}
	if r.Choice == nil || r.Choice.Route != auto.RouteProfile || r.Choice.Score == nil {
		t.Fatalf("route %q (score %+v): want the profile route chosen by the holdout", r.Choice.Route, r.Choice.Score)
	}
	t.Logf("holdout MAE: Fourier %.3f, profile %.3f", r.Choice.Score.Fourier, r.Choice.Score.Profile)
	ms := s.Snapshot().Model
	if len(ms.Design) != 1 || ms.Design[0].Kind != SetProfile || ms.NX != 2 {
		t.Fatalf("design %+v, NX %d: want one profile column set of 2 columns", ms.Design, ms.NX)
	}
	for _, c := range ms.Cycles {
		if c.Terms != auto.TermsProfile {
			t.Fatalf("cycles %+v: want every cycle carried by the profile", ms.Cycles)
		}
	}
	f := s.Forecast()
	if !strings.Contains(f.Model.Spec, "profile of 2 cycles") {
		t.Errorf("model label %q: want it to say the profile", f.Model.Spec)
	}
	// the choice's own filter over the same window
	cf, err := r.Choice.Filter(30)
	if err != nil {
		t.Fatal(err)
	}
	cf.Steps(job.Window)
	mean, v := make([]float64, 30), make([]float64, 30)
	cf.Forecast(mean, v)
	for h := range mean {
		if d := math.Abs(f.Points[h].Mean - mean[h]); d > 1e-9*math.Max(1, math.Abs(mean[h])) {
			t.Fatalf("h=%d: daemon forecast %.12g, the choice's %.12g", h+1, f.Points[h].Mean, mean[h])
		}
	}
	// and follows the truth's shape from data time (seeded truth; a wrong
	// phase is off by up to 8 + 6): mean absolute error against the
	// noise-free mean ≤ 1 (the AR(1) noise has sd 0.5/√(1−0.36) = 0.63)
	_, truth := twoCycleAt(from+int64(i)+1, 30, 0)
	sum := 0.0
	for h, p := range f.Points {
		sum += math.Abs(p.Mean - truth[h])
	}
	if e := sum / 30; e > 1 {
		t.Errorf("mean absolute error %.3f against the true seasonal mean, want ≤ 1", e)
	}
	// a warm refit keeps the route
	drive(t, s, y[i+1:], from+int64(i)+1)
	ms = s.Snapshot().Model
	if ms.FittedAt <= from+int64(i) || len(ms.Design) == 0 || ms.Design[0].Kind != SetProfile {
		t.Fatalf("after the warm refit (fitted at %d): design %+v: want the profile route kept", ms.FittedAt, ms.Design)
	}
}
