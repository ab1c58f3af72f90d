package config

import (
	"errors"
	"strings"
	"testing"
	"time"
)

// A source entry with only its URL gets the documented defaults (the
// Source field comments and the README's configuration block).
func TestSourceDefaults(t *testing.T) {
	c, err := Parse([]byte("sources:\n  - openmetrics: \"http://127.0.0.1:9100/metrics\"\n"), "s.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if len(c.Sources) != 1 {
		t.Fatalf("%d sources, want 1", len(c.Sources))
	}
	s := c.Sources[0]
	if s.Name != "http://127.0.0.1:9100/metrics" || s.Every != 15*time.Second || s.Timeout != 10*time.Second ||
		s.MaxBytes != 16<<20 || s.Kind != "auto" || s.TopicPrefix != "" || len(s.Select) != 0 || s.Line != 2 {
		t.Errorf("defaults: %+v", s)
	}
	c, err = Parse([]byte("sources:\n  - {openmetrics: \"https://h/m\", every: 2s, select: [a_total], topic_prefix: eu.h1, kind: gauge, max_bytes: 1MiB}\n"), "s.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if s := c.Sources[0]; s.Timeout != 2*time.Second || s.MaxBytes != 1<<20 || s.Kind != "gauge" || s.TopicPrefix != "eu.h1" || s.Select[0] != "a_total" {
		t.Errorf("short every: %+v", s)
	}
}

// Every problem of the sources list is reported at once, each with the
// line of its value.
func TestSourceProblemsAllAtOnce(t *testing.T) {
	yaml := `sources:
  - openmetrics: "ftp://h/x"
    every: 10ms
  - openmetrics: "http://h:9100/metrics"
    every: 1s
    timeout: 2s
  - openmetrics: "http://h:9100/metrics"
    name: dup
    max_bytes: 2GiB
    select: ["a b", ""]
    topic_prefix: "a..b"
    kind: rate
  - {openmetrics: "http://h2/metrics", name: dup}
  - name: nourl
    colour: red
`
	_, err := Parse([]byte(yaml), "bad.yaml")
	var e *Errors
	if !errors.As(err, &e) {
		t.Fatalf("got %v, want *Errors", err)
	}
	want := []struct {
		line int
		path string
		msg  string
	}{
		{2, "sources[0].openmetrics", "not an http or https URL"},
		{3, "sources[0].every", "outside 100ms..24h0m0s"},
		{6, "sources[1].timeout", "longer than every 1s"},
		{9, "sources[2].max_bytes", "outside 1..1073741824"},
		{10, "sources[2].select[0]", "not a metric name"},
		{10, "sources[2].select[1]", "not a metric name"},
		{11, "sources[2].topic_prefix", "token 2 is empty"},
		{12, "sources[2].kind", "not one of auto, gauge, counter"},
		{13, "sources[3].name", "also the name of sources[2]"},
		{14, "sources[4].openmetrics", "required"},
		{15, "sources[4].colour", "unknown key"},
	}
	if len(e.Problems) != len(want) {
		t.Errorf("%d problems, want %d:\n%v", len(e.Problems), len(want), err)
	}
	for _, w := range want {
		found := false
		for _, p := range e.Problems {
			if p.Line == w.line && p.Path == w.path && strings.Contains(p.Msg, w.msg) {
				found = true
			}
		}
		if !found {
			t.Errorf("no problem at line %d %s containing %q in\n%v", w.line, w.path, w.msg, err)
		}
	}
}
