package cluster

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"

	"github.com/nats-io/nats.go/jetstream"
)

// The server's partition(n) transform, applied by a real R3 stream on the
// test cluster, puts every one of thousands of seeded random subjects in
// the partition Partition computes (reference: nats-server v2.15.2,
// server/subject_transform.go, getHashPartition).
func TestPartitionMatchesServer(t *testing.T) {
	_, js := connect(t, 0, "partition")
	ctx := ctxT(t)
	rng := rand.New(rand.NewPCG(15, 1))
	const subjects = 3000
	for _, n := range []int{1, 7, 8, 1000} {
		name := fmt.Sprintf("PART%d", n)
		prefix := fmt.Sprintf("pt%d", n)
		st, err := js.CreateStream(ctx, jetstream.StreamConfig{
			Name: name, Subjects: []string{prefix + ".>"}, Replicas: 3,
			SubjectTransform: Transform(n),
		})
		if err != nil {
			t.Fatal(err)
		}
		want := make([]string, subjects)
		for i := range want {
			toks := 1 + rng.IntN(5)
			s := prefix
			for range toks {
				s += fmt.Sprintf(".%x", rng.Uint64()>>rng.IntN(64))
			}
			want[i] = s
			if _, err := js.PublishAsync(s, nil); err != nil {
				t.Fatal(err)
			}
		}
		select {
		case <-js.PublishAsyncComplete():
		case <-ctx.Done():
			t.Fatal("publications not acknowledged")
		}
		cons, err := st.OrderedConsumer(ctx, jetstream.OrderedConsumerConfig{})
		if err != nil {
			t.Fatal(err)
		}
		pending := make(map[string]int, subjects)
		for _, w := range want {
			pending[w]++
		}
		counts := make([]int, n)
		for i := 0; i < subjects; {
			batch, err := cons.Fetch(1000)
			if err != nil { // a cluster settling after the restart test answers "no responders" for a moment
				if ctx.Err() != nil {
					t.Fatal(err)
				}
				continue
			}
			for m := range batch.Messages() {
				// Asynchronous publications may be stored in another
				// order than sent (a retried one lands later), so each
				// stored subject is matched against those not yet seen.
				p, orig, ok := Split(m.Subject())
				if !ok || pending[orig] == 0 {
					t.Fatalf("n=%d message %d: stored %q, which was not published (or once too often)", n, i, m.Subject())
				}
				pending[orig]--
				if got := Partition(orig, n); got != p {
					t.Fatalf("n=%d: server put %q in partition %d, Partition says %d", n, orig, p, got)
				}
				counts[p]++
				i++
			}
			if err := batch.Error(); err != nil && ctx.Err() != nil {
				t.Fatal(err)
			}
		}
		if got, err := StreamPartitions(st.CachedInfo().Config); err != nil || got != n {
			t.Errorf("StreamPartitions = %d, %v; want %d", got, err, n)
		}
		if n == 8 {
			t.Logf("n=8: subjects per partition %v", counts)
		}
		_ = js.DeleteStream(ctx, name)
	}
}

// Rendezvous hashing moves only what must move (Thaler & Ravishankar
// 1998): a fourth member takes about a quarter of the partitions, all of
// them from the other three, and none moves among those three; a member
// that leaves hands over only its own partitions.
func TestAssignMinimalMovement(t *testing.T) {
	for _, n := range []int{8, 1024} {
		three := Assign([]string{"a", "b", "c"}, n)
		four := Assign([]string{"d", "c", "b", "a"}, n) // order does not matter
		moved := 0
		for p := range n {
			if three[p] == four[p] {
				continue
			}
			moved++
			if four[p] != "d" {
				t.Errorf("n=%d partition %d moved from %s to %s, between two members that stayed", n, p, three[p], four[p])
			}
		}
		// Expected moves n/4; binomial sd sqrt(n·¼·¾). Four sd either side.
		sd := 0.0
		if n >= 100 {
			sd = 4 * math.Sqrt(float64(n)*0.25*0.75)
			if f := float64(moved); f < float64(n)/4-sd || f > float64(n)/4+sd {
				t.Errorf("n=%d: a fourth member took %d partitions, want %d ± %.0f", n, moved, n/4, sd)
			}
		}
		t.Logf("n=%d: join of a 4th member moves %d of %d partitions (%.1f %%)", n, moved, n, 100*float64(moved)/float64(n))

		left := Assign([]string{"a", "c", "d"}, n) // b leaves the four
		lost := 0
		for p := range n {
			if four[p] == "b" {
				lost++
				if left[p] == "b" {
					t.Errorf("n=%d partition %d still with b", n, p)
				}
			} else if left[p] != four[p] {
				t.Errorf("n=%d partition %d moved from %s to %s though %s stayed", n, p, four[p], left[p], four[p])
			}
		}
		t.Logf("n=%d: leave of a member moves %d of %d partitions, only its own", n, lost, n)
	}
	if got := Assign(nil, 3); !slices.Equal(got, []string{"", "", ""}) {
		t.Errorf("no members: %q", got)
	}
}

// CheckStream reports a partition count that differs from the stream's.
func TestCheckStream(t *testing.T) {
	_, js := connect(t, 1, "check")
	ctx := ctxT(t)
	if err := CheckStream(ctx, js, "NOSUCH", 8); err != nil {
		t.Errorf("absent stream: %v", err)
	}
	if _, err := js.CreateStream(ctx, jetstream.StreamConfig{Name: "CHK4", Subjects: []string{"chk4.>"}, SubjectTransform: Transform(4)}); err != nil {
		t.Fatal(err)
	}
	if _, err := js.CreateStream(ctx, jetstream.StreamConfig{Name: "CHK0", Subjects: []string{"chk0.>"}}); err != nil {
		t.Fatal(err)
	}
	defer js.DeleteStream(ctx, "CHK4")
	defer js.DeleteStream(ctx, "CHK0")
	for _, c := range []struct {
		stream string
		n      int
		want   string // "" for no error
	}{
		{"CHK4", 4, ""},
		{"CHK4", 8, "cluster.partitions is 8 but stream CHK4 is cut into 4 partitions"},
		{"CHK4", 0, "cluster.partitions is 0 but stream CHK4 is cut into 4 partitions"},
		{"CHK0", 0, ""},
		{"CHK0", 8, "stream CHK0 holds messages without partitions"},
		{"CHK0", -1, "outside 0..4096"},
	} {
		err := CheckStream(ctx, js, c.stream, c.n)
		switch {
		case c.want == "" && err != nil:
			t.Errorf("%s with %d: %v", c.stream, c.n, err)
		case c.want != "" && (err == nil || !errors.Is(err, ErrPartitions) || !strings.Contains(err.Error(), c.want)):
			t.Errorf("%s with %d: got %v, want ErrPartitions saying %q", c.stream, c.n, err, c.want)
		}
	}
}

func TestSplitAndConsumerNames(t *testing.T) {
	for _, c := range []struct {
		in   string
		p    int
		subj string
		ok   bool
	}{
		{"5.metrics.a", 5, "metrics.a", true},
		{"05.metrics.a", 0, "", false},
		{"x.metrics", 0, "", false},
		{"7", 0, "", false},
		{"-1.a", 0, "", false},
	} {
		p, s, ok := Split(c.in)
		if p != c.p || s != c.subj || ok != c.ok {
			t.Errorf("Split(%q) = %d, %q, %v", c.in, p, s, ok)
		}
	}
	name := ConsumerName("forewarn", 12, 345)
	if p, e, ok := parseConsumerName("forewarn", name); !ok || p != 12 || e != 345 {
		t.Errorf("parse %q = %d %d %v", name, p, e, ok)
	}
	for _, bad := range []string{"forewarn", "forewarn-p1", "forewarn-p1-ex", "other-p1-e2", "forewarn-p01-e2"} {
		if _, _, ok := parseConsumerName("forewarn", bad); ok {
			t.Errorf("parse %q accepted", bad)
		}
	}
}
