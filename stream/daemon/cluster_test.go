package daemon

import (
	"context"
	"encoding/json"
	"fmt"
	"maps"
	"os"
	"slices"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"forewarn/config"
	"forewarn/engine/series"
	"forewarn/stream"
	"forewarn/stream/cluster"
	"forewarn/stream/cluster/clustertest"
	"forewarn/stream/streamtest"
)

// One in-process 3-node NATS cluster per test binary, started by the first
// test that needs it and stopped by TestMain.
var (
	clusterOnce sync.Once
	testCl      *clustertest.Cluster
	testClErr   error
	testClDir   string
	clRuns      int // a fresh intake stream per run (go test -count)
)

func TestMain(m *testing.M) {
	code := m.Run()
	if testCl != nil {
		testCl.Shutdown()
	}
	if testClDir != "" {
		_ = os.RemoveAll(testClDir)
	}
	os.Exit(code)
}

func natsCluster(t *testing.T) *clustertest.Cluster {
	t.Helper()
	if testing.Short() {
		t.Skip("a 3-node NATS cluster: not in -short")
	}
	clusterOnce.Do(func() {
		testClDir, testClErr = os.MkdirTemp("", "forewarn-daemon-cluster-")
		if testClErr == nil {
			testCl, testClErr = clustertest.Start(testClDir)
		}
	})
	if testClErr != nil {
		t.Fatalf("start the test cluster: %v", testClErr)
	}
	return testCl
}

const (
	clSeries = 50
	clPhase1 = 40 // observations per series before one instance leaves
	clPhase2 = 20 // after
	clT0     = 1_700_000_040
)

func clTopic(i int) string { return fmt.Sprintf("cl.s%02d", i) }

// clMsg is observation j of series i: a deterministic walk with a cycle.
func clMsg(i, j int) (string, []byte) {
	v := 500 + float64(i)*10 + 2*float64(j) + float64((j*7+i)%11)
	return "metrics." + clTopic(i), fmt.Appendf(nil, `{"time": %d, "value": %g}`, clT0+60*j, v)
}

// clPublish publishes observations from..to-1 of every series, series
// interleaved, with JetStream acknowledgements.
func clPublish(t *testing.T, nc *nats.Conn, from, to int) {
	n := to - from
	streamtest.PublishAcked(t, nc, clSeries*n, func(k int) (string, []byte) {
		return clMsg(k%clSeries, from+k/clSeries)
	})
}

// clOrigin is the "origin" of the forecast made when observation j has
// closed the bucket before it.
func clOrigin(j int) string {
	return time.Unix(int64(clT0+60*(j-1)), 0).UTC().Format(time.RFC3339)
}

// latestAt returns d's latest forecast of topic without its wall-time
// field "issued", if its origin is origin.
func latestAt(d *Daemon, topic, origin string) (map[string]any, bool) {
	b, ok := d.Latest(topic)
	if !ok {
		return nil, false
	}
	var m map[string]any
	if json.Unmarshal(b, &m) != nil || m["origin"] != origin {
		return nil, false
	}
	delete(m, "issued")
	return m, true
}

// forecasters records which instance published a forecast of each topic.
type forecasters struct {
	mu sync.Mutex
	by map[string]map[string]int
}

func (f *forecasters) hook(instance string) func(*Options) {
	return func(o *Options) {
		o.OnForecast = func(fc *series.Forecast) {
			f.mu.Lock()
			defer f.mu.Unlock()
			if f.by[fc.Topic] == nil {
				f.by[fc.Topic] = map[string]int{}
			}
			f.by[fc.Topic][instance]++
		}
	}
}

func (f *forecasters) of(topic string) []string {
	f.mu.Lock()
	defer f.mu.Unlock()
	return slices.Sorted(maps.Keys(f.by[topic]))
}

// Two instances with cluster.partitions: 4 on a 3-node cluster share 50
// series: each series is forecast by exactly one of them, the owner of its
// partition, and only the owner answers its query. When one leaves, the
// other takes its partitions and rebuilds their series from the stream's
// history (no snapshots yet): its final forecasts equal, field for field
// apart from the wall time "issued", those of one instance without
// partitions fed the same observations (reference: the single-instance
// daemon, the behaviour cluster mode must reproduce).
func TestClusterTwoInstancesShareAndHandOver(t *testing.T) {
	clusterShareAndHandOver(t, false)
}

// The same when fw-one dies instead of leaving: its connection is cut, so
// it can neither renew nor release its leases, and fw-two takes its
// partitions once they lapse (cluster.lease 2 s). The lease is the floor
// of the handover time here.
func TestClusterHandOverAfterDeath(t *testing.T) {
	clusterShareAndHandOver(t, true)
}

func clusterShareAndHandOver(t *testing.T, die bool) {
	cl := natsCluster(t)

	// Reference: one instance, no partitions, its own server.
	_, refURL := streamtest.RunServer(t)
	ref := start(t, refURL, handoverConfig(t.TempDir()))
	refPub := streamtest.Connect(t, refURL)
	clPublish(t, refPub, 0, clPhase1+clPhase2)
	want := map[string]map[string]any{}
	streamtest.Eventually(t, 60*time.Second, "reference forecasts at the last origin", func() bool {
		for i := range clSeries {
			m, ok := latestAt(ref.d, clTopic(i), clOrigin(clPhase1+clPhase2-1))
			if !ok {
				return false
			}
			want[clTopic(i)] = m
		}
		return true
	})
	ref.stop(t)

	names := []string{"fw-one", "fw-two"}
	const parts = 4
	assign := cluster.Assign(names, parts)
	for _, n := range names {
		if !slices.Contains(assign, n) {
			t.Fatalf("Assign gives %s nothing: pick other names", n)
		}
	}
	fc := &forecasters{by: map[string]map[string]int{}}
	run := map[string]*runningDaemon{}
	conns := map[string]*nats.Conn{}
	clRuns++
	streamName := fmt.Sprintf("CLTEST%d", clRuns)
	t.Cleanup(func() { // the next run (go test -count) takes the same subjects
		nc := streamtest.Connect(t, cl.URL())
		js, err := jetstream.New(nc)
		if err != nil {
			t.Error(err)
			return
		}
		ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
		defer cancel()
		if err := js.DeleteStream(ctx, streamName); err != nil {
			t.Errorf("delete the test stream: %v", err)
		}
		_ = js.DeleteKeyValue(ctx, stream.LeaseBucket(streamName))
	})
	for k, name := range names {
		cfg := handoverConfig(t.TempDir())
		cfg.NATS.URL = cl.URLFrom(k)
		cfg.Intake.Stream = streamName
		cfg.Intake.Replicas = 3
		cfg.Cluster.Partitions = parts
		cfg.Cluster.Instance = name
		cfg.Cluster.Lease = 2 * time.Second
		if err := cfg.Validate(); err != nil {
			t.Fatal(err)
		}
		run[name] = start(t, cfg.NATS.URL, cfg, fc.hook(name), func(o *Options) { conns[name] = o.Conn })
	}
	owned := func(name string) []int {
		return slices.Sorted(maps.Keys(run[name].d.intake.(*stream.PartitionedIntake).Owned()))
	}
	wantOwned := func(name string, a []string) []int {
		var ps []int
		for p, n := range a {
			if n == name {
				ps = append(ps, p)
			}
		}
		return ps
	}
	streamtest.Eventually(t, 60*time.Second, "partitions assigned by rendezvous hashing", func() bool {
		for _, n := range names {
			if !slices.Equal(owned(n), wantOwned(n, assign)) {
				return false
			}
		}
		return true
	})

	pub := streamtest.Connect(t, cl.URL())
	clPublish(t, pub, 0, clPhase1)
	streamtest.Eventually(t, 60*time.Second, "every series forecast by its owner", func() bool {
		for i := range clSeries {
			owner := assign[cluster.Partition("metrics."+clTopic(i), parts)]
			if _, ok := latestAt(run[owner].d, clTopic(i), clOrigin(clPhase1-1)); !ok {
				return false
			}
		}
		return true
	})
	perInstance := map[string]int{}
	for i := range clSeries {
		topic := clTopic(i)
		owner := assign[cluster.Partition("metrics."+topic, parts)]
		if got := fc.of(topic); !slices.Equal(got, []string{owner}) {
			t.Errorf("%s (partition %d, owner %s) forecast by %v", topic, cluster.Partition("metrics."+topic, parts), owner, got)
		}
		perInstance[owner]++
	}
	t.Logf("series per instance: %v", perInstance)
	checkQueriesAnsweredOnce(t, pub, run, assign, parts)

	// fw-one leaves (or dies); fw-two takes its partitions and replays them.
	how := "a clean leave"
	left := time.Now()
	if die {
		how = "fw-one's connection was cut"
		conns["fw-one"].Close()
		defer func() { // what it does now reaches nobody; only its store is closed
			run["fw-one"].cancel()
			<-run["fw-one"].done
			run["fw-one"].store.Close()
		}()
	} else {
		run["fw-one"].stop(t)
	}
	streamtest.Eventually(t, 60*time.Second, "fw-two owns every partition", func() bool {
		return slices.Equal(owned("fw-two"), []int{0, 1, 2, 3})
	})
	t.Logf("handover after %s: fw-two owns every partition %v later", how, time.Since(left).Round(time.Millisecond))
	clPublish(t, pub, clPhase1, clPhase1+clPhase2)
	got := map[string]map[string]any{}
	streamtest.Eventually(t, 60*time.Second, "fw-two forecasts every series at the last origin", func() bool {
		for i := range clSeries {
			m, ok := latestAt(run["fw-two"].d, clTopic(i), clOrigin(clPhase1+clPhase2-1))
			if !ok {
				return false
			}
			got[clTopic(i)] = m
		}
		return true
	})
	t.Logf("all %d series forecasting on fw-two at the last origin %v after %s", clSeries, time.Since(left).Round(time.Millisecond), how)
	for i := range clSeries {
		topic := clTopic(i)
		if w, g := fmt.Sprint(want[topic]), fmt.Sprint(got[topic]); w != g {
			t.Errorf("%s after the handover:\n got %s\nwant %s (single instance)", topic, g, w)
		}
	}
	run["fw-two"].stop(t)
}

// checkQueriesAnsweredOnce asks for every topic's forecast and checks that
// exactly one reply comes for each. A last request to each instance, for a
// topic it owns, is answered after the earlier requests were handled there
// (one subscription handles its messages in order, and one connection's
// replies arrive in order), so once those replies are in, no other reply can
// still be on its way.
func checkQueriesAnsweredOnce(t *testing.T, nc *nats.Conn, run map[string]*runningDaemon, assign []string, parts int) {
	t.Helper()
	inbox := nats.NewInbox()
	var mu sync.Mutex
	replies := map[string]int{}
	sub, err := nc.Subscribe(inbox+".>", func(m *nats.Msg) {
		mu.Lock()
		replies[m.Subject[len(inbox)+1:]]++
		mu.Unlock()
	})
	if err != nil {
		t.Fatal(err)
	}
	defer sub.Unsubscribe()
	ask := func(topic, tag string) {
		if err := nc.PublishRequest("forewarn.query."+topic, inbox+"."+tag, nil); err != nil {
			t.Fatal(err)
		}
	}
	for i := range clSeries {
		ask(clTopic(i), clTopic(i))
	}
	sentinels := map[string]bool{}
	for name := range run {
		for i := range clSeries {
			if assign[cluster.Partition("metrics."+clTopic(i), parts)] == name {
				ask(clTopic(i), "last-"+name)
				sentinels["last-"+name] = true
				break
			}
		}
	}
	if err := nc.Flush(); err != nil {
		t.Fatal(err)
	}
	streamtest.Eventually(t, 30*time.Second, "the last request to each instance answered", func() bool {
		mu.Lock()
		defer mu.Unlock()
		for s := range sentinels {
			if replies[s] == 0 {
				return false
			}
		}
		return true
	})
	mu.Lock()
	defer mu.Unlock()
	for i := range clSeries {
		if n := replies[clTopic(i)]; n != 1 {
			t.Errorf("query for %s answered %d times, want once (by its owner)", clTopic(i), n)
		}
	}
}

// handoverConfig is testConfig with the model's own bands: the handover
// tests compare every byte of the forecasts with a single instance's, and
// a record keeps the calibrator's fixed state but not the forecasts still
// waiting for their values (about 58 KB a series at horizon 60, over issue
// 13's 2 KB budget for the record), so calibrated bands after a handover
// may differ slightly from an uninterrupted run's, as after a restart
// (README, "Calibrated bands"; the e2e restart, crash and cluster tests
// run without calibration for the same reason).
func handoverConfig(dir string) *config.Config {
	c := testConfig(dir)
	off := false
	for i := range c.Series {
		c.Series[i].Calibrate = &off
	}
	return c
}
