package stream

import (
	"encoding/json"
	"errors"
	"math"
	"strings"
	"testing"
	"time"
)

var arrival = time.Date(2024, 5, 1, 12, 0, 0, 0, time.UTC)

func TestParsePayloadAccepts(t *testing.T) {
	at := func(s string) time.Time {
		tt, err := time.Parse(time.RFC3339Nano, s)
		if err != nil {
			t.Fatal(err)
		}
		return tt
	}
	cases := []struct {
		in   string
		want []Observation
	}{
		{`12345.5`, []Observation{{arrival, 12345.5}}},
		{" -3e2\n", []Observation{{arrival, -300}}},
		{`0`, []Observation{{arrival, 0}}},
		{`1e-400`, []Observation{{arrival, 0}}}, // underflow to zero is finite
		{`{"value": 7}`, []Observation{{arrival, 7}}},
		{`{"time": "2024-05-01T11:59:00Z", "value": 1.5}`, []Observation{{at("2024-05-01T11:59:00Z"), 1.5}}},
		{`{"value": 2, "time": "2024-05-01T13:30:00.25+02:00"}`, []Observation{{at("2024-05-01T11:30:00.25Z"), 2}}},
		{`{"time": 1714564740, "value": 3}`, []Observation{{at("2024-05-01T11:59:00Z"), 3}}},
		{`{"time": 1714564740.123456789, "value": 3}`, []Observation{{at("2024-05-01T11:59:00.123456789Z"), 3}}},
		{`{"time": 1.71456474e9, "value": 3}`, []Observation{{at("2024-05-01T11:59:00Z"), 3}}},
		{`{"\u0074ime": "2024-05-01T11:00:00\u005a", "value": 4}`, []Observation{{at("2024-05-01T11:00:00Z"), 4}}},
		{`[{"value":1},{"time":"2024-05-01T11:00:00Z","value":2}, {"value":-0.5}]`,
			[]Observation{{arrival, 1}, {at("2024-05-01T11:00:00Z"), 2}, {arrival, -0.5}}},
		{`1.7976931348623157e308`, []Observation{{arrival, math.MaxFloat64}}},
	}
	for _, c := range cases {
		got, err := ParsePayload([]byte(c.in), arrival, Limits{}, nil)
		if err != nil {
			t.Errorf("%s: %v", c.in, err)
			continue
		}
		if len(got) != len(c.want) {
			t.Errorf("%s: got %d observations, want %d", c.in, len(got), len(c.want))
			continue
		}
		for i := range got {
			if !got[i].Time.Equal(c.want[i].Time) || got[i].Value != c.want[i].Value {
				t.Errorf("%s [%d]: got %v %g, want %v %g", c.in, i, got[i].Time, got[i].Value, c.want[i].Time, c.want[i].Value)
			}
		}
		// Outside check: the Go standard library's encoding/json reads the
		// same values from every accepted payload.
		var ref any
		if err := json.Unmarshal([]byte(c.in), &ref); err != nil {
			t.Errorf("%s: encoding/json rejects an accepted payload: %v", c.in, err)
			continue
		}
		checkAgainstJSON(t, c.in, ref, got)
	}
}

// checkAgainstJSON compares accepted observations with encoding/json's
// reading of the same payload (values exactly; times when given as RFC
// 3339, by time.Parse).
func checkAgainstJSON(t *testing.T, in string, ref any, got []Observation) {
	t.Helper()
	var objs []any
	switch r := ref.(type) {
	case float64:
		if len(got) != 1 || got[0].Value != r || !got[0].Time.Equal(arrival) {
			t.Errorf("%s: got %v, encoding/json reads %v", in, got, r)
		}
		return
	case map[string]any:
		objs = []any{r}
	case []any:
		objs = r
	default:
		t.Errorf("%s: accepted, but encoding/json reads a %T", in, ref)
		return
	}
	if len(objs) != len(got) {
		t.Errorf("%s: %d observations, encoding/json reads %d elements", in, len(got), len(objs))
		return
	}
	for i, o := range objs {
		m, ok := o.(map[string]any)
		if !ok {
			t.Errorf("%s [%d]: accepted, but encoding/json reads a %T", in, i, o)
			continue
		}
		if v, _ := m["value"].(float64); v != got[i].Value {
			t.Errorf("%s [%d]: value %g, encoding/json reads %v", in, i, got[i].Value, m["value"])
		}
		if s, ok := m["time"].(string); ok {
			tt, err := time.Parse(time.RFC3339Nano, s)
			if err != nil || !tt.Equal(got[i].Time) {
				t.Errorf("%s [%d]: time %v, time.Parse reads %v (%v)", in, i, got[i].Time, tt, err)
			}
		}
	}
}

func TestParsePayloadRejects(t *testing.T) {
	small := Limits{MaxPayload: 200, MaxBatch: 3}
	deep := "[" + strings.Repeat(`[`, 10000)
	cases := []struct {
		name, in string
		lim      Limits
		code     string
		reason   string // a part the reason must contain
	}{
		{"empty", ``, Limits{}, CodeEmpty, "empty"},
		{"white space", " \n\t", Limits{}, CodeEmpty, "white space"},
		{"empty array", `[ ]`, Limits{}, CodeEmpty, "empty array"},
		{"word", `hello`, Limits{}, CodeNotJSON, `"hello"`},
		{"truncated object", `{"value": 1`, Limits{}, CodeNotJSON, "ends early"},
		{"trailing garbage", `{"value": 1} x`, Limits{}, CodeNotJSON, `"x"`},
		{"two numbers", `1 2`, Limits{}, CodeNotJSON, "after the end"},
		{"hex", `0x10`, Limits{}, CodeNotJSON, `"0x10"`},
		{"decimal comma", `1,5`, Limits{}, CodeNotJSON, "after the end"},
		{"leading zero", `012`, Limits{}, CodeNotJSON, `"012"`},
		{"single quotes", `{'value': 1}`, Limits{}, CodeNotJSON, "byte 2"},
		{"unclosed string", `{"value`, Limits{}, CodeNotJSON, "not closed"},
		{"bad escape", `{"va\qlue": 1}`, Limits{}, CodeNotJSON, "bad escape"},
		{"NaN text", `NaN`, Limits{}, CodeNotFinite, `"NaN"`},
		{"Inf text", `-Inf`, Limits{}, CodeNotFinite, `"-Inf"`},
		{"NaN value", `{"value": NaN}`, Limits{}, CodeNotFinite, "not a finite number"},
		{"Infinity value", `{"value": Infinity}`, Limits{}, CodeNotFinite, `"Infinity"`},
		{"overflow", `1e999`, Limits{}, CodeNotFinite, `"1e999"`},
		{"overflow value", `{"value": -1.8e308}`, Limits{}, CodeNotFinite, "range of a 64-bit float"},
		{"string value", `{"value": "abc"}`, Limits{}, CodeBadValue, `value "abc" is a string`},
		{"numeric string value", `{"value": "12"}`, Limits{}, CodeBadValue, `"12"`},
		{"bool value", `{"value": true}`, Limits{}, CodeBadValue, "boolean"},
		{"null value", `{"value": null}`, Limits{}, CodeBadValue, "null"},
		{"object value", `{"value": {"x": 1}}`, Limits{}, CodeBadValue, "an object"},
		{"top-level string", `"12"`, Limits{}, CodeBadValue, `the string "12"`},
		{"top-level null", `null`, Limits{}, CodeBadValue, "null"},
		{"number element", `[1, 2]`, Limits{}, CodeBadValue, "element 1 is the number 1"},
		{"missing value", `{"time": "2024-05-01T11:00:00Z"}`, Limits{}, CodeMissingValue, `no "value"`},
		{"empty object", `{}`, Limits{}, CodeMissingValue, "empty"},
		{"missing value in array", `[{"value": 1}, {"time": 1714564740}]`, Limits{}, CodeMissingValue, "element 2"},
		{"unknown key", `{"value": 1, "unit": "bytes"}`, Limits{}, CodeBadField, `unknown key "unit"`},
		{"duplicate key", `{"value": 1, "value": 2}`, Limits{}, CodeBadField, "twice"},
		{"bad time string", `{"time": "yesterday", "value": 1}`, Limits{}, CodeBadTime, `"yesterday"`},
		{"date only", `{"time": "2024-05-01", "value": 1}`, Limits{}, CodeBadTime, "RFC 3339"},
		{"bool time", `{"time": true, "value": 1}`, Limits{}, CodeBadTime, "boolean"},
		{"null time", `{"time": null, "value": 1}`, Limits{}, CodeBadTime, "leave \"time\" out"},
		{"milliseconds", `{"time": 1714564740000, "value": 1}`, Limits{}, CodeBadTime, "milliseconds"},
		{"far future", `{"time": "2031-01-01T00:00:00Z", "value": 1}`, Limits{}, CodeBadTime, "ahead of arrival"},
		{"far past", `{"time": 0, "value": 1}`, Limits{}, CodeBadTime, "behind arrival"},
		{"year 9999", `{"time": "9999-01-01T00:00:00Z", "value": 1}`, Limits{MaxFuture: -1}, CodeBadTime, "1678–2262"},
		{"NaN time", `{"time": NaN, "value": 1}`, Limits{}, CodeNotFinite, "NaN"},
		{"payload too large", `{"value": 1, "time": "` + strings.Repeat("x", 300) + `"}`, small, CodeTooLarge, "the limit is 200 bytes"},
		{"batch too large", `[{"value":1},{"value":2},{"value":3},{"value":4}]`, small, CodeTooLarge, "more than 3"},
		{"nested arrays", deep, Limits{MaxPayload: 1 << 20}, CodeTooDeep, "may not nest"},
		{"object in object in array", `[{"value": {"value": 1}}]`, Limits{}, CodeTooDeep, "nested"},
		{"control char in string", "{\"value\": \"a\x01\"}", Limits{}, CodeNotJSON, "control character"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dst := []Observation{{arrival, 42}}
			got, err := ParsePayload([]byte(c.in), arrival, c.lim, dst)
			var rej *Reject
			if !errors.As(err, &rej) {
				t.Fatalf("%q: got %v, %v; want a *Reject %s", c.in, got, err, c.code)
			}
			if rej.Code != c.code {
				t.Errorf("%q: code %s (%s), want %s", c.in, rej.Code, rej.Reason, c.code)
			}
			if !strings.Contains(rej.Reason, c.reason) {
				t.Errorf("%q: reason %q does not mention %q", c.in, rej.Reason, c.reason)
			}
			if len(got) != 1 || got[0].Value != 42 {
				t.Errorf("%q: dst changed on reject: %v", c.in, got)
			}
			// Deterministic: the same input gives the same reject.
			_, err2 := ParsePayload([]byte(c.in), arrival, c.lim, nil)
			if err2.Error() != err.Error() {
				t.Errorf("%q: second parse %v, first %v", c.in, err2, err)
			}
		})
	}
	if len(cases) < 25 {
		t.Fatalf("only %d malformed cases", len(cases))
	}
}

func TestParsePayloadLimitsOff(t *testing.T) {
	got, err := ParsePayload([]byte(`{"time": 0, "value": 1}`), arrival, Limits{MaxPast: -1}, nil)
	if err != nil || !got[0].Time.Equal(time.Unix(0, 0)) {
		t.Fatalf("MaxPast -1 should accept the epoch: %v %v", got, err)
	}
}

func TestParsePayloadAllocs(t *testing.T) {
	obj := []byte(`{"time": "2024-05-01T11:59:00Z", "value": 1834.25}`)
	arr := []byte(`[{"time": 1714564740, "value": 1}, {"time": 1714564741.5, "value": 2}, {"value": 3}]`)
	bare := []byte(`12345.5`)
	dst := make([]Observation, 0, 8)
	for _, in := range [][]byte{obj, arr, bare} {
		allocs := testing.AllocsPerRun(200, func() {
			var err error
			if dst, err = ParsePayload(in, arrival, Limits{}, dst[:0]); err != nil {
				t.Fatal(err)
			}
		})
		if allocs != 0 {
			t.Errorf("%s: %v allocations per parse, want 0", in, allocs)
		}
	}
}

func FuzzParsePayload(f *testing.F) {
	for _, s := range []string{
		`12345.5`, `{"value": 1}`, `{"time": "2024-05-01T11:59:00Z", "value": 1.5}`,
		`[{"time": 1714564740.5, "value": 1}, {"value": 2}]`, `{"value": "abc"}`, `NaN`, `1e999`,
		`[[[[`, `{"\u0074ime": "2024-05-01T11:00:00Z", "value": 4}`, `{"time": 1e9, "value": 0}`,
		`{"time": -1.5, "value": 0}`, "\"\\ud83d\\ude00\"", `[{"value":1},]`, `{"value":1,}`,
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		got, err := ParsePayload(data, arrival, Limits{MaxPast: -1, MaxFuture: -1}, nil)
		if err != nil {
			var rej *Reject
			if !errors.As(err, &rej) || rej.Code == "" || rej.Reason == "" {
				t.Fatalf("%q: error %v is not a complete *Reject", data, err)
			}
			return
		}
		if len(got) == 0 {
			t.Fatalf("%q: accepted with no observations", data)
		}
		for _, o := range got {
			if math.IsNaN(o.Value) || math.IsInf(o.Value, 0) {
				t.Fatalf("%q: non-finite value accepted", data)
			}
		}
		var ref any
		if err := json.Unmarshal(data, &ref); err != nil {
			t.Fatalf("%q: accepted, but encoding/json rejects it: %v", data, err)
		}
		checkAgainstJSON(t, string(data), ref, got)
	})
}

func BenchmarkParsePayload(b *testing.B) {
	for _, c := range []struct{ name, in string }{
		{"object", `{"time": "2024-05-01T11:59:00Z", "value": 1834.25}`},
		{"object-unix", `{"time": 1714564740, "value": 1834.25}`},
		{"bare", `1834.25`},
		{"array10", `[` + strings.Repeat(`{"time": 1714564740, "value": 1834.25},`, 9) + `{"value": 1}]`},
	} {
		b.Run(c.name, func(b *testing.B) {
			in := []byte(c.in)
			dst := make([]Observation, 0, 16)
			b.SetBytes(int64(len(in)))
			b.ReportAllocs()
			for b.Loop() {
				var err error
				if dst, err = ParsePayload(in, arrival, Limits{}, dst[:0]); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
