package e2e

import (
	"encoding/json"
	"fmt"
	"net/http"
	"os"
	"os/exec"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
)

// nodeExporter is Debian's exporter of host metrics (package
// prometheus-node-exporter), which nobody on this project wrote.
const nodeExporter = "prometheus-node-exporter"

// forewarn scrapes a real exporter and forecasts a gauge (available
// memory) and a counter (the host's context switches) from it: the first
// forecast of each arrives within min_points × every + 10 s of the daemon
// being ready (issue 16, "A real exporter"). The counter becomes a
// counter series from its TYPE alone (the series entry says kind: auto).
//
// The test waits on the forecast messages themselves; the bound is what
// it checks, measured from readiness to arrival.
func TestNodeExporterSource(t *testing.T) {
	bin, err := exec.LookPath(nodeExporter)
	if err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("%s is not installed; .ci/run installs it, and under CI=true this test must run", nodeExporter)
		}
		t.Skipf("%s is not installed (apt-get install %s); skipped outside CI", nodeExporter, nodeExporter)
	}
	port := freePort(t)
	exp := exec.Command(bin, fmt.Sprintf("--web.listen-address=127.0.0.1:%d", port),
		"--collector.disable-defaults", "--collector.stat", "--collector.meminfo")
	if err := exp.Start(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { exp.Process.Kill(); exp.Wait() })
	url := fmt.Sprintf("http://127.0.0.1:%d/metrics", port)
	eventually(t, 30*time.Second, "the exporter answers", func() bool {
		resp, err := http.Get(url)
		if err != nil {
			return false
		}
		resp.Body.Close()
		return resp.StatusCode == http.StatusOK
	})

	const (
		every     = time.Second
		minPoints = 10
	)
	cfg := baseConfig(100) + fmt.Sprintf(`sources:
  - openmetrics: %q
    every: 1s
    select: [node_memory_MemAvailable_bytes, node_context_switches_total]
    topic_prefix: host
series:
  - match: "host.>"
    kind: auto
    step: 1s
    horizon: 5
    window: 60
    min_points: %d
    refit_every: 30
    model: "1,1,0"
    transform: none
`, url, minPoints)
	d := newDaemon(t, embedded, cfg)
	// A CPU's idle seconds, the other obvious counter, can rise by exactly
	// one step per second on an idle host, so that its differences are
	// constant and no ARIMA model fits; context switches always vary.
	mem, cpu := "host.node_memory_MemAvailable_bytes", "host.node_context_switches_total"
	// Subscribe before the daemon runs its sources: connect to the
	// embedded server as soon as it is ready.
	d.start()
	ready := time.Now()
	nc := connect(t, d.natsURL)
	first := make(chan *nats.Msg, 16)
	sub, err := nc.Subscribe("forewarn.forecast.host.>", func(m *nats.Msg) { first <- m })
	if err != nil {
		t.Fatal(err)
	}
	defer sub.Unsubscribe()
	if err := nc.Flush(); err != nil {
		t.Fatal(err)
	}
	bound := minPoints*every + 10*time.Second
	kinds := map[string]string{}
	for len(kinds) < 2 {
		m := <-first // go test -timeout is the backstop; the bound is checked below
		var f struct {
			Topic string `json:"topic"`
			Kind  string `json:"kind"`
		}
		if err := json.Unmarshal(m.Data, &f); err != nil {
			t.Fatalf("forecast %s: %v", m.Subject, err)
		}
		if _, seen := kinds[f.Topic]; seen || (f.Topic != mem && f.Topic != cpu) {
			continue
		}
		kinds[f.Topic] = f.Kind
		took := time.Since(ready)
		t.Logf("first forecast of %s (%s) %.1f s after the daemon was ready (bound %v)", f.Topic, f.Kind, took.Seconds(), bound)
		if took > bound {
			t.Errorf("first forecast of %s after %v, beyond min_points × every + 10 s = %v", f.Topic, took, bound)
		}
	}
	if kinds[mem] != "gauge" || kinds[cpu] != "counter" {
		t.Errorf("kinds %v: want %s gauge (TYPE gauge) and %s counter (TYPE counter)", kinds, mem, cpu)
	}
	if out, code, errOut := query(t, d.natsURL, cpu); code != 0 {
		t.Errorf("forewarn query %s: exit %d: %s %s", cpu, code, out, errOut)
	}
	d.stop()
}
