package daemon

import (
	"testing"
	"time"

	"forewarn/stream"
	"forewarn/stream/streamtest"
)

// Options.Intake replaces the intake the daemon would build from its
// configuration: a plain intake on other.> delivers a message the
// configured intake (metrics.>) would never see, and, its subject lying
// outside the configured intake subjects, the daemon rejects it as
// carrying no topic (CONTRACT.md §2, reject codes). Common practice: a
// dependency passed in is the one used.
func TestOptionsIntakeIsTheSource(t *testing.T) {
	_, url := streamtest.RunServer(t)
	cfg := testConfig(t.TempDir())
	in, err := stream.NewIntake(streamtest.Connect(t, url), stream.IntakeOptions{Subjects: []string{"other.>"}})
	if err != nil {
		t.Fatal(err)
	}
	r := start(t, url, cfg, func(o *Options) { o.Intake = in })
	defer r.stop(t)
	nc := streamtest.Connect(t, url)
	if err := nc.Publish("other.x", []byte(`{"time": 1700000000, "value": 1}`)); err != nil {
		t.Fatal(err)
	}
	if err := nc.Flush(); err != nil {
		t.Fatal(err)
	}
	m := r.d.Metrics()
	streamtest.Eventually(t, 10*time.Second, "the message on other.x rejected as carrying no topic", func() bool {
		return counter(t, m.Rejected.WithLabelValues(stream.CodeBadTopic)) == 1
	})
	if a := counter(t, m.Accepted); a != 0 {
		t.Errorf("%v observations accepted, want 0", a)
	}
}
