package arima

import (
	"math"
	"strings"
	"testing"
)

// A periodic shape of the 48-step cycle, not a few sinusoids: a flat night,
// a morning ramp and an evening peak (property tests with known truth).
func dayShape(k int) float64 {
	switch {
	case k < 12:
		return -10
	case k < 20:
		return -10 + 2.5*float64(k-12)
	case k < 36:
		return 10 + float64(k%3)
	default:
		return 25 - 3*float64(k-36)
	}
}

// TestProfileLookup: a component that repeats a shape exactly (cycle of 48
// steps of 1800 s, times far from 0) is given back by LastCycleShape at
// the phases k/48 of absolute time, and the Profile made from it
// reproduces the component at every time, before and after the data: the
// phase comes from t mod L, not from a count of steps (definition of the
// profile; property test).
func TestProfileLookup(t *testing.T) {
	const step, L = 1800.0, 48 * 1800.0
	t0 := 944449 * step // on the step grid, about 1.7e9 s; phase index (t0 mod L)/step
	n := 300
	x := make([]float64, n)
	k0 := int(math.Mod(t0, L) / step)
	for i := range x {
		x[i] = dayShape((k0 + i) % 48)
	}
	sh, err := LastCycleShape(x, t0, step, L)
	if err != nil {
		t.Fatal(err)
	}
	for k, v := range sh {
		if v != dayShape(k) {
			t.Fatalf("shape sample %d = %v, want %v", k, v, dayShape(k))
		}
	}
	p, err := NewProfile([]float64{L}, [][]float64{sh})
	if err != nil {
		t.Fatal(err)
	}
	X := p.Matrix(t0-100*step, step, n+200)
	for i, v := range X[0] {
		want := dayShape(((k0+i-100)%48 + 48) % 48)
		if math.Abs(v-want) > 1e-12 {
			t.Fatalf("time index %d: profile %v, want %v", i-100, v, want)
		}
	}
}

// TestProfileNonWholeCycle: a cycle of 10.5 steps, a smooth periodic
// function sampled at the steps; the lookup between the 11 (rounded)
// phase samples interpolates linearly, so it stays within the
// interpolation error of the function (max |f”|·h²/8 with h the phase
// spacing in time), and the samples themselves are exact where a step
// falls on their phase (property test).
func TestProfileNonWholeCycle(t *testing.T) {
	const step, L = 1.0, 10.5
	f := func(tt float64) float64 { return math.Sin(2 * math.Pi * tt / L) }
	n := 200
	x := make([]float64, n)
	for i := range x {
		x[i] = f(float64(i))
	}
	sh, err := LastCycleShape(x, 0, step, L)
	if err != nil {
		t.Fatal(err)
	}
	if len(sh) != 11 {
		t.Fatalf("%d samples, want round(10.5) = 11", len(sh))
	}
	p, err := NewProfile([]float64{L}, [][]float64{sh})
	if err != nil {
		t.Fatal(err)
	}
	h := L / 11
	// linear interpolation of the component between steps when building
	// the shape, then between phase samples when looking up
	bound := (2*math.Pi/L)*(2*math.Pi/L)*(h*h+step*step)/8 + 1e-12
	row := make([]float64, 1)
	for i := 0; i < 400; i++ {
		tt := 0.37 * float64(i)
		p.Regressors(row, tt)
		if d := math.Abs(row[0] - f(tt)); d > bound {
			t.Fatalf("t = %v: profile %v, function %v: error %.3g above the bound %.3g", tt, row[0], f(tt), d, bound)
		}
	}
}

// TestProfilePathAndAllocs: LinearPath equals Σ β_c x_c(t) row by row, and
// neither it, Regressors nor a filter step with profile regressors
// allocates (issue 12: the online step does not allocate).
func TestProfilePathAndAllocs(t *testing.T) {
	s1 := make([]float64, 48)
	s2 := make([]float64, 336)
	for k := range s1 {
		s1[k] = dayShape(k)
	}
	for k := range s2 {
		s2[k] = math.Cos(2*math.Pi*float64(k)/336) + 0.1*float64(k%48)
	}
	p, err := NewProfile([]float64{48, 336}, [][]float64{s1, s2})
	if err != nil {
		t.Fatal(err)
	}
	beta := []float64{1.3, -0.7}
	dst := make([]float64, 60)
	p.LinearPath(dst, beta, 1001, 1)
	row := make([]float64, 2)
	for k, v := range dst {
		p.Regressors(row, 1001+float64(k))
		if w := beta[0]*row[0] + beta[1]*row[1]; math.Abs(v-w) > 1e-12 {
			t.Fatalf("lead %d: path %v, rows %v", k, v, w)
		}
	}
	if a := testing.AllocsPerRun(100, func() { p.LinearPath(dst, beta, 12345, 1); p.Regressors(row, 777) }); a != 0 {
		t.Fatalf("%v allocations per lookup", a)
	}
	m, err := NewModel(Spec{P: 1, D: 1, Q: 1, NX: 2}, []float64{0.5, -0.3, 1, 1}, 1)
	if err != nil {
		t.Fatal(err)
	}
	f, err := NewFilterX(m, 60, p, 0, 1)
	if err != nil {
		t.Fatal(err)
	}
	for i := 0; i < 500; i++ {
		f.Step(float64(i%48) + s1[i%48])
	}
	mean, v := make([]float64, 60), make([]float64, 60)
	y := 3.0
	if a := testing.AllocsPerRun(100, func() { f.Step(y); f.Forecast(mean, v) }); a != 0 {
		t.Fatalf("%v allocations per step and forecast", a)
	}
}

// TestProfileBadInput: clear errors, no panic (RULES 6).
func TestProfileBadInput(t *testing.T) {
	for _, c := range []struct {
		cycles []float64
		shapes [][]float64
		want   string
	}{
		{nil, nil, "no cycle"},
		{[]float64{48}, nil, "1 cycles but 0 shapes"},
		{[]float64{-1}, [][]float64{{1, 2}}, "positive finite"},
		{[]float64{48}, [][]float64{{1}}, "at least 2"},
		{[]float64{48}, [][]float64{{1, math.NaN()}}, "finite value"},
	} {
		_, err := NewProfile(c.cycles, c.shapes)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("NewProfile(%v, %v): error %v, want one containing %q", c.cycles, c.shapes, err, c.want)
		}
	}
	if _, err := LastCycleShape(make([]float64, 30), 0, 1, 48); err == nil || !strings.Contains(err.Error(), "less than one cycle") {
		t.Errorf("short series: error %v", err)
	}
	if _, err := LastCycleShape(make([]float64, 30), 0, 1, 1.2); err == nil || !strings.Contains(err.Error(), "shorter than two steps") {
		t.Errorf("short cycle: error %v", err)
	}
}

// BenchmarkFilterProfileStepForecast60 is the online step plus a 60-step
// forecast with two profile columns (a daily and a weekly shape of
// one-minute data, 1440 and 10080 samples) and ARIMA(2,1,2) errors
// (issue 12's online target, ≤ 10 µs and 0 allocations, for the profile
// route).
func BenchmarkFilterProfileStepForecast60(b *testing.B) {
	s1 := make([]float64, 1440)
	s2 := make([]float64, 10080)
	for k := range s1 {
		s1[k] = 10 * math.Sin(2*math.Pi*float64(k)/1440)
	}
	for k := range s2 {
		s2[k] = 3 * math.Cos(2*math.Pi*float64(k)/10080)
	}
	p, err := NewProfile([]float64{86400, 604800}, [][]float64{s1, s2})
	if err != nil {
		b.Fatal(err)
	}
	m, err := NewModel(Spec{P: 2, D: 1, Q: 2, NX: 2}, []float64{0.5, -0.2, -0.3, 0.1, 1, 1}, 1)
	if err != nil {
		b.Fatal(err)
	}
	f, err := NewFilterX(m, 60, p, 1.7e9, 60)
	if err != nil {
		b.Fatal(err)
	}
	for i := 0; i < 2880; i++ {
		f.Step(100 + math.Sin(float64(i)))
	}
	mean, v := make([]float64, 60), make([]float64, 60)
	b.ReportAllocs()
	for b.Loop() {
		f.Step(100 + mean[0]*1e-3)
		f.Forecast(mean, v)
	}
}
