package daemon

import (
	"context"
	"fmt"
	"log/slog"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
	dto "github.com/prometheus/client_model/go"

	"forewarn/config"
	"forewarn/state"
	"forewarn/stream"
	"forewarn/stream/cluster"
	"forewarn/stream/streamtest"
)

// clusterStream names a fresh intake stream for one test run on the shared
// cluster and deletes it, its lease bucket and its snapshot store after.
func clusterStream(t *testing.T, url string) string {
	t.Helper()
	clRuns++
	name := fmt.Sprintf("CLSNAP%d", clRuns)
	t.Cleanup(func() {
		nc := streamtest.Connect(t, url)
		js, err := jetstream.New(nc)
		if err != nil {
			t.Error(err)
			return
		}
		ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
		defer cancel()
		_ = js.DeleteStream(ctx, name)
		_ = js.DeleteKeyValue(ctx, stream.LeaseBucket(name))
		_ = js.DeleteObjectStore(ctx, stream.SnapshotStore(name))
	})
	return name
}

func snapConfig(t *testing.T, url, streamName, instance string) *config.Config {
	t.Helper()
	cfg := handoverConfig(t.TempDir())
	cfg.NATS.URL = url
	cfg.Intake.Stream = streamName
	cfg.Intake.Replicas = 3
	cfg.Cluster.Partitions = 2
	cfg.Cluster.Instance = instance
	cfg.Cluster.Lease = 2 * time.Second
	cfg.Cluster.SnapshotEvery = time.Hour // only the clean leave's snapshot
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	return cfg
}

// referenceForecasts runs one instance without partitions on its own
// server over observations 0..n-1 of every series and returns each
// series' forecast at the last origin, without "issued".
func referenceForecasts(t *testing.T, n int) map[string]string {
	t.Helper()
	_, refURL := streamtest.RunServer(t)
	ref := start(t, refURL, handoverConfig(t.TempDir()))
	clPublish(t, streamtest.Connect(t, refURL), 0, n)
	want := map[string]string{}
	streamtest.Eventually(t, 60*time.Second, "reference forecasts at the last origin", func() bool {
		for i := range clSeries {
			m, ok := latestAt(ref.d, clTopic(i), clOrigin(n-1))
			if !ok {
				return false
			}
			want[clTopic(i)] = fmt.Sprint(m)
		}
		return true
	})
	ref.stop(t)
	return want
}

// waitEvery waits until d has a forecast of every series at origin bucket
// k (what says so in a failure).
func waitEvery(t *testing.T, d *Daemon, k int, what string) {
	t.Helper()
	streamtest.Eventually(t, 60*time.Second, what, func() bool {
		for i := range clSeries {
			if _, ok := latestAt(d, clTopic(i), clOrigin(k)); !ok {
				return false
			}
		}
		return true
	})
}

// A clean leave stores each owned partition's snapshot (its records and
// its acknowledged floor) in the snapshot store; a new owner with an empty
// state file loads it and replays the partition from the floor: its
// consumer starts at floor+1, so the messages at or below the floor reach
// it only through the snapshot's records, and yet its forecasts after
// more data equal a single instance's that saw everything (reference: the
// single-instance daemon, the behaviour cluster mode must reproduce). No
// replay gap is counted.
func TestClusterSnapshotHandover(t *testing.T) {
	cl := natsCluster(t)
	want := referenceForecasts(t, clPhase1+clPhase2)
	name := clusterStream(t, cl.URL())

	one := start(t, cl.URLFrom(0), snapConfig(t, cl.URLFrom(0), name, "fw-one"))
	pub := streamtest.Connect(t, cl.URL())
	clPublish(t, pub, 0, clPhase1)
	waitEvery(t, one.d, clPhase1-1, "fw-one forecasts every series")
	one.stop(t) // clean leave: final snapshots, then the leases go

	js, err := jetstream.New(pub)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	snaps, err := cluster.EnsureSnapshotStore(ctx, js, stream.SnapshotStore(name), 3)
	if err != nil {
		t.Fatal(err)
	}
	st, err := js.Stream(ctx, name)
	if err != nil {
		t.Fatal(err)
	}
	floors := map[int]uint64{}
	records := 0
	for p := range 2 {
		s, err := snaps.Get(ctx, p)
		if err != nil || s == nil {
			t.Fatalf("partition %d: no snapshot after a clean leave (%v)", p, err)
		}
		// The floor is the partition's last message: all was acknowledged.
		last, err := st.GetLastMsgForSubject(ctx, cluster.FilterSubject(p))
		if err != nil {
			t.Fatal(err)
		}
		if s.Floor != last.Sequence {
			t.Errorf("partition %d: snapshot floor %d, want its last message %d", p, s.Floor, last.Sequence)
		}
		floors[p] = s.Floor
		records += len(s.Records)
	}
	if records != clSeries {
		t.Errorf("snapshots hold %d records, want %d", records, clSeries)
	}

	two := start(t, cl.URLFrom(1), snapConfig(t, cl.URLFrom(1), name, "fw-two"))
	pi := two.d.intake.(*stream.PartitionedIntake)
	streamtest.Eventually(t, 60*time.Second, "fw-two owns both partitions", func() bool { return len(pi.Owned()) == 2 })
	for p, e := range pi.Owned() {
		ci, err := st.Consumer(ctx, cluster.ConsumerName("forewarn", p, e))
		if err != nil {
			t.Fatal(err)
		}
		if got := ci.CachedInfo().Config.OptStartSeq; got != floors[p]+1 {
			t.Errorf("partition %d: consumer starts at %d, want the snapshot's floor + 1 = %d", p, got, floors[p]+1)
		}
	}
	clPublish(t, pub, clPhase1, clPhase1+clPhase2)
	got := map[string]string{}
	streamtest.Eventually(t, 60*time.Second, "fw-two forecasts every series at the last origin", func() bool {
		for i := range clSeries {
			m, ok := latestAt(two.d, clTopic(i), clOrigin(clPhase1+clPhase2-1))
			if !ok {
				return false
			}
			got[clTopic(i)] = fmt.Sprint(m)
		}
		return true
	})
	for i := range clSeries {
		if topic := clTopic(i); got[topic] != want[topic] {
			t.Errorf("%s after the handover through the snapshot:\n got %s\nwant %s (single instance)", topic, got[topic], want[topic])
		}
	}
	for p := range 2 {
		if n := gapsOf(t, two.d, p); n != 0 {
			t.Errorf("partition %d: %v replay gaps counted, want 0", p, n)
		}
	}
	two.stop(t)
}

// When the stream has lost messages after a snapshot's floor (removed by
// its limits; here a purge), the new owner counts the gap for each
// partition (forewarn_cluster_replay_gaps_total) and rebuilds from what
// remains: every series still forecasts at the last origin. Common
// practice: a loss the system cannot repair is reported, not hidden.
func TestClusterReplayGapCounted(t *testing.T) {
	cl := natsCluster(t)
	name := clusterStream(t, cl.URL())
	one := start(t, cl.URLFrom(0), snapConfig(t, cl.URLFrom(0), name, "fw-one"))
	pub := streamtest.Connect(t, cl.URL())
	clPublish(t, pub, 0, clPhase1)
	waitEvery(t, one.d, clPhase1-1, "fw-one forecasts every series")
	one.stop(t)
	// Nobody consumes phase 2; then its first half goes.
	clPublish(t, pub, clPhase1, clPhase1+clPhase2)
	js, err := jetstream.New(pub)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	st, err := js.Stream(ctx, name)
	if err != nil {
		t.Fatal(err)
	}
	info, err := st.Info(ctx)
	if err != nil {
		t.Fatal(err)
	}
	keep := info.State.LastSeq - clSeries*clPhase2/2
	if err := st.Purge(ctx, jetstream.WithPurgeSequence(keep)); err != nil {
		t.Fatal(err)
	}

	two := start(t, cl.URLFrom(1), snapConfig(t, cl.URLFrom(1), name, "fw-two"))
	waitEvery(t, two.d, clPhase1+clPhase2-1, "fw-two forecasts every series at the last origin")
	for p := range 2 {
		if n := gapsOf(t, two.d, p); n != 1 {
			t.Errorf("partition %d: %v replay gaps counted, want 1", p, n)
		}
	}
	two.stop(t)
}

// gapsOf reads forewarn_cluster_replay_gaps_total{partition="p"}.
func gapsOf(t *testing.T, d *Daemon, p int) float64 {
	t.Helper()
	var m dto.Metric
	if err := d.handover.gaps.WithLabelValues(strconv.Itoa(p)).Write(&m); err != nil {
		t.Fatal(err)
	}
	return m.GetCounter().GetValue()
}

// An instance whose NATS user lacks a right on the lease bucket or on the
// snapshot store fails at start with an error that names the bucket (or
// store) and the right, before it consumes anything. One server with
// JetStream and a user per case whose publish permissions deny that
// right (NATS authorization: deny lists on publish subjects).
func TestClusterMissingRightNamed(t *testing.T) {
	const name = "RIGHTS"
	leases, snaps := stream.LeaseBucket(name), stream.SnapshotStore(name)
	cases := []struct {
		user string
		deny []string
		want []string // in the error
	}{
		{"nolease", []string{"$KV." + leases + ".>"}, []string{leases, "$KV." + leases + ".>", "publish"}},
		{"nolapi", []string{"$JS.API.STREAM.*.KV_" + leases}, []string{leases, "KV_" + leases}},
		{"nosnap", []string{"$O." + snaps + ".>"}, []string{snaps, "$O." + snaps + ".>", "publish"}},
	}
	opts := streamtest.Options(t)
	for _, c := range cases {
		opts.Users = append(opts.Users, &server.User{Username: c.user, Password: "pw",
			Permissions: &server.Permissions{Publish: &server.SubjectPermission{Allow: []string{">"}, Deny: c.deny}}})
	}
	_, url := streamtest.RunServerWith(t, opts)
	for _, c := range cases {
		t.Run(c.user, func(t *testing.T) {
			cfg := handoverConfig(t.TempDir())
			cfg.NATS.URL = url
			cfg.Intake.Stream = name
			cfg.Cluster.Partitions = 2
			cfg.Cluster.Instance = "fw-" + c.user
			cfg.Cluster.Lease = 2 * time.Second
			if err := cfg.Validate(); err != nil {
				t.Fatal(err)
			}
			store, err := state.Open(cfg.State.Dir)
			if err != nil {
				t.Fatal(err)
			}
			defer store.Close()
			nc := streamtest.Connect(t, url, nats.UserInfo(c.user, "pw"))
			d, err := New(Options{Config: cfg, Conn: nc, Store: store, Logger: slog.New(slog.DiscardHandler)})
			if err == nil {
				ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
				defer cancel()
				err = d.Run(ctx)
				if ctx.Err() != nil {
					t.Fatalf("the daemon ran without the right (%v)", err)
				}
			}
			if err == nil {
				t.Fatal("no error")
			}
			for _, w := range c.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error does not name %q:\n%v", w, err)
				}
			}
			t.Logf("%s: %v", c.user, err)
		})
	}
}

// readmeRights is the README's list ("Several instances on one NATS
// cluster", Rights, with "Running beside an existing NATS cluster") of
// the subjects an instance publishes to, for intake stream s and consumer
// prefix c.
func readmeRights(s, c string) (pub, sub []string) {
	leases, snaps := s+"_LEASES", s+"_SNAPSHOTS"
	pub = []string{
		"forewarn.>", "_INBOX.>", "$JS.API.INFO",
		"$JS.API.STREAM.*." + s, "$JS.API.CONSUMER.*." + s, "$JS.API.CONSUMER.*." + s + ".>",
		"$JS.API.CONSUMER.MSG.NEXT." + s + ".>", "$JS.ACK." + s + ".>",
		"$KV." + leases + ".>", "$JS.API.STREAM.*.KV_" + leases,
		"$JS.API.CONSUMER.*.KV_" + leases + ".>",
		"$JS.API.DIRECT.GET.KV_" + leases + ".>",
		"$O." + snaps + ".>", "$JS.API.STREAM.*.OBJ_" + snaps,
		"$JS.API.CONSUMER.*.OBJ_" + snaps + ".>",
		"$JS.API.DIRECT.GET.OBJ_" + snaps + ".>",
	}
	return pub, []string{"_INBOX.>", "forewarn.query.>"}
}

// Two instances whose NATS user has exactly the rights the README lists
// (an allow list, nothing else) run in turn: the first consumes and
// leaves cleanly (its snapshots stored), the second loads them and
// carries on. A right missing from the README's list fails this test.
func TestClusterRightsAsDocumented(t *testing.T) {
	const name = "DOCRIGHTS"
	pub, sub := readmeRights(name, "forewarn")
	opts := streamtest.Options(t)
	opts.Users = []*server.User{
		{Username: "fw", Password: "pw", Permissions: &server.Permissions{
			Publish: &server.SubjectPermission{Allow: pub}, Subscribe: &server.SubjectPermission{Allow: sub}}},
		{Username: "feeder", Password: "pw"},
	}
	var mu sync.Mutex
	var denied []string
	_, url := streamtest.RunServerWith(t, opts)
	cfgFor := func(instance string) *config.Config {
		cfg := handoverConfig(t.TempDir())
		cfg.NATS.URL = url
		cfg.Intake.Stream = name
		cfg.Cluster.Partitions = 2
		cfg.Cluster.Instance = instance
		cfg.Cluster.Lease = 2 * time.Second
		if err := cfg.Validate(); err != nil {
			t.Fatal(err)
		}
		return cfg
	}
	startAsFW := func(cfg *config.Config) *runningDaemon {
		nc, err := nats.Connect(url, nats.UserInfo("fw", "pw"), nats.ErrorHandler(func(_ *nats.Conn, _ *nats.Subscription, err error) {
			mu.Lock()
			denied = append(denied, err.Error())
			mu.Unlock()
		}))
		if err != nil {
			t.Fatal(err)
		}
		t.Cleanup(nc.Close)
		t.Cleanup(func() {
			mu.Lock()
			defer mu.Unlock()
			for _, d := range denied {
				t.Errorf("refused by the server with the README's rights: %s", d)
			}
			denied = nil
		})
		store, err := state.Open(cfg.State.Dir)
		if err != nil {
			t.Fatal(err)
		}
		d, err := New(Options{Config: cfg, Conn: nc, Store: store, Logger: slog.New(slog.DiscardHandler)})
		if err != nil {
			t.Fatal(err)
		}
		ctx, cancel := context.WithCancel(context.Background())
		r := &runningDaemon{d: d, cancel: cancel, done: make(chan error, 1), store: store}
		go func() { r.done <- d.Run(ctx) }()
		select {
		case <-d.Ready():
		case err := <-r.done:
			t.Fatalf("daemon stopped at once: %v", err)
		}
		return r
	}
	feeder := streamtest.Connect(t, url, nats.UserInfo("feeder", "pw"))
	one := startAsFW(cfgFor("fw-one"))
	clPublish(t, feeder, 0, clPhase1)
	waitEvery(t, one.d, clPhase1-1, "fw-one forecasts every series")
	one.stop(t)
	two := startAsFW(cfgFor("fw-two"))
	clPublish(t, feeder, clPhase1, clPhase1+clPhase2)
	waitEvery(t, two.d, clPhase1+clPhase2-1, "fw-two forecasts every series at the last origin")
	two.stop(t)
	mu.Lock()
	defer mu.Unlock()
	for _, d := range denied {
		t.Errorf("refused by the server with the README's rights: %s", d)
	}
}
