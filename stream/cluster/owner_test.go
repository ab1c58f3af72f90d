package cluster

import (
	"cmp"
	"context"
	"errors"
	"fmt"
	"slices"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
)

const testLease = 3 * time.Second

// interval is one spell of ownership of a partition by one instance.
type interval struct {
	instance  string
	epoch     uint64
	from, to  time.Time // to is zero while it lasts
	endReason string
}

// ledger records every Change of every instance of a test.
type ledger struct {
	mu    sync.Mutex
	spans map[int][]*interval
	log   []string
	onGet func(instance string, c Change) // called on each gain, on the reader goroutine
}

func newLedger() *ledger { return &ledger{spans: map[int][]*interval{}} }

func (l *ledger) follow(name string, w *Owner) {
	go func() {
		for c := range w.Changes() {
			if c.Gained && l.onGet != nil {
				l.onGet(name, c)
			}
			l.mu.Lock()
			l.log = append(l.log, name+": "+c.String())
			s := l.spans[c.Partition]
			if c.Gained {
				l.spans[c.Partition] = append(s, &interval{instance: name, epoch: c.Epoch, from: c.At})
			} else {
				for _, iv := range s {
					if iv.instance == name && iv.epoch == c.Epoch && iv.to.IsZero() {
						iv.to, iv.endReason = c.At, c.Reason
					}
				}
			}
			l.mu.Unlock()
		}
		// Changes closed: the Owner left and holds nothing.
		l.mu.Lock()
		now := time.Now()
		for _, s := range l.spans {
			for _, iv := range s {
				if iv.instance == name && iv.to.IsZero() {
					iv.to, iv.endReason = now, "left"
				}
			}
		}
		l.mu.Unlock()
	}()
}

// holders returns the current holder of each partition by the ledger
// ("" for none, "!" for two at once).
func (l *ledger) holders(n int) []string {
	l.mu.Lock()
	defer l.mu.Unlock()
	out := make([]string, n)
	for p := range n {
		for _, iv := range l.spans[p] {
			if iv.to.IsZero() {
				if out[p] != "" {
					out[p] = "!"
				} else {
					out[p] = iv.instance
				}
			}
		}
	}
	return out
}

// checkNoOverlap fails if two instances ever held one partition at once,
// by the times of their gain and loss, in the order of epochs. The
// instance paused, if any, may report a loss late (it was stopped), but
// only as expired or taken: that is the case fencing covers.
func (l *ledger) checkNoOverlap(t *testing.T, paused string) {
	t.Helper()
	l.mu.Lock()
	defer l.mu.Unlock()
	for p, s := range l.spans {
		s = slices.Clone(s)
		slices.SortFunc(s, func(a, b *interval) int { return cmp.Compare(a.epoch, b.epoch) })
		for i := 1; i < len(s); i++ {
			prev, cur := s[i-1], s[i]
			if prev.instance == paused && (prev.endReason == ReasonExpired || prev.endReason == ReasonTaken) {
				continue
			}
			if prev.to.IsZero() || cur.from.Before(prev.to) {
				t.Errorf("partition %d: %s (epoch %d) gained it at %v while %s (epoch %d) held it until %v",
					p, cur.instance, cur.epoch, cur.from.Format("15:04:05.000"), prev.instance, prev.epoch, prev.to.Format("15:04:05.000"))
			}
		}
	}
}

func (l *ledger) dump(t *testing.T) {
	l.mu.Lock()
	defer l.mu.Unlock()
	for _, s := range l.log {
		t.Log(s)
	}
}

// waitHolders waits until the ledger's holders equal want.
func waitHolders(t *testing.T, l *ledger, want []string, what string) {
	t.Helper()
	err := poll(30*time.Second, func() error {
		if got := l.holders(len(want)); !slices.Equal(got, want) {
			return fmt.Errorf("%s: holders %q, want %q", what, got, want)
		}
		return nil
	})
	if err != nil {
		l.dump(t)
		t.Fatal(err)
	}
}

type instance struct {
	name   string
	nc     *nats.Conn
	js     jetstream.JetStream
	owner  *Owner
	cancel context.CancelFunc
}

func startInstance(t *testing.T, l *ledger, bucket, name string, node, partitions int) *instance {
	t.Helper()
	nc, js := connect(t, node, name)
	ctx := ctxT(t)
	kv, err := EnsureBucket(ctx, js, bucket, 3, testLease)
	if err != nil {
		t.Fatal(err)
	}
	w, err := NewOwner(js, kv, Options{Instance: name, Partitions: partitions, Lease: testLease})
	if err != nil {
		t.Fatal(err)
	}
	rctx, cancel := context.WithCancel(context.Background())
	if err := w.Start(rctx); err != nil {
		cancel()
		t.Fatal(err)
	}
	l.follow(name, w)
	in := &instance{name: name, nc: nc, js: js, owner: w, cancel: cancel}
	t.Cleanup(func() { cancel(); <-w.Done() })
	return in
}

// Three instances hold every lease, each by exactly one of them as Assign
// says; a fourth joins and takes only its share; one is killed (its
// connection cut, no leave) and its partitions move to the survivors
// after its lease lapses, nothing else moving.
func TestLeasesJoinAndKill(t *testing.T) {
	const n = 16
	l := newLedger()
	names := []string{"fw-a", "fw-b", "fw-c"}
	ins := map[string]*instance{}
	for i, name := range names {
		ins[name] = startInstance(t, l, "LEASES1", name, i, n)
	}
	waitHolders(t, l, Assign(names, n), "three instances")

	before := l.holders(n)
	ins["fw-d"] = startInstance(t, l, "LEASES1", "fw-d", 0, n)
	four := append(slices.Clone(names), "fw-d")
	waitHolders(t, l, Assign(four, n), "a fourth joined")
	moved := 0
	for p, h := range l.holders(n) {
		if h != before[p] {
			moved++
			if h != "fw-d" {
				t.Errorf("partition %d moved from %s to %s, between instances that stayed", p, before[p], h)
			}
		}
	}
	t.Logf("join of a 4th instance moved %d of %d partitions", moved, n)

	// Kill fw-b: cut its connection first, so that it cannot leave.
	victim := ins["fw-b"]
	heldBefore := l.holders(n)
	epochs := l.epochs()
	killed := time.Now()
	victim.nc.Close()
	victim.cancel()
	<-victim.owner.Done()
	survivors := []string{"fw-a", "fw-c", "fw-d"}
	waitHolders(t, l, Assign(survivors, n), "fw-b killed")
	handover := time.Since(killed)
	lostB := 0
	for p, h := range heldBefore {
		if h == "fw-b" {
			lostB++
			continue
		}
		if e := l.epochs()[p]; e != epochs[p] {
			t.Errorf("partition %d of %s changed epoch %d → %d though its owner stayed", p, h, epochs[p], e)
			defer l.dump(t)
		}
	}
	t.Logf("kill of fw-b (%d partitions): taken over by the survivors %v after the kill (lease %v)", lostB, handover.Round(time.Millisecond), testLease)
	l.checkNoOverlap(t, "")
}

// epochs returns the current epoch of each partition (0 if free).
func (l *ledger) epochs() map[int]uint64 {
	l.mu.Lock()
	defer l.mu.Unlock()
	out := map[int]uint64{}
	for p, s := range l.spans {
		for _, iv := range s {
			if iv.to.IsZero() {
				out[p] = iv.epoch
			}
		}
	}
	return out
}

// A paused owner (stopped past its lease, as by SIGSTOP) loses its leases
// to the other instance, whose consumers delete the paused owner's: when
// it resumes it reports the loss, its consumers are gone, and it cannot
// open one at its old epoch again.
func TestPausedOwnerIsFenced(t *testing.T) {
	const n = 4
	_, js := connect(t, 2, "fence-admin")
	ctx := ctxT(t)
	st, err := js.CreateStream(ctx, jetstream.StreamConfig{Name: "FENCE", Subjects: []string{"fence.>"}, Replicas: 3, SubjectTransform: Transform(n)})
	if err != nil {
		t.Fatal(err)
	}
	defer js.DeleteStream(context.Background(), "FENCE")

	l := newLedger()
	var mu sync.Mutex
	opened := map[string]jetstream.Consumer{} // consumer name → consumer
	openErr := map[string]error{}
	l.onGet = func(instance string, c Change) { // what the daemon will do on a gain
		cons, err := OpenConsumer(ctx, st, "fw", c.Partition, c.Epoch, ConsumerOptions{})
		mu.Lock()
		defer mu.Unlock()
		name := ConsumerName("fw", c.Partition, c.Epoch)
		opened[name], openErr[name] = cons, err
	}
	a := startInstance(t, l, "LEASES2", "fw-a", 0, n)
	startInstance(t, l, "LEASES2", "fw-b", 1, n)
	waitHolders(t, l, Assign([]string{"fw-a", "fw-b"}, n), "two instances")

	var aParts []int
	aEpoch := map[int]uint64{}
	for p, h := range l.holders(n) {
		if h == "fw-a" {
			aParts = append(aParts, p)
			aEpoch[p] = l.epochs()[p]
		}
	}
	if len(aParts) == 0 {
		t.Fatal("fw-a owns nothing; pick other names")
	}
	resume := a.owner.pause()
	paused := time.Now()
	// fw-b takes all: fw-a's member key and leases lapse.
	err = poll(30*time.Second, func() error {
		for _, p := range aParts {
			if e, ok := l.epochsOf("fw-b")[p]; !ok || e <= aEpoch[p] {
				return fmt.Errorf("partition %d not yet with fw-b", p)
			}
		}
		return nil
	})
	if err != nil {
		l.dump(t)
		t.Fatal(err)
	}
	t.Logf("paused fw-a's %d partitions taken over by fw-b %v after the pause (lease %v)", len(aParts), time.Since(paused).Round(time.Millisecond), testLease)
	for _, p := range aParts {
		old := ConsumerName("fw", p, aEpoch[p])
		mu.Lock()
		cons, err := opened[old], openErr[old]
		mu.Unlock()
		if err != nil || cons == nil {
			t.Fatalf("fw-a's consumer %s was never opened: %v", old, err)
		}
		// The paused owner's consumer is gone: it can neither fetch nor ack.
		// (The cluster may answer "temporarily unavailable" for a moment
		// under load: ask again until it says found or not found.)
		err = poll(30*time.Second, func() error {
			if _, err := cons.Info(ctx); !errors.Is(err, jetstream.ErrConsumerNotFound) {
				return fmt.Errorf("the paused owner's consumer %s still answers: %v", old, err)
			}
			return nil
		})
		if err != nil {
			t.Error(err)
		}
	}
	resume()
	// fw-a reports the loss of each old epoch, then (rejoining) gains its
	// share back at new epochs; its old epoch can no longer open a consumer.
	waitHolders(t, l, Assign([]string{"fw-a", "fw-b"}, n), "fw-a resumed and rejoined")
	l.mu.Lock()
	for _, p := range aParts {
		for _, iv := range l.spans[p] {
			if iv.instance == "fw-a" && iv.epoch == aEpoch[p] && (iv.endReason != ReasonExpired && iv.endReason != ReasonTaken) {
				t.Errorf("partition %d: fw-a's old epoch ended %q, want expired or taken", p, iv.endReason)
			}
		}
	}
	l.mu.Unlock()
	for _, p := range aParts {
		if _, err := OpenConsumer(ctx, st, "fw", p, aEpoch[p], ConsumerOptions{}); !errors.Is(err, ErrFenced) {
			t.Errorf("partition %d: a consumer at the old epoch %d opened again: %v", p, aEpoch[p], err)
		}
	}
	l.checkNoOverlap(t, "fw-a")
}

// epochsOf returns the partitions an instance holds now, with epochs.
func (l *ledger) epochsOf(name string) map[int]uint64 {
	l.mu.Lock()
	defer l.mu.Unlock()
	out := map[int]uint64{}
	for p, s := range l.spans {
		for _, iv := range s {
			if iv.instance == name && iv.to.IsZero() {
				out[p] = iv.epoch
			}
		}
	}
	return out
}

// Restarting one NATS node: the owners reconnect to the other two and keep
// their leases, or hand them over cleanly; in the end Assign holds again.
func TestNodeRestart(t *testing.T) {
	const n = 8
	l := newLedger()
	names := []string{"fw-a", "fw-b", "fw-c"}
	for i, name := range names {
		startInstance(t, l, "LEASES3", name, i, n)
	}
	want := Assign(names, n)
	waitHolders(t, l, want, "three instances")
	epochs := l.epochs()
	t.Cleanup(func() {
		if err := tc.WaitReady(); err != nil {
			t.Errorf("cluster not whole again after the restart: %v", err)
		}
	})
	tc.StopNode(1)
	restarted := time.Now()
	if err := tc.StartNode(1); err != nil {
		t.Fatal(err)
	}
	// Wait until the restarted node's JetStream is current again.
	s := tc.Server(1)
	if err := poll(60*time.Second, func() error {
		if !s.JetStreamIsCurrent() {
			return errors.New("node 2 JetStream not current")
		}
		return nil
	}); err != nil {
		t.Fatal(err)
	}
	t.Logf("node 2 back and current after %v", time.Since(restarted).Round(time.Millisecond))
	waitHolders(t, l, want, "after the restart")
	kept := 0
	for p, e := range l.epochs() {
		if epochs[p] == e {
			kept++
		}
	}
	t.Logf("node restart: %d of %d partitions kept their lease and epoch", kept, n)
	l.checkNoOverlap(t, "")
}
