package daemon

import (
	"fmt"
	"testing"
	"time"

	"github.com/nats-io/nats.go"

	"forewarn/stream"
	"forewarn/stream/streamtest"
)

// The kind of a series whose entry says kind: auto comes from the
// stream.KindHeader of its first message (a source sends counter for a
// metric whose TYPE is counter) and survives a restart: the record is not
// set aside as a kind change. An entry with a kind of its own wins over
// the header, and a header naming neither kind is rejected as bad_field.
// (The expected behaviour is the config's documentation of Series.Kind,
// common practice for a first-writer-decides attribute.)
func TestKindHeader(t *testing.T) {
	_, url := streamtest.RunServer(t)
	cfg := testConfig(t.TempDir())
	auto := cfg.Series[0]
	auto.Match, auto.Kind = "auto.>", "auto"
	fixed := cfg.Series[0]
	fixed.Match, fixed.Kind = "fixed.>", "gauge"
	cfg.Series = append(cfg.Series[:0:0], auto, fixed, cfg.Series[0])
	cfg = cfg.WithDefaults()

	send := func(nc *nats.Conn, topic, kind string, i int) {
		t.Helper()
		m := nats.NewMsg("metrics." + topic)
		if kind != "" {
			m.Header.Set(stream.KindHeader, kind)
		}
		m.Data = fmt.Appendf(nil, `{"time": %d, "value": %d}`, 1_700_000_000+60*i, 100+i)
		if err := nc.PublishMsg(m); err != nil {
			t.Fatal(err)
		}
	}
	r := start(t, url, cfg)
	nc := streamtest.Connect(t, url)
	for i := range 3 {
		send(nc, "auto.c", "counter", i)
		send(nc, "auto.g", "", i)
		send(nc, "fixed.c", "counter", i)
	}
	send(nc, "auto.bad", "rate", 0)
	if err := nc.Flush(); err != nil {
		t.Fatal(err)
	}
	streamtest.Eventually(t, 10*time.Second, "nine observations accepted and one rejected", func() bool {
		return counter(t, r.d.Metrics().Accepted) == 9 && counter(t, r.d.Metrics().Rejected.WithLabelValues(stream.CodeBadField)) == 1
	})
	r.stop(t)
	want := map[string]string{"auto.c": "counter", "auto.g": "gauge", "fixed.c": "gauge"}
	for topic, kind := range want {
		if got := load(t, cfg.State.Dir, topic).Kind; got != kind {
			t.Errorf("%s: kind %q, want %q", topic, got, kind)
		}
	}
	r = start(t, url, cfg)
	if n := counter(t, r.d.Metrics().StateResets); n != 0 {
		t.Errorf("%v records set aside on restart; an auto series keeps the kind it began with", n)
	}
	send(nc, "auto.c", "", 3) // later messages need not repeat the header
	if err := nc.Flush(); err != nil {
		t.Fatal(err)
	}
	streamtest.Eventually(t, 10*time.Second, "one more observation accepted", func() bool {
		return counter(t, r.d.Metrics().Accepted) == 1
	})
	r.stop(t)
	if got := load(t, cfg.State.Dir, "auto.c").Kind; got != "counter" {
		t.Errorf("auto.c after restart: kind %q, want counter", got)
	}
}
