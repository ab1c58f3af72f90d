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
