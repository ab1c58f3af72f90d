package series

import (
	"errors"
	"reflect"
	"testing"
)

// Refits coalesced within one message (ObserveIn). These are property
// tests of the rule's own definition (no outside reference applies): the
// refit schedule is a function of the data and its message boundaries.

// aheads returns, for each observation of m, the latest time of those
// after it (NoMore for the last), as stream/daemon computes it.
func aheads(m message) []int64 {
	out := make([]int64, len(m.obs))
	after := int64(NoMore)
	for i := len(m.obs) - 1; i >= 0; i-- {
		out[i] = after
		after = max(after, at(m.obs[i].b)+m.obs[i].sec*1e9)
	}
	return out
}

// fitAt is one refit a message asked for: the observation that asked and
// the last closed bucket the refit sees.
type fitAt struct {
	seq   uint64
	index int
	end   int64
}

// deliverIn applies m as stream/daemon does with ObserveIn, installing
// every refit asked for at once, and returns the refits asked for, the
// outcome of every observation and its error. With crashAtFit it stops
// at the first NeedFit, before the refit (a record saved while it runs).
func deliverIn(s *Series, m message, crashAtFit bool) (fits []fitAt, outs []Outcome, errs []error, crashed bool) {
	ah := aheads(m)
	for i, o := range m.obs {
		if s.Handled(m.seq, i) {
			continue
		}
		out, err := s.ObserveIn(at(o.b)+o.sec*1e9, o.v, ah[i])
		s.Advance(m.seq, i)
		outs, errs = append(outs, out), append(errs, err)
		if out == NeedFit {
			fits = append(fits, fitAt{m.seq, i, s.snap.WindowEnd})
			if crashAtFit {
				return fits, outs, errs, true
			}
			s.Install(s.FitJob().Run())
		}
	}
	return fits, outs, errs, false
}

// arrays cuts values (one a bucket, from bucket 0) into messages of size
// observations, positions from seq.
func arrays(seq uint64, values []float64, size int) []message {
	var out []message
	for i := 0; i < len(values); i += size {
		m := message{seq: seq + uint64(len(out))}
		for j := i; j < min(i+size, len(values)); j++ {
			m.obs = append(m.obs, obs{b: int64(j), v: values[j]})
		}
		out = append(out, m)
	}
	return out
}

// One observation a message: ObserveIn refits exactly as Observe, at
// every refit point, and the two end in the same state.
func TestObserveInSinglesAsObserve(t *testing.T) {
	x := trend(300, 21)
	a, _ := New("s", settings())
	b, _ := New("s", settings())
	var fitsA, fitsB int
	for i, m := range singles(1, 0, x) {
		out, err := a.Observe(at(m.obs[0].b), m.obs[0].v)
		if err != nil {
			t.Fatal(err)
		}
		a.Advance(m.seq, 0)
		if out == NeedFit {
			fitsA++
			a.Install(a.FitJob().Run())
		}
		f, _, errs, _ := deliverIn(b, m, false)
		if errs[0] != nil {
			t.Fatalf("observation %d: %v", i, errs[0])
		}
		fitsB += len(f)
	}
	// First fit at the 40th close (bucket 39 closed by bucket 40), then
	// every 25 closes: closes 40, 65, …, 290 of the 299 closed.
	if fitsA != 11 || fitsB != fitsA {
		t.Fatalf("refits: Observe %d, ObserveIn one a message %d; want 11 each", fitsA, fitsB)
	}
	if d := snapshotDiff(cloneSnapshot(b.Snapshot()), cloneSnapshot(a.Snapshot())); d != "" {
		t.Fatalf("ObserveIn one a message differs from Observe: %s", d)
	}
}

// Arrays of 60 one-bucket observations: each message that reaches a
// refit point asks for exactly one refit, after its last observation, of
// the last bucket it closes; the refit points inside it publish from the
// model they have. Delivered again from a record saved while a refit
// ran, the series ends where the uninterrupted run does.
func TestObserveInCoalescesRefits(t *testing.T) {
	x := trend(300, 22)
	msgs := arrays(1, x, 60)
	s, _ := New("s", settings())
	var fits []fitAt
	published := 0
	for _, m := range msgs {
		f, outs, errs, _ := deliverIn(s, m, false)
		for i, err := range errs {
			if err != nil {
				t.Fatalf("message %d, observation %d: %v", m.seq, i, err)
			}
			if outs[i] == Published {
				published++
			}
		}
		fits = append(fits, f...)
	}
	// Refit points (closes 40, 65, 90, …) fall in every message from the
	// first (closes 1…59: 40) on; the last message (buckets 240…299)
	// closes 239…298.
	want := []fitAt{{1, 59, 58}, {2, 59, 118}, {3, 59, 178}, {4, 59, 238}, {5, 59, 298}}
	if !reflect.DeepEqual(fits, want) {
		t.Fatalf("refits asked for (message, observation, last closed bucket): %v; want %v", fits, want)
	}
	// Every close after the first fit publishes: 299 closed, 59 before it,
	// 5 of them answered by the refit (Install), not by ObserveIn.
	if published != 299-59-4 {
		t.Errorf("%d forecasts published by observations; want %d", published, 299-59-4)
	}
	want0 := cloneSnapshot(s.Snapshot())

	// A record saved while message 3's refit ran; restored, the refit runs
	// again and the stream is delivered again from the start.
	c, _ := New("s", settings())
	var mid *Snapshot
	for _, m := range msgs {
		if _, _, _, crashed := deliverIn(c, m, m.seq == 3); crashed {
			mid = cloneSnapshot(c.Snapshot())
			break
		}
	}
	if mid == nil || mid.Seq != 3 || mid.SeqApplied != 60 || mid.WindowEnd != 178 {
		t.Fatalf("record during message 3's refit: %+v", mid)
	}
	r, err := Restore(mid, settings())
	if err != nil {
		t.Fatal(err)
	}
	if !r.FitDue() {
		t.Fatal("restored during a refit: no refit due")
	}
	r.Install(r.FitJob().Run())
	for _, m := range msgs {
		deliverIn(r, m, false)
	}
	if d := snapshotDiff(cloneSnapshot(r.Snapshot()), want0); d != "" {
		t.Fatalf("restored and delivered again: differs from the uninterrupted run: %s", d)
	}
}

// Several observations a bucket: the refit waits for the message's last
// close even when observations of the same bucket follow it (they wait
// for the refit). When the observation that would have made that close is
// refused, the refit owed is asked for after the message's last
// observation, with its error.
func TestObserveInOwedRefit(t *testing.T) {
	set := settings()
	set.Transform = "log" // values ≤ 0 are refused (ErrDomain)
	x := trend(60, 23)
	s, _ := New("s", set)
	for _, m := range singles(1, 0, x[:39]) { // buckets 0…38; 38 open
		deliverIn(s, m, false)
	}
	m := message{seq: 40, obs: []obs{
		{b: 39, v: x[39]},          // closes 38: 39 closed
		{b: 40, v: x[40]},          // closes 39: the first fit due, waits (bucket 41 comes later)
		{b: 40, sec: 30, v: -5},    // refused: not in the domain of log
		{b: 41, v: -1},             // refused: would have closed 40
		{b: 40, sec: 50, v: x[40]}, // the open bucket again
	}}
	fits, outs, errs, _ := deliverIn(s, m, false)
	if outs[1] != Warming || errs[1] != nil {
		t.Fatalf("the close at the refit point: %v, %v; want Warming (the fit waits)", outs[1], errs[1])
	}
	if !errors.Is(errs[3], ErrDomain) || outs[3] != Absorbed {
		t.Fatalf("bucket 41 at -1: %v, %v; want Absorbed, ErrDomain", outs[3], errs[3])
	}
	if want := []fitAt{{40, 4, 39}}; !reflect.DeepEqual(fits, want) || errs[4] != nil {
		t.Fatalf("refits asked for: %v (last error %v); want %v: the owed fit after the last observation", fits, errs[4], want)
	}
	if !s.HasModel() {
		t.Fatal("no model after the owed refit")
	}

	// The owed refit is asked for with the last observation's error when
	// that one is refused too.
	s2, _ := New("s", set)
	for _, mm := range singles(1, 0, x[:39]) {
		deliverIn(s2, mm, false)
	}
	m.obs[4].v = -2
	fits, _, errs, _ = deliverIn(s2, m, false)
	if want := []fitAt{{40, 4, 39}}; !reflect.DeepEqual(fits, want) || !errors.Is(errs[4], ErrDomain) {
		t.Fatalf("refused last observation: refits %v, error %v; want %v with ErrDomain", fits, errs[4], want)
	}
}

// An owed refit of a series that already has a model: the bucket it
// refits at has published its forecast from the old model, so Install
// does not publish it again (each origin once), and the next close
// publishes from the new model.
func TestObserveInOwedRefitPublishesOnce(t *testing.T) {
	set := settings()
	set.Transform = "log" // values ≤ 0 are refused (ErrDomain)
	x := trend(80, 24)
	s, _ := New("s", set)
	for _, m := range singles(1, 0, x[:65]) { // buckets 0…64; the first fit at 40 closed
		deliverIn(s, m, false)
	}
	if !s.HasModel() {
		t.Fatal("no model after the first fit")
	}
	m := message{seq: 70, obs: []obs{
		{b: 65, v: x[65]},          // closes 64: 65 closed, a refit point; waits (bucket 66 comes later)
		{b: 66, v: -1},             // refused: would have closed 65
		{b: 65, sec: 30, v: x[65]}, // the open bucket again; the message ends with the refit owed
	}}
	ah := aheads(m)
	var outs []Outcome
	var installed []Outcome
	for i, o := range m.obs {
		out, _ := s.ObserveIn(at(o.b)+o.sec*1e9, o.v, ah[i])
		s.Advance(m.seq, i)
		outs = append(outs, out)
		if out == NeedFit {
			got, err := s.Install(s.FitJob().Run())
			if err != nil {
				t.Fatal(err)
			}
			installed = append(installed, got)
		}
	}
	if outs[0] != Published {
		t.Fatalf("close at the refit point inside the message: %v, want Published (from the old model)", outs[0])
	}
	if want := []Outcome{Absorbed}; !reflect.DeepEqual(installed, want) {
		t.Fatalf("owed refit installed with %v, want %v: its origin's forecast is already out", installed, want)
	}
	if out, err := s.ObserveIn(at(66), x[66], NoMore); out != Published || err != nil {
		t.Fatalf("next close: %v, %v; want Published from the new model", out, err)
	}
}
