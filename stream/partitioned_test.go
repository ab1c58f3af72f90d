package stream

import (
	"context"
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats.go/jetstream"

	"forewarn/config"
	"forewarn/stream/cluster"
	"forewarn/stream/streamtest"
)

// A partitioned intake hands over every partition's messages with the
// subject as published, and acknowledges each partition's consumer only
// up to what was handed over before the last Mark: a position handed over
// after the Mark is not acknowledged, even when Ack names a later one
// (the daemon's floor is global; its records cover only what was applied
// when its flush began). Common practice: acknowledge only what is stored.
func TestPartitionedIntakeAcksPerConsumerUpToMark(t *testing.T) {
	_, url := streamtest.RunServer(t)
	nc := streamtest.Connect(t, url)
	cfg := config.Default()
	cfg.Intake.Stream = "PARTS"
	cfg.Cluster.Partitions = 2
	cfg.Cluster.Instance = "solo"
	cfg.Cluster.Lease = 2 * time.Second
	cfg = cfg.WithDefaults()
	pi, err := NewClusterIntake(nc, cfg, nil)
	if err != nil {
		t.Fatal(err)
	}
	// Two subjects per partition.
	var subjects []string
	per := map[int]int{}
	for i := 0; len(subjects) < 4; i++ {
		s := fmt.Sprintf("metrics.t%d", i)
		if p := cluster.Partition(s, 2); per[p] < 2 {
			per[p]++
			subjects = append(subjects, s)
		}
	}
	var mu sync.Mutex
	var got []Message
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() {
		done <- pi.Run(ctx, func(b []Message) {
			mu.Lock()
			got = append(got, b...)
			mu.Unlock()
		})
	}()
	defer func() {
		cancel()
		if err := <-done; err != nil {
			t.Errorf("Run: %v", err)
		}
	}()
	streamtest.Eventually(t, 30*time.Second, "both partitions owned", func() bool { return len(pi.Owned()) == 2 })

	// round publishes 5 messages per subject and waits until every one is
	// handed over and counted as handed; it returns the last position per
	// partition.
	round := func(k int) map[int]uint64 {
		streamtest.PublishAcked(t, nc, 20, func(i int) (string, []byte) {
			return subjects[i%4], fmt.Appendf(nil, `{"value": %d}`, k*100+i)
		})
		last := map[int]uint64{}
		streamtest.Eventually(t, 30*time.Second, "round handed over", func() bool {
			mu.Lock()
			defer mu.Unlock()
			if len(got) < 20*k {
				return false
			}
			for _, m := range got {
				last[cluster.Partition(m.Subject, 2)] = max(last[cluster.Partition(m.Subject, 2)], m.Seq)
			}
			pi.mu.Lock()
			defer pi.mu.Unlock()
			for p, pt := range pi.parts {
				if pt.handed != last[p] {
					return false
				}
			}
			return true
		})
		return last
	}
	first := round(1)
	pi.Mark()
	second := round(2)
	mu.Lock()
	for _, m := range got {
		if !slices.Contains(subjects, m.Subject) {
			t.Errorf("handed over subject %q, want one as published", m.Subject)
		}
	}
	mu.Unlock()

	js, _ := jetstream.New(nc)
	st, err := js.Stream(context.Background(), "PARTS")
	if err != nil {
		t.Fatal(err)
	}
	floors := func(want map[int]uint64, what string) {
		t.Helper()
		for p, epoch := range pi.Owned() {
			c, err := st.Consumer(context.Background(), cluster.ConsumerName(cfg.Intake.Consumer, p, epoch))
			if err != nil {
				t.Fatal(err)
			}
			var floor uint64
			streamtest.Eventually(t, 30*time.Second, "acknowledgement arrives", func() bool {
				info, err := c.Info(context.Background())
				floor = info.AckFloor.Stream
				return err == nil && floor >= want[p]
			})
			if floor != want[p] {
				t.Errorf("%s: partition %d acknowledged up to %d, want %d", what, p, floor, want[p])
			}
		}
	}
	if err := pi.Ack(math.MaxUint64); err != nil {
		t.Fatal(err)
	}
	floors(first, "after the first Mark")
	pi.Mark()
	if err := pi.Ack(math.MaxUint64); err != nil {
		t.Fatal(err)
	}
	floors(second, "after the second Mark")
}

// A stream cut into another partition count is refused with a clear error.
func TestPartitionedIntakeRefusesOtherCount(t *testing.T) {
	_, url := streamtest.RunServer(t)
	nc := streamtest.Connect(t, url)
	cfg := config.Default()
	cfg.Intake.Stream = "PARTS"
	cfg.Cluster.Partitions = 4
	cfg.Cluster.Instance = "solo"
	cfg = cfg.WithDefaults()
	if _, err := NewClusterIntake(nc, cfg, nil); err != nil {
		t.Fatal(err)
	}
	js, _ := jetstream.New(nc)
	st, err := js.Stream(context.Background(), "PARTS")
	if err != nil {
		t.Fatal(err)
	}
	if got, err := cluster.StreamPartitions(st.CachedInfo().Config); err != nil || got != 4 {
		t.Fatalf("stream created with %d partitions (%v), want 4", got, err)
	}
	cfg.Cluster.Partitions = 8
	_, err = NewClusterIntake(nc, cfg, nil)
	want := "cluster.partitions is 8 but stream PARTS is cut into 4 partitions"
	if err == nil || !errors.Is(err, cluster.ErrPartitions) || !strings.Contains(err.Error(), want) {
		t.Fatalf("got %v, want an error saying %q", err, want)
	}
	cfg.Cluster.Partitions = 0
	_, err = NewIntake(nc, IntakeOptions{Stream: "PARTS", Durable: true})
	if err == nil || !errors.Is(err, cluster.ErrPartitions) {
		t.Fatalf("a plain intake on a partitioned stream: %v, want ErrPartitions", err)
	}
}

// An instance that regains a partition and keeps its own copies of the
// partition's series (Handover.Restore's keptOwn) replays from what its
// last ownership acknowledged when the stored snapshot, of an older
// epoch, claims a later floor (a paused owner's late snapshot): nothing
// after its copies is skipped. Here "solo" owns the one partition and
// acknowledges 5 messages, "second" joins and takes it (rendezvous), 5
// more are published, a snapshot of epoch 1 with floor 10 is stored, and
// when "second" leaves, solo's consumer must start at 6, not 11.
// Common practice: a replay starts no later than the oldest state kept.
func TestPartitionedIntakeKeptCopiesReplayFromOwnFloor(t *testing.T) {
	_, url := streamtest.RunServer(t)
	nc := streamtest.Connect(t, url)
	cfgOf := func(instance string) *config.Config {
		cfg := config.Default()
		cfg.Intake.Stream = "KEPT"
		cfg.Cluster.Partitions = 1
		cfg.Cluster.Instance = instance
		cfg.Cluster.Lease = 2 * time.Second
		cfg.Cluster.SnapshotEvery = time.Hour
		return cfg.WithDefaults()
	}
	if a := cluster.Assign([]string{"solo", "second"}, 1); a[0] != "second" {
		t.Fatalf("Assign gives the partition to %s: pick other names", a[0])
	}
	solo, err := NewClusterIntake(nc, cfgOf("solo"), nil)
	if err != nil {
		t.Fatal(err)
	}
	var mu sync.Mutex
	var got []uint64
	var restores int
	err = solo.EnableHandover(Handover{
		Restore: func(ctx context.Context, p int, epoch uint64, snap *cluster.Snapshot) (bool, error) {
			mu.Lock()
			defer mu.Unlock()
			restores++
			return restores > 1, nil // the second time: own copies kept
		},
		Records: func(ps []int) (map[int][][]byte, error) { return nil, nil },
	})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() {
		done <- solo.Run(ctx, func(b []Message) {
			mu.Lock()
			for _, m := range b {
				got = append(got, m.Seq)
			}
			mu.Unlock()
		})
	}()
	defer func() {
		cancel()
		<-done
		_ = solo.Leave()
	}()
	publish := func(n int) {
		streamtest.PublishAcked(t, nc, n, func(i int) (string, []byte) {
			return "metrics.kept", fmt.Appendf(nil, `{"value": %d}`, i)
		})
	}
	streamtest.Eventually(t, 30*time.Second, "solo owns the partition", func() bool { return len(solo.Owned()) == 1 })
	publish(5)
	streamtest.Eventually(t, 30*time.Second, "5 handed over", func() bool {
		mu.Lock()
		defer mu.Unlock()
		return len(got) == 5
	})
	streamtest.Eventually(t, 30*time.Second, "marked", func() bool {
		solo.Mark()
		solo.mu.Lock()
		defer solo.mu.Unlock()
		return solo.parts[0] != nil && solo.parts[0].mark == 5
	})
	if err := solo.Ack(5); err != nil {
		t.Fatal(err)
	}

	other, err := NewClusterIntake(streamtest.Connect(t, url), cfgOf("second"), nil)
	if err != nil {
		t.Fatal(err)
	}
	octx, ocancel := context.WithCancel(context.Background())
	odone := make(chan error, 1)
	go func() { odone <- other.Run(octx, func([]Message) {}) }()
	streamtest.Eventually(t, 30*time.Second, "second takes the partition", func() bool {
		return len(other.Owned()) == 1 && len(solo.Owned()) == 0
	})
	publish(5)
	js, _ := jetstream.New(nc)
	snaps, err := cluster.EnsureSnapshotStore(context.Background(), js, SnapshotStore("KEPT"), 1)
	if err != nil {
		t.Fatal(err)
	}
	if err := snaps.Put(context.Background(), &cluster.Snapshot{Partition: 0, Epoch: 1, Floor: 10}); err != nil {
		t.Fatal(err)
	}
	ocancel()
	<-odone
	streamtest.Eventually(t, 30*time.Second, "solo regains the partition and replays", func() bool {
		mu.Lock()
		defer mu.Unlock()
		return len(got) >= 10
	})
	mu.Lock()
	defer mu.Unlock()
	if want := []uint64{1, 2, 3, 4, 5, 6, 7, 8, 9, 10}; !slices.Equal(got, want) {
		t.Errorf("solo was handed %v, want %v (its copies reflect 5: the replay starts at 6)", got, want)
	}
}
