package auto

import (
	"math"
	"strings"
	"testing"

	"forewarn/engine/internal/refdata"
)

// TestMSTLAgainstR: the decomposition of taylor[1:3984] with cycles 48 and
// 336 against R forecast 8.20's mstl with its defaults
// (testdata/r/mstl_refs.R): every value of both seasonal components and
// the trend within 1e-6 (the series is in the tens of thousands).
func TestMSTLAgainstR(t *testing.T) {
	var ref struct {
		N           int
		Seasonal48  []float64
		Seasonal336 []float64
		Trend       []float64
	}
	refdata.JSON(t, "r/mstl_refs.json", &ref)
	x := refdata.Dataset(t, "taylor")[:ref.N]
	d, err := MSTL(x, []int{336, 48})
	if err != nil {
		t.Fatal(err)
	}
	if len(d.Periods) != 2 || d.Periods[0] != 48 || d.Periods[1] != 336 {
		t.Fatalf("periods %v, want [48 336]", d.Periods)
	}
	tol := 1e-6
	for _, c := range []struct {
		name      string
		got, want []float64
	}{{"seasonal48", d.Seasonal[0], ref.Seasonal48}, {"seasonal336", d.Seasonal[1], ref.Seasonal336}, {"trend", d.Trend, ref.Trend}} {
		worst, at := 0.0, 0
		for i := range c.want {
			if e := math.Abs(c.got[i] - c.want[i]); e > worst {
				worst, at = e, i
			}
		}
		if worst > tol {
			t.Errorf("%s: largest difference %.4g at %d (ours %.6f, R %.6f)", c.name, worst, at+1, c.got[at], c.want[at])
		}
	}
	// the parts add up to the series
	for i, v := range x {
		s := d.Trend[i] + d.Remainder[i] + d.Seasonal[0][i] + d.Seasonal[1][i]
		if math.Abs(s-v) > 1e-9*math.Abs(v) {
			t.Fatalf("value %d: parts add to %v, series %v", i+1, s, v)
		}
	}
}

// TestMSTLBadInput: a missing value and a period under two steps get clear
// errors (common practice: STL needs a complete series and a cycle).
func TestMSTLBadInput(t *testing.T) {
	x := make([]float64, 100)
	for i := range x {
		x[i] = float64(i % 7)
	}
	if _, err := MSTL(x, []int{1}); err == nil || !strings.Contains(err.Error(), "period 1") {
		t.Errorf("period 1: error %v, want one naming the period", err)
	}
	x[40] = math.NaN()
	if _, err := MSTL(x, []int{7}); err == nil || !strings.Contains(err.Error(), "value 41") {
		t.Errorf("missing value: error %v, want one naming value 41", err)
	}
}
