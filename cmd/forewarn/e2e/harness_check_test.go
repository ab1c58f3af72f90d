package e2e

import (
	"fmt"
	"strings"
	"testing"
)

// TestForecastsByOrigin checks the harness's repeat rule on hand-made
// forecast messages, so that a lenient forecastsByOrigin cannot hide a
// daemon that publishes an origin twice. The rule is the exactly-once
// contract (README, Operations; CONTRACT.md §2, deterministic in data
// time): no repeat in a run without a crash, and after a crash only
// repeats byte-identical apart from "issued".
func TestForecastsByOrigin(t *testing.T) {
	msg := func(origin, issued, last string) message {
		return message{"forewarn.forecast.x", fmt.Appendf(nil,
			`{"topic":"x","issued":%q,"origin":%q,"step_seconds":3600,"last_value":%s,"kind":"gauge","model":{},"points":[]}`,
			issued, origin, last)}
	}
	const o1, o2 = "2025-01-01T00:00:00Z", "2025-01-01T01:00:00Z"
	const i1, i2 = "2025-02-01T10:00:00.1Z", "2025-02-01T10:00:07.9Z"
	for _, c := range []struct {
		name     string
		policy   repeats
		msgs     []message
		repeated int
		bad      string // a word of the first complaint, "" for none
	}{
		{"two origins", onceEach, []message{msg(o1, i1, "1"), msg(o2, i1, "2")}, 0, ""},
		{"once: identical repeat", onceEach, []message{msg(o1, i1, "1"), msg(o2, i1, "2"), msg(o1, i1, "1")}, 1, "without a crash"},
		{"once: repeat issued later", onceEach, []message{msg(o1, i1, "1"), msg(o1, i2, "1")}, 1, "without a crash"},
		{"again: issued differs", sameAgain, []message{msg(o1, i1, "1"), msg(o1, i2, "1")}, 1, ""},
		{"again: value differs", sameAgain, []message{msg(o1, i1, "1"), msg(o1, i2, "1.5")}, 1, "different content"},
		{"again: same number written otherwise", sameAgain, []message{msg(o1, i1, "1.5"), msg(o1, i1, "1.50")}, 1, "different content"},
		{"again: the first is kept", sameAgain, []message{msg(o1, i1, "1"), msg(o1, i2, "1"), msg(o1, i2, "2")}, 2, "different content"},
	} {
		out, repeated, bad, err := byOrigin(c.msgs, c.policy)
		if err != nil {
			t.Errorf("%s: %v", c.name, err)
			continue
		}
		if repeated != c.repeated || len(out) == 0 {
			t.Errorf("%s: %d repeats over %d origins, want %d", c.name, repeated, len(out), c.repeated)
		}
		switch {
		case c.bad == "" && len(bad) > 0:
			t.Errorf("%s: complaints %q, want none", c.name, bad)
		case c.bad != "" && (len(bad) != 1 || !strings.Contains(bad[0], c.bad)):
			t.Errorf("%s: complaints %q, want one about %q", c.name, bad, c.bad)
		}
	}
	noIssued := message{"forewarn.forecast.x", []byte(`{"topic":"x","origin":"` + o1 + `","points":[]}`)}
	if _, _, _, err := byOrigin([]message{noIssued, noIssued}, sameAgain); err == nil {
		t.Error("a repeat without issued was compared, want an error")
	}
}
