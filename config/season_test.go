package config

import (
	"strings"
	"testing"
	"time"
)

// Cycles are Go durations (time.ParseDuration's syntax) with the units d
// = 24h and w = 7·24h as well (common practice), or bare whole numbers of
// steps (CONTRACT revision 2, §2 and §3).
func TestParseCycle(t *testing.T) {
	for _, c := range []struct {
		in   string
		want Cycle
		text string // String()
	}{
		{"1d", Cycle{Length: 24 * time.Hour}, "1d"},
		{"7d", Cycle{Length: 168 * time.Hour}, "7d"},
		{"1w", Cycle{Length: 168 * time.Hour}, "7d"},
		{"12h", Cycle{Length: 12 * time.Hour}, "12h0m0s"},
		{"1.5d", Cycle{Length: 36 * time.Hour}, "36h0m0s"},
		{"1d12h", Cycle{Length: 36 * time.Hour}, "36h0m0s"},
		{"90m", Cycle{Length: 90 * time.Minute}, "1h30m0s"},
		{"12", Cycle{Steps: 12}, "12"},
		{" 168 ", Cycle{Steps: 168}, "168"},
	} {
		got, err := ParseCycle(c.in)
		if err != nil || got != c.want {
			t.Errorf("ParseCycle(%q) = %+v, %v; want %+v", c.in, got, err, c.want)
			continue
		}
		if got.String() != c.text {
			t.Errorf("%q: String() = %q, want %q", c.in, got.String(), c.text)
		}
		if back, err := ParseCycle(got.String()); err != nil || back != got {
			t.Errorf("%q: ParseCycle(String()) = %+v, %v", c.in, back, err)
		}
	}
	for _, bad := range []string{"", "0", "d", "-1d", "0s", "1x", "1.5", "daily", "99999999999", "1dd"} {
		if c, err := ParseCycle(bad); err == nil {
			t.Errorf("ParseCycle(%q) = %+v, want an error", bad, c)
		}
	}
}

func TestCycleInSteps(t *testing.T) {
	for _, c := range []struct {
		c    Cycle
		step time.Duration
		want int
		err  string
	}{
		{Cycle{Length: Day}, time.Hour, 24, ""},
		{Cycle{Length: Week}, time.Hour, 168, ""},
		{Cycle{Length: Day}, 5 * time.Minute, 288, ""},
		{Cycle{Steps: 12}, 0, 12, ""},
		{Cycle{Length: Day}, 7 * time.Minute, 0, "not a whole number of steps of 7m0s"},
		{Cycle{Length: Day}, 0, 0, "needs the step"},
	} {
		n, err := c.c.InSteps(c.step)
		if c.err == "" && (err != nil || n != c.want) || c.err != "" && (err == nil || !strings.Contains(err.Error(), c.err)) {
			t.Errorf("%v in steps of %v = %d, %v; want %d %q", c.c, c.step, n, err, c.want, c.err)
		}
	}
	s := Series{Step: time.Hour, Seasons: []Cycle{{Length: Day}, {Length: Week}}}
	if s.Period() != 24 {
		t.Errorf("Period() = %d, want the first cycle, 24", s.Period())
	}
	for _, s := range []Series{{}, {Step: 7 * time.Minute, Seasons: []Cycle{{Length: Day}}}, {Seasons: []Cycle{{Steps: 1}}}} {
		if s.Period() != 0 {
			t.Errorf("%+v: Period() = %d, want 0", s, s.Period())
		}
	}
}
