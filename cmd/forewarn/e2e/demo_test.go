package e2e

import (
	"fmt"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"
)

// TestDemo is issue 4's fresh-clone check of the demo: `forewarn run
// --demo` prints forecast lines within 60 s and an alert line within 90 s
// (issue 5: the demo shows an alert firing). The demo's lines are read from
// stdout; the log goes to stderr.
func TestDemo(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	d := &daemon{t: t, name: t.Name(), logPath: filepath.Join(dir, "daemon.log")}
	d.httpAddr = fmt.Sprintf("127.0.0.1:%d", freePort(t))
	d.natsURL = fmt.Sprintf("nats://127.0.0.1:%d", freePort(t))
	d.args = []string{"run", "--demo", "--data", filepath.Join(dir, "data"),
		"--listen-nats", strings.TrimPrefix(d.natsURL, "nats://"), "--http", d.httpAddr}
	t.Cleanup(func() {
		d.kill()
		if t.Failed() {
			t.Logf("stdout:\n%s\nlog tail:\n%s", d.stdout.String(), tail(d.logPath, 30))
		}
	})
	begin := time.Now()
	d.start()
	lines := func() []string {
		var out []string
		for _, l := range strings.Split(d.stdout.String(), "\n") {
			if strings.TrimSpace(l) != "" {
				out = append(out, l)
			}
		}
		return out
	}
	isAlert := func(l string) bool { return strings.Contains(strings.ToLower(l), "alert") }
	eventually(t, 60*time.Second-time.Since(begin), "a forecast line on stdout", func() bool {
		for _, l := range lines() {
			if !isAlert(l) {
				return true
			}
		}
		return false
	})
	t.Logf("first forecast line after %s", time.Since(begin).Round(time.Second))
	eventually(t, 90*time.Second-time.Since(begin), "an alert line on stdout", func() bool {
		for _, l := range lines() {
			if isAlert(l) {
				return true
			}
		}
		return false
	})
	t.Logf("first alert line after %s", time.Since(begin).Round(time.Second))
	d.stop()
	for _, l := range lines() {
		if strings.HasPrefix(l, "{") {
			t.Errorf("stdout carries a log or JSON line, not a readable demo line: %s", l)
		}
	}
}

// TestQuery is `forewarn query TOPIC` against a running daemon (embedded
// server): it prints the latest forecast message; for a topic without a
// forecast it fails. Data: R's datasets::lh (48 luteinizing hormone
// samples at 10-minute intervals, Diggle 1990) on a 10-minute step.
func TestQuery(t *testing.T) {
	t.Parallel()
	values := readDataset(t, "lh.csv")
	const topic = "lab.lh"
	const step = 10 * time.Minute
	cfg := baseConfig(10) + `series:
  - match: "lab.>"
    step: 10m
    horizon: 6
    min_points: 20
    refit_every: 10
    model: "1,0,0"
    transform: none
`
	d := newDaemon(t, embedded, cfg)
	_, c, p := session(t, d)
	publishRange(p, topic, step, values, 0, len(values))
	waitOrigin(t, c, topic, step, len(values)-2, 60*time.Second)
	fs := c.get("forecast", "forewarn.forecast."+topic)
	latest := fs[len(fs)-1].Data

	out, code, errOut := query(t, d.natsURL, topic)
	if code != 0 {
		t.Fatalf("forewarn query %s: exit %d: %s", topic, code, errOut)
	}
	if !reflect.DeepEqual(normalized(t, out), normalized(t, latest)) {
		t.Errorf("forewarn query %s:\n got %s\nwant the latest forecast %s", topic, out, latest)
	}
	if out, code, errOut := query(t, d.natsURL, "lab.nothing"); code == 0 {
		t.Errorf("forewarn query of a topic without a forecast: exit 0, output %q %q", out, errOut)
	}
	d.stop()
}
