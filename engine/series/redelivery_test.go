package series

import (
	"fmt"
	"reflect"
	"strings"
	"testing"
)

// The rules Handled and Advance follow are those of their doc comments and
// of stream/daemon/doc.go ("What is acknowledged"): a record holds the
// stream position it reflects, the message and how many of its
// observations; position 0 is "no position" (plain subscriptions); a
// position never moves back.
func TestHandledAdvance(t *testing.T) {
	s, err := New("p", settings())
	if err != nil {
		t.Fatal(err)
	}
	type probe struct {
		seq  uint64
		i    int
		want bool
	}
	check := func(what string, seq uint64, applied uint32, probes ...probe) {
		t.Helper()
		if gs, ga := s.Position(); gs != seq || ga != applied {
			t.Fatalf("%s: position (%d, %d), want (%d, %d)", what, gs, ga, seq, applied)
		}
		for _, p := range probes {
			if got := s.Handled(p.seq, p.i); got != p.want {
				t.Errorf("%s: Handled(%d, %d) = %v, want %v", what, p.seq, p.i, got, p.want)
			}
		}
	}
	check("new series", 0, 0,
		probe{0, 0, false}, probe{1, 0, false}, probe{7, 3, false})

	s.Advance(5, 0) // observation 0 of message 5 applied
	check("after (5, 0)", 5, 1,
		probe{4, 0, true}, probe{4, 1000, true}, // earlier messages: wholly applied
		probe{5, 0, true}, probe{5, 1, false}, probe{5, 2, false},
		probe{6, 0, false}, probe{0, 0, false}) // position 0 is never handled

	s.Advance(5, 2) // observations up to 2 of message 5
	check("after (5, 2)", 5, 3, probe{5, 2, true}, probe{5, 3, false})

	s.Advance(5, 1) // not back within a message
	check("after (5, 1)", 5, 3, probe{5, 2, true})

	s.Advance(3, 9) // not back to an earlier message
	check("after (3, 9)", 5, 3, probe{5, 2, true}, probe{5, 3, false})

	s.Advance(0, 4) // no position: nothing recorded
	check("after (0, 4)", 5, 3, probe{0, 0, false})

	s.Advance(9, 0) // a later message starts over at its observation 0
	check("after (9, 0)", 9, 1,
		probe{5, 7, true}, probe{8, 0, true}, probe{9, 0, true}, probe{9, 1, false}, probe{10, 0, false})

	// The position survives a snapshot and a restore.
	snap := cloneSnapshot(s.Snapshot())
	r, err := Restore(snap, settings())
	if err != nil {
		t.Fatal(err)
	}
	if seq, applied := r.Position(); seq != 9 || applied != 1 || !r.Handled(9, 0) || r.Handled(9, 1) {
		t.Fatalf("restored: position (%d, %d), Handled(9,0) %v, Handled(9,1) %v; want (9, 1), true, false",
			seq, applied, r.Handled(9, 0), r.Handled(9, 1))
	}
}

// obs is one observation of a message: bucket b, sec seconds into it, value v.
type obs struct {
	b, sec int64
	v      float64
}

// message is one bus message: its stream position and its observations in
// payload order (a JSON array carries several).
type message struct {
	seq uint64
	obs []obs
}

// deliver applies m as stream/daemon does (handle, apply, finishFit): an
// observation Handled reports as applied is skipped; every other one is
// observed and then recorded with Advance, accepted or rejected; a refit a
// bucket close asks for is installed before the next observation. With
// crashAtFit it returns true at the first NeedFit, before the refit: the
// series is then what a record saved while the refit ran holds.
func deliver(t *testing.T, s *Series, m message, crashAtFit bool) bool {
	t.Helper()
	for i, o := range m.obs {
		if s.Handled(m.seq, i) {
			continue
		}
		out, _ := s.Observe(at(o.b)+o.sec*1e9, o.v) // a rejected observation is counted in the state
		s.Advance(m.seq, i)
		if out == NeedFit {
			if crashAtFit {
				return true
			}
			if _, err := s.Install(s.FitJob().Run()); err != nil {
				t.Fatalf("refit at message %d, observation %d: %v", m.seq, i, err)
			}
		}
	}
	return false
}

// singles is one message per bucket, buckets from, from+1, …, with
// positions from seq on.
func singles(seq uint64, from int64, values []float64) []message {
	out := make([]message, len(values))
	for i, v := range values {
		out[i] = message{seq: seq + uint64(i), obs: []obs{{b: from + int64(i), v: v}}}
	}
	return out
}

// cloneSnapshot is a deep copy of a snapshot: the series keeps changing
// the slices its Snapshot shares.
func cloneSnapshot(s *Snapshot) *Snapshot {
	c := *s
	c.Window = append([]float64(nil), s.Window...)
	c.Alerts = append([]AlertSnapshot(nil), s.Alerts...)
	if s.Model != nil {
		m := *s.Model
		m.Params = append([]float64(nil), s.Model.Params...)
		m.Filter = append([]float64(nil), s.Model.Filter...)
		c.Model = &m
	}
	return &c
}

// snapshotDiff names the fields in which got and want differ ("" when
// none does), with both values.
func snapshotDiff(got, want *Snapshot) string {
	var b strings.Builder
	g, w := reflect.ValueOf(*got), reflect.ValueOf(*want)
	for i := range g.NumField() {
		if !reflect.DeepEqual(g.Field(i).Interface(), w.Field(i).Interface()) {
			gv, wv := g.Field(i).Interface(), w.Field(i).Interface()
			if m, ok := gv.(*ModelSnapshot); ok && m != nil {
				gv = *m
			}
			if m, ok := wv.(*ModelSnapshot); ok && m != nil {
				wv = *m
			}
			fmt.Fprintf(&b, "\n\t%s: got %v, want %v", g.Type().Field(i).Name, gv, wv)
		}
	}
	return b.String()
}

// redeliverNoEffect redelivers each message of replays to s and fails
// unless the state (the whole snapshot: window, open bucket, counter
// offsets, late count, position) stays what it was.
func redeliverNoEffect(t *testing.T, s *Series, what string, replays ...message) {
	t.Helper()
	want := cloneSnapshot(s.Snapshot())
	for _, m := range replays {
		deliver(t, s, m, false)
	}
	if d := snapshotDiff(cloneSnapshot(s.Snapshot()), want); d != "" {
		t.Fatalf("%s changed the state: %s", what, d)
	}
}

// wouldChange fails unless applying m to a copy of s, with no position
// check, changes the state: the replay that follows is one that Handled
// alone keeps out.
func wouldChange(t *testing.T, s *Series, m message) {
	t.Helper()
	c, err := Restore(cloneSnapshot(s.Snapshot()), s.Settings())
	if err != nil {
		t.Fatal(err)
	}
	before := cloneSnapshot(c.Snapshot())
	before.Seq, before.SeqApplied = 0, 0
	for _, o := range m.obs {
		c.Observe(at(o.b)+o.sec*1e9, o.v)
	}
	after := c.Snapshot()
	after.Seq, after.SeqApplied = 0, 0
	if reflect.DeepEqual(cloneSnapshot(after), before) {
		t.Fatalf("applying message %d again would not change the state: the replay proves nothing", m.seq)
	}
}

// A gauge's open bucket takes the last value (Observe; TestLateAndSameBucket)
// until an observation of a later bucket closes it (CONTRACT.md §2,
// Intake). A redelivered message with another value for the open bucket
// must not overwrite the later one.
func TestRedeliveryInOpenBucket(t *testing.T) {
	s, _ := New("g", settings())
	msgs := append(singles(1, 0, []float64{5, 6, 7}),
		message{seq: 4, obs: []obs{{b: 3, v: 10}}},
		message{seq: 5, obs: []obs{{b: 3, sec: 10, v: 99}}},
		message{seq: 6, obs: []obs{{b: 3, sec: 20, v: 20}}})
	for _, m := range msgs {
		deliver(t, s, m, false)
	}
	if sn := s.Snapshot(); sn.OpenBucket != 3 || sn.OpenValue != 20 || sn.Closed != 3 || sn.Late != 0 {
		t.Fatalf("setup: open bucket %d value %g, closed %d, late %d; want 3, 20, 3, 0", sn.OpenBucket, sn.OpenValue, sn.Closed, sn.Late)
	}
	wouldChange(t, s, msgs[3])
	wouldChange(t, s, msgs[4])
	wouldChange(t, s, msgs[0]) // late: counted
	redeliverNoEffect(t, s, "message 4 (open bucket, value 10) again", msgs[3])
	redeliverNoEffect(t, s, "message 5 (open bucket, value 99) again", msgs[4])
	redeliverNoEffect(t, s, "message 1 (closed bucket) again", msgs[0])
	redeliverNoEffect(t, s, "every message again, in order", msgs...)

	// A new position is applied.
	deliver(t, s, message{seq: 7, obs: []obs{{b: 3, sec: 30, v: 30}}}, false)
	if sn := s.Snapshot(); sn.OpenValue != 30 || sn.Seq != 7 || sn.SeqApplied != 1 {
		t.Fatalf("message 7: open value %g, position (%d, %d); want 30, (7, 1)", sn.OpenValue, sn.Seq, sn.SeqApplied)
	}
}

// A counter's drop is a reset (package doc, "Counters"): replaying an
// earlier, higher raw value of the open bucket would read the next value
// as another reset and add to the offset; replaying a lower one would be
// taken for a reset itself.
func TestRedeliveryCounter(t *testing.T) {
	set := settings()
	set.Kind = "counter"
	s, _ := New("c", set)
	msgs := append(singles(1, 0, []float64{100, 150}),
		message{seq: 3, obs: []obs{{b: 2, v: 300}}},
		message{seq: 4, obs: []obs{{b: 2, sec: 10, v: 20}}}, // reset: offset 300
		message{seq: 5, obs: []obs{{b: 2, sec: 20, v: 30}}},
		// An array in the open bucket with a reset inside it.
		message{seq: 6, obs: []obs{{b: 2, sec: 30, v: 35}, {b: 2, sec: 40, v: 5}, {b: 2, sec: 50, v: 8}}})
	for _, m := range msgs {
		deliver(t, s, m, false)
	}
	// 100, 150 | 300, reset → 300+20, 300+30, 300+35, reset → 335+5, 335+8.
	if sn := s.Snapshot(); sn.OpenValue != 343 || sn.CounterOffset != 335 || sn.CounterResets != 2 || sn.CounterLastRaw != 8 {
		t.Fatalf("setup: open %g offset %g resets %d last raw %g; want 343 335 2 8",
			sn.OpenValue, sn.CounterOffset, sn.CounterResets, sn.CounterLastRaw)
	}
	for _, i := range []int{2, 3, 4, 5} {
		wouldChange(t, s, msgs[i])
	}
	redeliverNoEffect(t, s, "message 3 (raw 300) again", msgs[2])
	redeliverNoEffect(t, s, "message 4 (raw 20, a reset) again", msgs[3])
	redeliverNoEffect(t, s, "the array with a reset again", msgs[5])
	redeliverNoEffect(t, s, "every message again, in order", msgs...)
}

// One message carrying several observations can close a bucket at a
// refit point part way through: the observations after it wait for the
// refit (NeedFit, then Install). A record saved meanwhile holds the part
// applied (Snapshot.SeqApplied). Restored from it and handed the whole
// stream again, the series ends exactly where the uninterrupted one does:
// nothing applied twice, nothing of the straddling message lost. Handed
// it all once more, nothing changes. For a counter the message ends with
// a reset in the open bucket, so that applying it twice would also move
// the total.
func TestRedeliveryStraddlingRefit(t *testing.T) {
	for _, kind := range []string{"gauge", "counter"} {
		t.Run(kind, func(t *testing.T) {
			set := settings() // first fit at the 40th closed bucket
			set.Kind = kind
			x := trend(42, 11)
			msgs := singles(1, 0, x[:39]) // buckets 0…38; 38 open
			tail := []float64{x[41], x[41] + 3, x[41] + 1}
			if kind == "counter" {
				tail = []float64{x[41], 5, 7} // a reset to 5
			}
			straddle := message{seq: 40, obs: []obs{
				{b: 38, sec: 30, v: x[38] + 0.5}, // same open bucket, a later value
				{b: 39, v: x[39]},                // closes 38: 39 closed
				{b: 40, v: x[40]},                // closes 39: 40 closed, the first fit
				{b: 41, v: tail[0]},              // waits for the fit; closes 40 under the new model
				{b: 41, sec: 20, v: tail[1]},
				{b: 41, sec: 40, v: tail[2]},
			}}
			msgs = append(msgs, straddle)

			whole, _ := New("s", set)
			for _, m := range msgs {
				deliver(t, whole, m, false)
			}
			want := cloneSnapshot(whole.Snapshot())
			wantFc := copyForecast(whole.Forecast())
			if want.Closed != 41 || want.Model == nil || want.Late != 0 || want.SeqApplied != 6 {
				t.Fatalf("uninterrupted run: closed %d, model %v, late %d, applied %d; want 41, fitted, 0, 6",
					want.Closed, want.Model != nil, want.Late, want.SeqApplied)
			}
			if kind == "counter" && (want.CounterResets != 1 || want.OpenValue != x[41]+7) {
				t.Fatalf("uninterrupted run: %d resets, open %g; want 1, %g", want.CounterResets, want.OpenValue, x[41]+7)
			}

			s, _ := New("s", set)
			for _, m := range msgs[:39] {
				deliver(t, s, m, false)
			}
			if !deliver(t, s, straddle, true) {
				t.Fatal("the straddling message asked for no refit")
			}
			mid := cloneSnapshot(s.Snapshot())
			if mid.Seq != 40 || mid.SeqApplied != 3 || mid.Model != nil || mid.OpenValue != x[40] {
				t.Fatalf("saved during the refit: position (%d, %d), model %v, open %g; want (40, 3), none, %g",
					mid.Seq, mid.SeqApplied, mid.Model != nil, mid.OpenValue, x[40])
			}

			// Restart from the saved record: the refit it was running is
			// due at once (the daemon queues it at load), then the stream
			// redelivers everything from the start.
			r, err := Restore(mid, set)
			if err != nil {
				t.Fatal(err)
			}
			if !r.FitDue() {
				t.Fatal("restored mid-refit: no refit due")
			}
			if _, err := r.Install(r.FitJob().Run()); err != nil {
				t.Fatal(err)
			}
			for _, m := range msgs {
				deliver(t, r, m, false)
			}
			if d := snapshotDiff(cloneSnapshot(r.Snapshot()), want); d != "" {
				t.Fatalf("restored and redelivered: state differs from the uninterrupted run: %s", d)
			}
			if got := copyForecast(r.Forecast()); !reflect.DeepEqual(got, wantFc) {
				t.Fatalf("restored and redelivered: forecast differs from the uninterrupted run")
			}

			wouldChange(t, r, straddle)
			redeliverNoEffect(t, r, "the straddling message again", straddle)
			redeliverNoEffect(t, r, "every message again, in order", msgs...)
		})
	}
}
