package stream

import (
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"reflect"
	"slices"
	"sort"
	"strconv"
	"testing"
	"time"

	"forewarn/engine/series"
)

// Odd topic and rule strings: quotes, backslashes, control characters,
// HTML characters, line separators, non-ASCII and invalid UTF-8.
var oddStrings = []string{
	"shop.orders", `a"b`, `back\slash`, "tab\tnew\nline\r", "bell\x07\x00\x1f", "<tag>&amp;",
	"ünïcødé.温度", "sep\u2028\u2029", "bad\xffutf8\xc3", "", "emoji.😀",
}

func randFloat(r *rand.Rand) float64 {
	switch r.IntN(12) {
	case 0:
		return math.NaN()
	case 1:
		return math.Inf(1 - 2*r.IntN(2))
	case 2:
		return 0
	case 3:
		return r.NormFloat64() * 1e-9
	case 4:
		return r.NormFloat64() * 1e22
	case 5:
		return float64(r.IntN(100000))
	default:
		return r.NormFloat64() * 1000
	}
}

func randTime(r *rand.Rand) time.Time {
	t := time.Unix(1.7e9+r.Int64N(1e8), 0)
	if r.IntN(3) == 0 {
		t = t.Add(time.Duration(r.Int64N(1e9)))
	}
	if r.IntN(2) == 0 {
		t = t.In(time.FixedZone("x", 3600*(r.IntN(20)-10)))
	}
	return t
}

func randForecast(r *rand.Rand) *series.Forecast {
	// Some level lists out of order: the bands still come out ascending.
	levels := [][]float64{{80, 95}, {50, 80, 95, 97.5}, {99.9}, {}, {95, 50, 80}, {90, 50}}[r.IntN(6)]
	f := &series.Forecast{
		Topic:       oddStrings[r.IntN(len(oddStrings))],
		Origin:      randTime(r),
		StepSeconds: int64(1 + r.IntN(86400)),
		LastValue:   randFloat(r),
		Kind:        []string{"gauge", "counter"}[r.IntN(2)],
		Model: series.ModelInfo{
			Spec:      fmt.Sprintf("ARIMA %d,%d,%d × 0,1,1 s=24", r.IntN(3), r.IntN(2), r.IntN(3)),
			Transform: []string{"none", "log", "boxcox(0.25)", "scaled-exp"}[r.IntN(4)],
			NObs:      r.IntN(5000),
			AICc:      randFloat(r),
		},
		Levels:     levels,
		Calibrated: r.IntN(2) == 0,
	}
	if r.IntN(5) > 0 {
		f.Model.FittedAt = randTime(r)
	}
	for h := 1; h <= r.IntN(30); h++ {
		p := series.Point{H: h, Time: randTime(r), Mean: randFloat(r), Median: randFloat(r)}
		for range levels {
			p.Lower = append(p.Lower, series.Bound{Value: randFloat(r), OK: r.IntN(4) > 0})
			p.Upper = append(p.Upper, series.Bound{Value: randFloat(r), OK: r.IntN(4) > 0})
			p.Scale = append(p.Scale, []float64{randFloat(r), 0.5 + r.Float64()}[r.IntN(2)])
		}
		if r.IntN(4) == 0 {
			p.Scale = nil // a forecast built without scales
		}
		f.Points = append(f.Points, p)
	}
	return f
}

// Reference encodings built with encoding/json from maps (the Go standard
// library as the outside reference), with CONTRACT.md §2's keys.

func refNum(v float64) any {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return v
}

// refPoint is a point's number as AppendForecast promises it: strconv
// 'g' with 12 digits read back, or last itself when the number is last or
// its rounded form would be on the other side of last.
func refPoint(v, last float64) any {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	r, err := strconv.ParseFloat(strconv.FormatFloat(v, 'g', 12, 64), 64)
	if err != nil {
		panic(err)
	}
	if v == last || (v > last && r < last) || (v < last && r > last) {
		return last
	}
	return r
}

func refTime(t time.Time) string { return t.UTC().Format(time.RFC3339Nano) }

// refScale is a band's scale as AppendForecast promises it: strconv 'g'
// with 6 digits read back; without one, 1 for the model's own bands and
// null for calibrated ones; null when not finite.
func refScale(p series.Point, i int, calibrated bool) any {
	if i >= len(p.Scale) {
		if calibrated {
			return nil
		}
		return 1.0
	}
	v := p.Scale[i]
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	r, err := strconv.ParseFloat(strconv.FormatFloat(v, 'g', 6, 64), 64)
	if err != nil {
		panic(err)
	}
	return r
}

// refBands is a point's bands as CONTRACT.md §2 has them: one
// {"level","low","high","scale"} per level, in ascending order of level (sorted
// here with package sort, whatever the order of levels).
func refBands(levels []float64, p series.Point, last float64, calibrated bool) []any {
	bound := func(b []series.Bound, i int) any {
		if i < len(b) && b[i].OK {
			return refPoint(b[i].Value, last)
		}
		return nil
	}
	idx := make([]int, len(levels))
	for i := range idx {
		idx[i] = i
	}
	sort.SliceStable(idx, func(a, b int) bool { return levels[idx[a]] < levels[idx[b]] })
	bands := []any{}
	for _, i := range idx {
		bands = append(bands, map[string]any{"level": levels[i], "low": bound(p.Lower, i), "high": bound(p.Upper, i),
			"scale": refScale(p, i, calibrated)})
	}
	return bands
}

func refForecast(f *series.Forecast, issued time.Time) []byte {
	var fitted any
	if !f.Model.FittedAt.IsZero() {
		fitted = refTime(f.Model.FittedAt)
	}
	points := []any{}
	for _, p := range f.Points {
		points = append(points, map[string]any{
			"h": p.H, "time": refTime(p.Time), "mean": refPoint(p.Mean, f.LastValue), "median": refPoint(p.Median, f.LastValue),
			"bands": refBands(f.Levels, p, f.LastValue, f.Calibrated),
		})
	}
	b, err := json.Marshal(map[string]any{
		"topic": f.Topic, "issued": refTime(issued), "origin": refTime(f.Origin),
		"step_seconds": f.StepSeconds, "last_value": refNum(f.LastValue), "kind": f.Kind,
		"model": map[string]any{
			"label": f.Model.Spec, "transform": f.Model.Transform, "fitted_at": fitted,
			"observations_used": f.Model.NObs, "aicc": refNum(f.Model.AICc),
			"bands": map[bool]string{true: "calibrated", false: "model"}[f.Calibrated],
		},
		"points": points,
	})
	if err != nil {
		panic(err)
	}
	return b
}

// sameJSON decodes both documents with encoding/json and compares them.
func sameJSON(t *testing.T, got, want []byte) {
	t.Helper()
	var g, w any
	if err := json.Unmarshal(got, &g); err != nil {
		t.Fatalf("encoding/json cannot read the output: %v\n%s", err, got)
	}
	if err := json.Unmarshal(want, &w); err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(g, w) {
		t.Fatalf("output differs from the encoding/json reference\n got %s\nwant %s", got, want)
	}
}

func TestAppendForecastMatchesReference(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	var buf []byte
	for range 500 {
		f := randForecast(r)
		issued := randTime(r)
		buf = AppendForecast(buf[:0], f, issued)
		sameJSON(t, buf, refForecast(f, issued))
	}
}

func TestAppendForecastExact(t *testing.T) {
	origin := time.Date(2024, 5, 1, 12, 0, 0, 0, time.UTC)
	f := &series.Forecast{
		Topic: "shop.orders", Origin: origin, StepSeconds: 60, LastValue: 1834, Kind: "counter",
		Model:  series.ModelInfo{Spec: "ARIMA 1,1,1 × 0,1,1 s=24", Transform: "log", FittedAt: origin.Add(-time.Hour), NObs: 480, AICc: -1234.5},
		Levels: []float64{80, 97.5}, Calibrated: true,
		Points: []series.Point{{H: 1, Time: origin.Add(time.Minute), Mean: 1840.2, Median: 1839.9,
			Lower: []series.Bound{{Value: 1830.1, OK: true}, {Value: 0, OK: false}},
			Upper: []series.Bound{{Value: 1849.8, OK: true}, {Value: math.Inf(1), OK: true}},
			Scale: []float64{1.2345678, 0.9}}},
	}
	got := string(AppendForecast(nil, f, origin.Add(1500*time.Millisecond)))
	want := `{"topic":"shop.orders","issued":"2024-05-01T12:00:01.5Z","origin":"2024-05-01T12:00:00Z",` +
		`"step_seconds":60,"last_value":1834,"kind":"counter","model":{"label":"ARIMA 1,1,1 × 0,1,1 s=24",` +
		`"transform":"log","fitted_at":"2024-05-01T11:00:00Z","observations_used":480,"aicc":-1234.5,"bands":"calibrated"},"points":[{"h":1,` +
		`"time":"2024-05-01T12:01:00Z","mean":1840.2,"median":1839.9,"bands":[{"level":80,"low":1830.1,"high":1849.8,"scale":1.23457},` +
		`{"level":97.5,"low":null,"high":null,"scale":0.9}]}]}`
	if got != want {
		t.Fatalf("got\n%s\nwant\n%s", got, want)
	}

	// The same forecast with its levels out of order: the bands are
	// ascending all the same (CONTRACT.md §2), each with its own bounds.
	f.Levels = []float64{97.5, 80}
	p := &f.Points[0]
	p.Lower[0], p.Lower[1] = p.Lower[1], p.Lower[0]
	p.Upper[0], p.Upper[1] = p.Upper[1], p.Upper[0]
	p.Scale[0], p.Scale[1] = p.Scale[1], p.Scale[0]
	if got := string(AppendForecast(nil, f, origin.Add(1500*time.Millisecond))); got != want {
		t.Fatalf("levels [97.5 80]: got\n%s\nwant\n%s", got, want)
	}
}

// Levels that config would refuse (NaN, infinite, repeated) still give
// valid JSON with the bands ascending: numbers first, in order of level
// then of position, a non-finite level as null, NaN last. Each band keeps
// its own bounds (low i is the bound of Levels[i]). Property test.
func TestAppendForecastOddLevels(t *testing.T) {
	f := &series.Forecast{Topic: "t", Kind: "gauge", LastValue: -1,
		Levels: []float64{95, math.NaN(), 50, math.Inf(1), 50}}
	p := series.Point{H: 1}
	for i := range f.Levels {
		p.Lower = append(p.Lower, series.Bound{Value: float64(i), OK: true})
		p.Upper = append(p.Upper, series.Bound{Value: float64(10 + i), OK: true})
	}
	f.Points = []series.Point{p}
	var got struct {
		Points []struct {
			Bands []struct {
				Level     *float64
				Low, High float64
			}
		}
	}
	b := AppendForecast(nil, f, time.Unix(0, 0))
	if err := json.Unmarshal(b, &got); err != nil {
		t.Fatalf("%v\n%s", err, b)
	}
	var levels []any
	var lows []float64
	for _, band := range got.Points[0].Bands {
		if band.Level == nil {
			levels = append(levels, nil)
		} else {
			levels = append(levels, *band.Level)
		}
		lows = append(lows, band.Low)
		if band.High != band.Low+10 {
			t.Errorf("band %v: low %v high %v, not the same level's bounds", levels[len(levels)-1], band.Low, band.High)
		}
	}
	if !reflect.DeepEqual(levels, []any{50.0, 50.0, 95.0, nil, nil}) || !reflect.DeepEqual(lows, []float64{2, 4, 0, 3, 1}) {
		t.Errorf("levels %v lows %v, want [50 50 95 null null] and [2 4 0 3 1]\n%s", levels, lows, b)
	}
}

func TestAppendAlertAndRejectMatchReference(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	var buf []byte
	for range 300 {
		e := &series.AlertEvent{
			Topic: oddStrings[r.IntN(len(oddStrings))], Rule: oddStrings[r.IntN(len(oddStrings))],
			Raised: r.IntN(2) == 0, Direction: []string{"above", "below"}[r.IntN(2)],
			Threshold: randFloat(r), Probability: r.Float64(), WithinSeconds: r.Int64N(1e6),
			ETA: randTime(r), HasETA: r.IntN(2) == 0, Origin: randTime(r),
		}
		issued := randTime(r)
		state := "cleared" // ITU-T X.733 alarm states, CONTRACT.md §2
		if e.Raised {
			state = "raised"
		}
		var eta any
		if e.HasETA {
			eta = refTime(e.ETA)
		}
		want, _ := json.Marshal(map[string]any{
			"topic": e.Topic, "rule": e.Rule, "state": state, "direction": e.Direction,
			"threshold": refNum(e.Threshold), "probability": refNum(e.Probability),
			"within_seconds": e.WithinSeconds, "eta": eta, "issued": refTime(issued), "origin": refTime(e.Origin),
		})
		buf = AppendAlert(buf[:0], e, issued)
		sameJSON(t, buf, want)

		subj, topic, reason := oddStrings[r.IntN(len(oddStrings))], oddStrings[r.IntN(len(oddStrings))], oddStrings[r.IntN(len(oddStrings))]
		want, _ = json.Marshal(map[string]any{"subject": subj, "topic": topic, "code": "not_json", "reason": reason, "received": refTime(issued)})
		buf = AppendReject(buf[:0], subj, topic, "not_json", reason, issued)
		sameJSON(t, buf, want)
	}
}

func benchForecast() *series.Forecast {
	origin := time.Date(2024, 5, 1, 12, 0, 0, 0, time.UTC)
	f := &series.Forecast{
		Topic: "shop.orders", Origin: origin, StepSeconds: 3600, LastValue: 183412.5, Kind: "counter",
		Model:  series.ModelInfo{Spec: "ARIMA 1,1,1 × 0,1,1 s=24", Transform: "log", FittedAt: origin, NObs: 480, AICc: -1234.5678},
		Levels: []float64{80, 95},
	}
	for h := 1; h <= 24; h++ {
		m := 183412.5 + 1234.567*float64(h)
		f.Points = append(f.Points, series.Point{H: h, Time: origin.Add(time.Duration(h) * time.Hour), Mean: m, Median: m - 0.25,
			Lower: []series.Bound{{Value: m - 100.125*float64(h), OK: true}, {Value: m - 180.5*float64(h), OK: true}},
			Upper: []series.Bound{{Value: m + 100.125*float64(h), OK: true}, {Value: m + 180.5*float64(h), OK: true}}})
	}
	return f
}

func TestAppendAllocs(t *testing.T) {
	f := benchForecast()
	issued := time.Now()
	buf := make([]byte, 0, 8192)
	if a := testing.AllocsPerRun(100, func() { buf = AppendForecast(buf[:0], f, issued) }); a != 0 {
		t.Errorf("AppendForecast: %v allocations, want 0", a)
	}
	// Levels out of order take the sorting path, which does not allocate either.
	slices.Reverse(f.Levels)
	if a := testing.AllocsPerRun(100, func() { buf = AppendForecast(buf[:0], f, issued) }); a != 0 {
		t.Errorf("AppendForecast, levels %v: %v allocations, want 0", f.Levels, a)
	}
	e := &series.AlertEvent{Topic: "x", Rule: "r", Direction: "above", HasETA: true}
	if a := testing.AllocsPerRun(100, func() { buf = AppendAlert(buf[:0], e, issued) }); a != 0 {
		t.Errorf("AppendAlert: %v allocations, want 0", a)
	}
	if a := testing.AllocsPerRun(100, func() { buf = AppendReject(buf[:0], "metrics.x", "x", "not_json", "why", issued) }); a != 0 {
		t.Errorf("AppendReject: %v allocations, want 0", a)
	}
}

func BenchmarkAppendForecast(b *testing.B) {
	f := benchForecast()
	issued := time.Now()
	buf := AppendForecast(nil, f, issued)
	b.SetBytes(int64(len(buf)))
	b.ReportAllocs()
	for b.Loop() {
		buf = AppendForecast(buf[:0], f, issued)
	}
}

// Points' times by the day cache against time.RFC3339Nano (the standard
// library as reference): consecutive steps across midnights, before 1970,
// with fractions, and in another zone.
func TestPointTimesMatchRFC3339(t *testing.T) {
	zone := time.FixedZone("west", -7*3600)
	for _, c := range []struct {
		origin time.Time
		step   time.Duration
	}{
		{time.Date(2026, 12, 1, 23, 59, 30, 0, time.UTC), time.Second},
		{time.Date(2026, 12, 31, 22, 0, 0, 0, time.UTC), 7 * time.Minute},
		{time.Date(2024, 2, 28, 12, 0, 0, 0, time.UTC), time.Hour},
		{time.Date(1969, 12, 31, 23, 0, 0, 0, time.UTC), 13 * time.Minute},
		{time.Date(1900, 2, 28, 0, 0, 0, 0, time.UTC), 24 * time.Hour},
		{time.Date(2026, 6, 1, 0, 0, 0, 0, zone), 37 * time.Minute},
		{time.Date(2026, 6, 1, 23, 59, 59, 500_000_000, time.UTC), 250 * time.Millisecond},
		{time.Date(9999, 12, 31, 23, 0, 0, 0, time.UTC), 10 * time.Minute},
	} {
		f := &series.Forecast{Topic: "t", Origin: c.origin, StepSeconds: 1, Kind: "gauge"}
		for h := 1; h <= 60; h++ {
			f.Points = append(f.Points, series.Point{H: h, Time: c.origin.Add(time.Duration(h) * c.step)})
		}
		var got struct {
			Points []struct{ Time string }
		}
		if err := json.Unmarshal(AppendForecast(nil, f, c.origin), &got); err != nil {
			t.Fatal(err)
		}
		for i, p := range got.Points {
			if want := refTime(f.Points[i].Time); p.Time != want {
				t.Fatalf("origin %v step %v point %d: time %q, want %q", c.origin, c.step, i+1, p.Time, want)
			}
		}
	}
}
