package series

import (
	"errors"
	"math"
	"math/rand/v2"
	"reflect"
	"testing"
	"time"
)

const step = 60 // seconds

func settings() Settings {
	return Settings{
		Kind: "gauge", StepSeconds: step, Horizon: 12, Levels: []float64{80, 95},
		Window: 200, MinPoints: 40, RefitEvery: 25, Model: "1,1,0", Transform: "none",
		Fingerprint: "test",
	}
}

func at(bucket int64) int64 { return bucket * step * int64(time.Second) }

// drive feeds one value per bucket, running every refit inline, and
// returns the forecasts published (copied).
func drive(t *testing.T, s *Series, values []float64, from int64) []Forecast {
	t.Helper()
	var out []Forecast
	for i, v := range values {
		o, err := s.Observe(at(from+int64(i)), v)
		if err != nil {
			t.Fatalf("bucket %d: %v", from+int64(i), err)
		}
		if o == NeedFit {
			o, err = s.Install(s.FitJob().Run())
			if err != nil {
				t.Fatalf("refit at bucket %d: %v", from+int64(i), err)
			}
		}
		if o == Published {
			out = append(out, copyForecast(s.Forecast()))
		}
	}
	return out
}

func copyForecast(f *Forecast) Forecast {
	c := *f
	c.Points = make([]Point, len(f.Points))
	for i, p := range f.Points {
		p.Lower = append([]Bound(nil), p.Lower...)
		p.Upper = append([]Bound(nil), p.Upper...)
		p.Scale = append([]float64(nil), p.Scale...)
		c.Points[i] = p
	}
	return c
}

// trend returns a random walk with drift (seeded), a series a first
// difference makes stationary (common practice).
func trend(n int, seed uint64) []float64 {
	r := rand.New(rand.NewPCG(seed, 1))
	x := make([]float64, n)
	v := 1000.0
	for i := range x {
		v += 2 + r.NormFloat64()
		x[i] = v
	}
	return x
}

func TestWarmupThenForecasts(t *testing.T) {
	s, err := New("shop.orders", settings())
	if err != nil {
		t.Fatal(err)
	}
	fcs := drive(t, s, trend(100, 1), 1000)
	// Buckets close one observation late: 99 closes, the first fit at the
	// 40th closed bucket, then one forecast per closed bucket.
	if want := 99 - 40 + 1; len(fcs) != want {
		t.Fatalf("published %d forecasts, want %d", len(fcs), want)
	}
	last := fcs[len(fcs)-1]
	if last.Origin != time.Unix(at(1098)/1e9, 0).UTC() {
		t.Errorf("origin %v, want the start of bucket 1098", last.Origin)
	}
	for i, p := range last.Points {
		if p.H != i+1 || !p.Time.Equal(last.Origin.Add(time.Duration(i+1)*step*time.Second)) {
			t.Fatalf("point %d: h %d time %v", i, p.H, p.Time)
		}
		if !(p.Lower[1].Value <= p.Lower[0].Value && p.Lower[0].Value <= p.Median &&
			p.Median <= p.Upper[0].Value && p.Upper[0].Value <= p.Upper[1].Value) {
			t.Fatalf("point %d: bands out of order: %+v", i, p)
		}
	}
	if last.Model.Spec != "ARIMA 1,1,0" || last.Model.Transform != "none" {
		t.Errorf("model info %+v", last.Model)
	}
}

func TestLateAndSameBucket(t *testing.T) {
	s, _ := New("q", settings())
	if _, err := s.Observe(at(10), 1); err != nil {
		t.Fatal(err)
	}
	if _, err := s.Observe(at(10)+5e9, 2); err != nil { // same bucket: last value wins
		t.Fatal(err)
	}
	if o, err := s.Observe(at(11), 3); err != nil || o != Warming {
		t.Fatalf("closing bucket 10: %v %v", o, err)
	}
	if got := s.Snapshot().Window; len(got) != 1 || got[0] != 2 {
		t.Fatalf("window %v, want [2]", got)
	}
	if _, err := s.Observe(at(10), 4); !errors.Is(err, ErrLate) {
		t.Fatalf("late observation: err %v, want ErrLate", err)
	}
	if _, err := s.Observe(at(11), math.Inf(1)); !errors.Is(err, ErrNotFinite) {
		t.Fatalf("Inf: err %v", err)
	}
	if got := s.Snapshot().Window; len(got) != 1 || got[0] != 2 {
		t.Fatalf("rejected observations changed the window: %v", got)
	}
}

func TestGapsAreMissing(t *testing.T) {
	s, _ := New("q", settings())
	for _, b := range []int64{1, 2, 5, 6} {
		if _, err := s.Observe(at(b), float64(b)); err != nil {
			t.Fatal(err)
		}
	}
	w := s.Snapshot().Window
	if len(w) != 5 || w[0] != 1 || w[1] != 2 || !math.IsNaN(w[2]) || !math.IsNaN(w[3]) || w[4] != 5 {
		t.Fatalf("window %v, want [1 2 NaN NaN 5]", w)
	}
}

func TestCounterCarriesThroughReset(t *testing.T) {
	set := settings()
	set.Kind = "counter"
	s, _ := New("downloads", set)
	raw := []float64{100, 150, 30, 80, 10}
	for i, v := range raw {
		if _, err := s.Observe(at(int64(i)), v); err != nil {
			t.Fatal(err)
		}
	}
	// 100, 150, reset → 150+30, 150+80, reset → 230+10 (open).
	want := []float64{100, 150, 180, 230}
	if got := s.Snapshot().Window; !reflect.DeepEqual(got, want) {
		t.Fatalf("totals %v, want %v", got, want)
	}
	if sn := s.Snapshot(); sn.CounterResets != 2 || sn.OpenValue != 240 {
		t.Fatalf("resets %d open %g", sn.CounterResets, sn.OpenValue)
	}
}

func TestCounterNeverBelowLast(t *testing.T) {
	set := settings()
	set.Kind = "counter"
	set.Model = "0,1,1"
	s, _ := New("c", set)
	// A flat counter with tiny noise: bands of a plain model would dip
	// below the last value.
	r := rand.New(rand.NewPCG(7, 7))
	x := make([]float64, 120)
	v := 500.0
	for i := range x {
		v += math.Abs(r.NormFloat64()) * 0.1
		x[i] = v
	}
	fcs := drive(t, s, x, 0)
	for _, f := range fcs {
		for _, p := range f.Points {
			for j := range p.Lower {
				if !p.Lower[j].OK || p.Lower[j].Value < f.LastValue || p.Median < f.LastValue || p.Mean < f.LastValue {
					t.Fatalf("origin %v h %d: below last value %g: %+v", f.Origin, p.H, f.LastValue, p)
				}
			}
		}
	}
}

// The window keeps the last Window closed buckets in order, however far
// it has moved along its buffer, across a restore (from a window longer
// than the new setting) and after a gap that empties it; pushing a bucket
// into a full window allocates nothing. Expected values are the plain
// last-n slice of everything observed.
func TestWindowSlides(t *testing.T) {
	set := settings()
	set.Model, set.MinPoints, set.Window, set.RefitEvery = "0,1,0", 8, 16, 1<<30
	s, err := New("w", set)
	if err != nil {
		t.Fatal(err)
	}
	var all []float64
	b := int64(0)
	observe := func(s *Series, n int) {
		t.Helper()
		for range n {
			v := float64(b) + math.Sin(float64(b)) // not constant after differencing
			o, err := s.Observe(at(b), v)
			if err == nil && o == NeedFit {
				_, err = s.Install(s.FitJob().Run())
			}
			if err != nil {
				t.Fatal(err)
			}
			all = append(all, v)
			b++
		}
	}
	check := func(s *Series, what string) {
		t.Helper()
		closed := all[:len(all)-1] // the last observation is the open bucket
		want := closed[max(0, len(closed)-set.Window):]
		if got := s.Snapshot().Window; !reflect.DeepEqual(got, want) {
			t.Fatalf("%s: window %v, want %v", what, got, want)
		}
	}
	observe(s, 5)
	check(s, "filling")
	observe(s, 3*windowCap(set.Window)+7) // slides back to the buffer's start several times
	check(s, "after sliding")

	long := *s.Snapshot()
	long.Window = append([]float64(nil), long.Window...)
	short := set
	short.Window = 12
	r, err := Restore(&long, short)
	if err != nil {
		t.Fatal(err)
	}
	set.Window = short.Window
	check(r, "restored into a shorter window")
	observe(r, 25)
	check(r, "after sliding, restored")

	b += int64(set.Window) + 3 // a gap longer than the window: it starts afresh
	all = all[:0]
	observe(r, 12)
	check(r, "after a gap")
	observe(r, 30)
	// One run is 100 closes (AllocsPerRun rounds the average per run down).
	if allocs := testing.AllocsPerRun(1, func() {
		for range 100 {
			observe(r, 1)
			all = all[:len(all)-1]
		}
	}); allocs != 0 {
		t.Fatalf("100 closes into a full window: %v allocations, want 0", allocs)
	}
}

// TestSnapshotResume checks that a series restored from its snapshot at any
// point produces exactly the forecasts of an uninterrupted one.
func TestSnapshotResume(t *testing.T) {
	x := trend(160, 3)
	whole, _ := New("r", settings())
	want := drive(t, whole, x, 0)

	first, _ := New("r", settings())
	a := drive(t, first, x[:97], 0)
	snap := *first.Snapshot()
	second, err := Restore(&snap, settings())
	if err != nil {
		t.Fatal(err)
	}
	b := drive(t, second, x[97:], 97)
	got := append(a, b...)
	if !reflect.DeepEqual(got, want) {
		t.Fatalf("resumed run differs from the uninterrupted one (%d vs %d forecasts)", len(got), len(want))
	}
}

func TestRestoreWithOtherSettingsRefits(t *testing.T) {
	s, _ := New("r", settings())
	drive(t, s, trend(80, 4), 0)
	snap := *s.Snapshot()
	set := settings()
	set.Horizon = 6
	set.Fingerprint = "other"
	r, err := Restore(&snap, set)
	if err != nil {
		t.Fatal(err)
	}
	if r.HasModel() {
		t.Fatal("a record made under other settings kept its model")
	}
	// Bucket 79 is open; the first close after the restore refits.
	if o, err := r.Observe(at(80), 1200); o != NeedFit || err != nil {
		t.Fatalf("first close after restore: %v %v, want NeedFit", o, err)
	}
}

// TestResumeAfterFailedFirstFit checks that a series restored while
// warming up after a failed first fit keeps its retry schedule: a constant
// stretch makes the first fit fail (arima refuses a constant series).
func TestResumeAfterFailedFirstFit(t *testing.T) {
	x := trend(150, 5)
	for i := range 45 {
		x[i] = 1000
	}
	run := func(split int) []Forecast {
		var out []Forecast
		s, _ := New("w", settings())
		for i, v := range x {
			if i == split {
				snap := *s.Snapshot()
				var err error
				if s, err = Restore(&snap, settings()); err != nil {
					t.Fatal(err)
				}
			}
			o, err := s.Observe(at(int64(i)), v)
			if err != nil {
				t.Fatal(err)
			}
			if o == NeedFit {
				o, _ = s.Install(s.FitJob().Run())
			}
			if o == Published {
				out = append(out, copyForecast(s.Forecast()))
			}
		}
		if s.Snapshot().RefitFailures == 0 {
			t.Fatal("the constant stretch did not make the first fit fail")
		}
		return out
	}
	want := run(-1)
	if got := run(50); !reflect.DeepEqual(got, want) {
		t.Fatalf("restored while warming up: %d forecasts, uninterrupted %d (or contents differ)", len(got), len(want))
	}
}

// A copy of the model-scale forecast, filled into a forecast of another
// shape (as the daemon's encoder does with a slot that served another
// series), gives exactly what Series.Forecast gives (a property of the
// code: Fill reads only the copy). Gauge and counter, log transform, three
// levels.
func TestModelForecastCopyFillsTheSame(t *testing.T) {
	for _, kind := range []string{"gauge", "counter"} {
		set := settings()
		set.Kind, set.Transform, set.Levels = kind, "log", []float64{50, 80, 95}
		s, err := New("c", set)
		if err != nil {
			t.Fatal(err)
		}
		var other ModelForecast
		var got Forecast
		// A slot shaped by another series: longer horizon, one level.
		got.Points = make([]Point, 2*set.Horizon)
		for i := range got.Points {
			got.Points[i].Lower, got.Points[i].Upper = make([]Bound, 1), make([]Bound, 1)
		}
		x := trend(150, 3)
		for i, v := range x {
			o, err := s.Observe(at(int64(i)), v)
			if err != nil {
				t.Fatal(err)
			}
			if o == NeedFit {
				if o, err = s.Install(s.FitJob().Run()); err != nil {
					t.Fatal(err)
				}
			}
			if o != Published {
				continue
			}
			other.CopyFrom(s.ModelForecast())
			other.Fill(&got)
			if want := s.Forecast(); !reflect.DeepEqual(copyForecast(&got), copyForecast(want)) {
				t.Fatalf("%s, bucket %d: filled copy\n%+v\nSeries.Forecast\n%+v", kind, i, got, *want)
			}
		}
	}
}
