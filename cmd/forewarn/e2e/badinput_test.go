package e2e

import (
	"encoding/json"
	"fmt"
	"reflect"
	"strings"
	"testing"
	"time"
)

// badInputConfig: a good series (fixed model), a log-transformed series
// for out-of-domain values, a series for late buckets, a catch-all for the
// malformed payloads and the flood; no entry matches "other.>".
func badInputConfig() string {
	return strings.Replace(baseConfig(10), "limits:\n", "limits:\n  max_payload_bytes: 4096\n  max_batch: 50\n", 1) + `series:
  - match: "good.>"
    step: 1h
    horizon: 6
    window: 100
    min_points: 24
    refit_every: 6
    model: ` + fixedModel("0,1,1") + `
    transform: none
  - match: "logs.>"
    step: 1h
    horizon: 6
    window: 100
    min_points: 10
    refit_every: 5
    model: ` + fixedModel("1,0,0") + `
    transform: log
  - match: "late.>"
    step: 1h
    min_points: 10
    model: ` + fixedModel("0,1,1") + `
    transform: none
  - match: "bad.>"
    step: 1h
    model: ` + fixedModel("0,1,1") + `
    transform: none
  - match: "flood.>"
    step: 1h
    model: ` + fixedModel("0,1,1") + `
    transform: none
`
}

// badCase is one hostile message and the reject code it must get.
type badCase struct {
	name    string
	subject string
	payload string
	code    string
}

// badCases are the table of issue 6. Codes: CONTRACT.md §2 (not_json,
// not_finite, bad_time, late, too_large, bad_topic, too_many_series) and
// the daemon's further codes (bad_value, bad_field, missing_value,
// too_deep, empty, out_of_domain, no_series_entry).
func badCases() []badCase {
	day1 := t0.Add(24 * time.Hour)
	at := `"` + day1.Format(time.RFC3339) + `"`
	// Just beyond the arrival-time limits (baseConfig), with a margin of
	// ten days and a day for the time the run takes.
	tooOld := `"` + time.Now().Add(-maxPast-10*24*time.Hour).UTC().Format(time.RFC3339) + `"`
	tooNew := `"` + time.Now().Add(maxFuture+24*time.Hour).UTC().Format(time.RFC3339) + `"`
	big := `{"time":` + at + `,"value":1` + strings.Repeat(" ", 5000) + `}`
	var arr strings.Builder
	arr.WriteString("[")
	for i := range 51 {
		if i > 0 {
			arr.WriteString(",")
		}
		fmt.Fprintf(&arr, `{"time":%q,"value":%d}`, day1.Add(time.Duration(i%60)*time.Minute).Format(time.RFC3339), i)
	}
	arr.WriteString("]")
	cases := []badCase{
		{"plain text", "", `not json at all`, "not_json"},
		{"truncated object", "", `{"time":` + at + `,"value":1`, "not_json"},
		{"trailing garbage", "", `{"value":1} {"value":2}`, "not_json"},
		{"single quotes", "", `{'value': 1}`, "not_json"},
		{"NaN value", "", `{"time":` + at + `,"value":NaN}`, "not_finite"},
		{"Infinity bare", "", `Infinity`, "not_finite"},
		{"overflowing number", "", `{"time":` + at + `,"value":1e400}`, "not_finite"},
		{"overflowing negative", "", `{"time":` + at + `,"value":-2e308}`, "not_finite"},
		{"value a string", "", `{"time":` + at + `,"value":"12"}`, "bad_value"},
		{"value a boolean", "", `{"time":` + at + `,"value":true}`, "bad_value"},
		{"value null", "", `{"time":` + at + `,"value":null}`, "bad_value"},
		{"payload a string", "", `"hello"`, "bad_value"},
		{"array of numbers", "", `[1,2,3]`, "bad_value"},
		{"time words", "", `{"time":"yesterday","value":1}`, "bad_time"},
		{"time impossible date", "", `{"time":"2024-13-45T00:00:00Z","value":1}`, "bad_time"},
		{"time in milliseconds", "", `{"time":1704067200000,"value":1}`, "bad_time"},
		{"time far future", "", `{"time":"2200-01-01T00:00:00Z","value":1}`, "bad_time"},
		{"time far past", "", `{"time":"1900-01-01T00:00:00Z","value":1}`, "bad_time"},
		{"time beyond max_future", "", `{"time":` + tooNew + `,"value":1}`, "bad_time"},
		{"time beyond max_past", "", `{"time":` + tooOld + `,"value":1}`, "bad_time"},
		{"unknown key", "", `{"time":` + at + `,"value":1,"unit":"B"}`, "bad_field"},
		{"repeated key", "", `{"time":` + at + `,"value":1,"value":2}`, "bad_field"},
		{"no value", "", `{"time":` + at + `}`, "missing_value"},
		{"empty object", "", `{}`, "missing_value"},
		{"empty payload", "", ``, "empty"},
		{"white space only", "", "  \n\t ", "empty"},
		{"empty array", "", `[]`, "empty"},
		{"nested array", "", `[[{"value":1}]]`, "too_deep"},
		{"object value in array", "", `[{"time":` + at + `,"value":{"v":1}}]`, "too_deep"},
		{"oversized payload", "", big, "too_large"},
		{"oversized array", "", arr.String(), "too_large"},
		{"topic with wildcard character", "metrics.bad.a*b", `{"time":` + at + `,"value":1}`, "bad_topic"},
		{"topic too long", "metrics.bad." + strings.Repeat("x", 300), `{"time":` + at + `,"value":1}`, "bad_topic"},
		{"topic too many tokens", "metrics.bad" + strings.Repeat(".t", 20), `{"time":` + at + `,"value":1}`, "bad_topic"},
		{"topic non-printable", "metrics.bad.x\x01y", `{"time":` + at + `,"value":1}`, "bad_topic"},
		{"no series entry", "metrics.other.x", `{"time":` + at + `,"value":1}`, "no_series_entry"},
	}
	for i := range cases {
		if cases[i].subject == "" {
			cases[i].subject = fmt.Sprintf("metrics.bad.c%02d", i)
		}
	}
	return cases
}

type rejectMsg struct {
	Subject  string `json:"subject"`
	Topic    string `json:"topic"`
	Code     string `json:"code"`
	Reason   string `json:"reason"`
	Received string `json:"received"`
}

// TestBadInput is issue 6's table: every hostile message gets a reject
// with its code on forewarn.reject.<topic>, and a good series in the same
// run (R's datasets::Nile, annual flow of the Nile at Aswan 1871–1970,
// mapped onto an hourly step) gets forecasts identical to a run without
// the bad messages. It ends with a flood of new topics beyond
// limits.max_series.
func TestBadInput(t *testing.T) {
	t.Parallel()
	nile := readDataset(t, "Nile.csv")
	const good = "good.nile"
	const step = time.Hour
	half := len(nile) / 2

	// Clean run: the good series alone.
	want := uninterrupted(t, external, badInputConfig(), good, step, nile)

	// Dirty run.
	d := newDaemon(t, external, badInputConfig())
	nc, c, p := session(t, d)
	publishRange(p, good, step, nile, 0, half)

	type expect struct{ subject, code, name string }
	var expected []expect
	for _, bc := range badCases() {
		p.must(bc.subject, []byte(bc.payload))
		expected = append(expected, expect{bc.subject, bc.code, bc.name})
	}
	// Late and duplicate buckets: buckets 0, 1, 2, then 0 and 1 again.
	for i, b := range []int{0, 1, 2, 0, 1} {
		p.must("metrics.late.x", obsJSON(t0.Add(time.Duration(b)*step), float64(10+i)))
	}
	expected = append(expected,
		expect{"metrics.late.x", "late", "bucket 0 after bucket 2"},
		expect{"metrics.late.x", "late", "bucket 1 again after bucket 2"})
	// Non-positive values for a log transform once the model exists
	// (min_points 10: 15 positive buckets first).
	// Each bad value is alone in its bucket and followed by a good one in
	// the next bucket, so it is refused whether the daemon checks on
	// arrival or when the bucket closes.
	publishRange(p, "logs.x", step, nile, 0, 15)
	waitOrigin(t, c, "logs.x", step, 13, 30*time.Second) // the model exists
	p.must("metrics.logs.x", obsJSON(t0.Add(15*step), 0))
	p.must("metrics.logs.x", obsJSON(t0.Add(16*step), nile[16]))
	p.must("metrics.logs.x", obsJSON(t0.Add(17*step), -3))
	p.must("metrics.logs.x", obsJSON(t0.Add(18*step), nile[18]))
	expected = append(expected,
		expect{"metrics.logs.x", "out_of_domain", "zero with transform log"},
		expect{"metrics.logs.x", "out_of_domain", "negative with transform log"})
	// Flood: series so far are good.nile, late.x, logs.x; max_series 10
	// leaves room for 7 new topics.
	const flood = 30
	for i := range flood {
		p.must(fmt.Sprintf("metrics.flood.f%02d", i), obsJSON(t0, float64(i)))
		if i >= 7 {
			expected = append(expected, expect{fmt.Sprintf("metrics.flood.f%02d", i), "too_many_series", "flood beyond max_series"})
		}
	}
	publishRange(p, good, step, nile, half, len(nile))
	waitConsumed(t, nc, 60*time.Second)
	waitOrigin(t, c, good, step, len(nile)-2, 30*time.Second)
	// Every reject is published before the acknowledgement that
	// waitConsumed saw; allow the last ones time to arrive, then compare
	// message by message (a missing one is reported below).
	for deadline := time.Now().Add(5 * time.Second); c.count("reject", "") < len(expected) && time.Now().Before(deadline); {
		time.Sleep(20 * time.Millisecond)
	}
	if !d.running() {
		t.Fatal("daemon exited during the bad input")
	}

	got := map[string][]rejectMsg{}
	for _, m := range c.get("reject", "") {
		var r rejectMsg
		if err := json.Unmarshal(m.Data, &r); err != nil {
			t.Errorf("reject on %s is not JSON: %v: %q", m.Subject, err, m.Data)
			continue
		}
		if r.Reason == "" || r.Received == "" || r.Subject == "" {
			t.Errorf("reject on %s lacks subject, reason or received: %s", m.Subject, m.Data)
		}
		if r.Topic != "" && m.Subject != "forewarn.reject."+r.Topic {
			t.Errorf("reject for topic %q published on %q, want forewarn.reject.%s", r.Topic, m.Subject, r.Topic)
		}
		got[r.Subject] = append(got[r.Subject], r)
	}
	for _, e := range expected {
		rs := got[e.subject]
		if len(rs) == 0 {
			t.Errorf("%s (%q): no reject, want code %s", e.name, clipSubject(e.subject), e.code)
			continue
		}
		if rs[0].Code != e.code {
			t.Errorf("%s (%q): code %s (%s), want %s", e.name, clipSubject(e.subject), rs[0].Code, rs[0].Reason, e.code)
		}
		got[e.subject] = rs[1:]
	}
	for subj, rs := range got {
		for _, r := range rs {
			t.Errorf("unexpected reject for %q: %s (%s)", clipSubject(subj), r.Code, r.Reason)
		}
	}
	for i := range 7 {
		topic := fmt.Sprintf("flood.f%02d", i)
		if n := len(c.get("reject", "forewarn.reject."+topic)); n != 0 {
			t.Errorf("%s is within max_series but was rejected", topic)
		}
	}
	for _, m := range c.get("forecast", "forewarn.forecast.logs.x") {
		if f := decodeForecast(t, m.Data); f.LastValue <= 0 {
			t.Errorf("logs.x (transform log) published a forecast from the non-positive value %g: %s", f.LastValue, m.Data)
		}
	}
	d.stop()

	// The good series is untouched by everything else.
	have, _ := forecastsByOrigin(t, c.get("forecast", "forewarn.forecast."+good), onceEach)
	if len(want) == 0 || len(have) != len(want) {
		t.Errorf("good series: %d forecast origins with bad input, %d without", len(have), len(want))
	}
	for o, w := range want {
		g, ok := have[o]
		if !ok {
			t.Errorf("good series: no forecast at %s with bad input", o.Format(time.RFC3339))
			continue
		}
		if !reflect.DeepEqual(normalized(t, g, "issued"), normalized(t, w, "issued")) {
			t.Errorf("good series at %s differs with bad input:\n got %s\nwant %s", o.Format(time.RFC3339), g, w)
		}
	}
}

func clipSubject(s string) string {
	if len(s) > 60 {
		return s[:60] + "…"
	}
	return s
}
