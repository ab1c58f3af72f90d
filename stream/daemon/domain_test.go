package daemon

import (
	"encoding/json"
	"fmt"
	"strings"
	"testing"
	"time"

	"github.com/nats-io/nats.go"

	"forewarn/stream"
	"forewarn/stream/streamtest"
)

// A series whose entry fixes transform: log rejects 0 and negative values
// at intake as out_of_domain from its first observation, before any fit,
// with a reason that names the value and the transform (CONTRACT.md §2:
// a reason a person can act on); positive values go on to the series.
func TestWarmingUpLogSeriesRejectsOutOfDomain(t *testing.T) {
	_, url := streamtest.RunServer(t)
	cfg := testConfig(t.TempDir())
	cfg.Series[0].Transform = "log"
	r := start(t, url, cfg)
	defer r.stop(t)

	nc := streamtest.Connect(t, url)
	rejects := make(chan *nats.Msg, 16)
	sub, err := nc.ChanSubscribe(cfg.Output.Prefix+".reject.>", rejects)
	if err != nil {
		t.Fatal(err)
	}
	defer sub.Unsubscribe()
	if err := nc.Flush(); err != nil {
		t.Fatal(err)
	}
	for i, v := range []string{"5", "0", "-2.5", "7"} {
		msg := fmt.Sprintf(`{"time": %d, "value": %s}`, 1_700_000_000+60*i, v)
		if err := nc.Publish("metrics.disk.free", []byte(msg)); err != nil {
			t.Fatal(err)
		}
	}
	if err := nc.Flush(); err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"value 0 under transform log", "value -2.5 under transform log"} {
		var m *nats.Msg
		select {
		case m = <-rejects:
		case <-time.After(10 * time.Second):
			t.Fatalf("no reject for %q", want)
		}
		var rj struct{ Subject, Topic, Code, Reason string }
		if err := json.Unmarshal(m.Data, &rj); err != nil {
			t.Fatalf("%v: %s", err, m.Data)
		}
		if rj.Code != stream.CodeOutOfDomain || rj.Topic != "disk.free" || !strings.Contains(rj.Reason, want) {
			t.Errorf("reject %+v, want code out_of_domain and a reason with %q", rj, want)
		}
	}
	streamtest.Eventually(t, 10*time.Second, "the two positive values accepted", func() bool {
		return counter(t, r.d.Metrics().Accepted) == 2
	})
	if n := counter(t, r.d.Metrics().Rejected.WithLabelValues(stream.CodeOutOfDomain)); n != 2 {
		t.Errorf("out_of_domain counted %v times, want 2", n)
	}
}
