package config

import (
	"errors"
	"os"
	"path/filepath"
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
