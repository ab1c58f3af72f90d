package config

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// FuzzParse: no input makes Parse panic, and every result is either a
// valid configuration or an *Errors with at least one problem.
func FuzzParse(f *testing.F) {
	files, _ := filepath.Glob("testdata/*.yaml")
	for _, name := range files {
		if data, err := os.ReadFile(name); err == nil {
			f.Add(data)
		}
	}
	for _, s := range []string{
		"", "---\n---\n", "a: &a [*a]\n", "series: [{levels: &l [1, 2]}, {levels: *l}]\n",
		"series:\n  - {step: 1m, model: \"ARIMA(99999,0,0)\"}\n", "nats: {url: \"nats://[::1\"}\n",
		"intake: {max_bytes: 18446744073709551616}\n", "limits: {max_window: 0x7fffffff}\n",
		"alerts: [{name: a, match: \">\", above: 1e308, within: 1ns, probability: 1e-300}]\n",
		"\xff\xfe", "{", "[1, 2", "? [a]\n: b\n", "!!binary x: y\n",
		"series:\n  - {model: \"0,1,1 x 0,1,1\", seasons: [1d, 7d], constant: drift, step: 1h}\n",
		"series:\n  - {period: 12, seasons: [-1w, 99999999999999999999, 1e3d], model: \"9,9,9×9,9,9\"}\n",
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		c, err := Parse(data, "fuzz.yaml")
		if err != nil {
			var e *Errors
			if !errors.As(err, &e) || len(e.Problems) == 0 {
				t.Fatalf("error %v is not an *Errors with problems", err)
			}
			_ = e.Error()
			return
		}
		if err := c.Validate(); err != nil {
			t.Fatalf("Parse accepted a configuration that Validate rejects: %v", err)
		}
		for i := range c.Series {
			_ = c.Series[i].Fingerprint()
		}
	})
}

// aliasFlood is a small file whose aliases expand to millions of values.
func aliasFlood() []byte {
	var b strings.Builder
	b.WriteString("series:\n  - {match: \"x.>\", levels: &l [" + strings.Repeat("x, ", 1000) + "x]}\n")
	for range 3000 {
		b.WriteString("  - {match: \"y.>\", levels: *l}\n")
	}
	return []byte(b.String())
}

// Work and report size stay bounded whatever the file: the walk stops
// after maxNodes values, and at most maxProblems problems are listed.
func TestHostileFilesAreBounded(t *testing.T) {
	cases := map[string]struct {
		data []byte
		msg  string
	}{
		"alias flood":    {aliasFlood(), "more than 100000 values"},
		"deep nesting":   {[]byte(strings.Repeat("[", 5000)), "YAML syntax"},
		"many bad rules": {[]byte("alerts:\n" + strings.Repeat("  - {name: Bad, match: \"a..b\"}\n", 5000)), "more problems"},
		"alias chain":    {[]byte("series:\n  - &a {match: \">\"}\n" + strings.Repeat("  - *a\n", 20000)), "more than 10000 alias uses"},
	}
	for name, c := range cases {
		_, err := Parse(c.data, "hostile.yaml")
		var e *Errors
		if !errors.As(err, &e) {
			t.Fatalf("%s: %v", name, err)
		}
		// maxProblems, the count of the rest, and why the walk stopped.
		if len(e.Problems) > maxProblems+2 || !strings.Contains(err.Error(), c.msg) {
			t.Errorf("%s: %d problems, want at most %d and one containing %q", name, len(e.Problems), maxProblems+2, c.msg)
		}
	}
}

func BenchmarkParseAliasFlood(b *testing.B) {
	data := aliasFlood()
	b.ReportAllocs()
	for b.Loop() {
		_, _ = Parse(data, "flood.yaml")
	}
}
