package daemon

import (
	"context"
	"errors"
	"testing"
	"time"

	"forewarn/config"
	"forewarn/state"
	"forewarn/stream"
	"forewarn/stream/streamtest"
)

// A refit that falls due inside an array waits for the array's last
// close (series.ObserveIn). A shutdown can catch the series between two
// observations of the array with that refit owed: held by an alert
// evaluation, which no longer releases what waits behind it once
// stopping. Its record must then not be stored (flusher.step, ackFloor):
// restored, the owed refit would look like one that was running and run
// at once, at another bucket. Restarted and handed the stream again, the
// series ends exactly as in the uninterrupted run.
//
// The shutdown is started (the loop's stopping, what Run sets when it begins to
// stop) at the moment the scenario arises, which the test reaches by
// stepping the loop's jobs itself, so that it does not depend on timing.
func TestShutdownWithRefitOwedInsideArray(t *testing.T) {
	_, url := streamtest.RunServer(t)
	const topic = "s.owed"
	mkConfig := func() *config.Config {
		c := testConfig(t.TempDir()) // first fit at the 20th close, then every 30: the 50th
		c.Series[0].Horizon = 30
		thr := walk(75) // near the forecasts around bucket 50: evaluations need a simulation
		c.Alerts = []config.Alert{{Name: "near", Match: ">", Above: &thr, Within: 20 * time.Minute, Probability: 0.9}}
		return c.WithDefaults()
	}
	var all []stream.Message
	for b := range int64(41) { // buckets 0…40; 40 open
		all = append(all, intakeMsg(topic, uint64(b+1), at{b: b, v: walk(b)}))
	}
	var arr []at
	for b := int64(41); b <= 62; b++ { // closes 40…61: the 50th close (bucket 49) is a refit point
		arr = append(arr, at{b: b, v: walk(b)})
	}
	array := intakeMsg(topic, 42, arr...)
	all = append(all, array)

	// drain steps the jobs until the series has applied everything.
	drain := func(d *Daemon) {
		l := d.loopFor(topic)
		e := l.series[topic]
		for e.held() || len(e.pending) > 0 {
			l.jobStep()
		}
	}

	// The uninterrupted run.
	cfgA := mkConfig()
	a := start(t, url, cfgA)
	a.d.Inspect(context.Background(), func(map[string]*Entry) {
		a.d.handleBatch(all)
		drain(a.d)
	})
	a.stop(t)
	want := load(t, cfgA.State.Dir, topic)
	if want.Seq != array.Seq || want.SeqApplied != uint32(len(arr)) || want.Model.FittedAt != bucket0+61 {
		t.Fatalf("uninterrupted: position (%d, %d), fitted at %d; want (%d, %d), %d (the array's last close)",
			want.Seq, want.SeqApplied, want.Model.FittedAt-bucket0, array.Seq, len(arr), 61)
	}

	// The run stopped between two observations of the array, the refit
	// owed and an alert evaluation running.
	cfgB := mkConfig()
	b := start(t, url, cfgB)
	reached := false
	b.d.Inspect(context.Background(), func(map[string]*Entry) {
		b.d.handleBatch(all)
		l := b.d.loopFor(topic)
		e := l.series[topic]
		for !(e.alerting && e.s.FitOwed()) && (e.held() || len(e.pending) > 0) {
			l.jobStep()
		}
		if reached = e.alerting && e.s.FitOwed(); reached {
			l.stopping = true // the shutdown begins here
		}
	})
	b.stop(t)
	if !reached {
		t.Fatal("the scenario did not arise: no alert evaluation held the series while a refit was owed")
	}
	st, err := state.Open(cfgB.State.Dir, state.ReadOnly())
	if err != nil {
		t.Fatal(err)
	}
	mid, err := st.Load(topic)
	st.Close()
	switch {
	case errors.Is(err, state.ErrNotFound): // never stored: rebuilt from the stream
	case err != nil:
		t.Fatal(err)
	case mid.Seq == array.Seq && mid.SeqApplied < uint32(len(arr)):
		t.Fatalf("record stored inside the array (position %d, %d of %d) with a refit owed: since refit %d, fitted at %d",
			mid.Seq, mid.SeqApplied, len(arr), mid.SinceRefit, mid.Model.FittedAt-bucket0)
	}

	// Restarted and handed the whole stream again.
	c := start(t, url, cfgB)
	c.d.Inspect(context.Background(), func(map[string]*Entry) {
		c.d.handleBatch(all)
		drain(c.d)
	})
	c.stop(t)
	if d := snapshotDiff(load(t, cfgB.State.Dir, topic), want); d != "" {
		t.Fatalf("stopped with a refit owed, restarted and redelivered: differs from the uninterrupted run: %s", d)
	}
}
