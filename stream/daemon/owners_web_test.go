package daemon_test

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"net/http"
	"net/http/httptest"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/nats-io/nats.go/jetstream"

	"forewarn/stream"
	"forewarn/stream/cluster"
	"forewarn/stream/daemon"
	"forewarn/stream/streamtest"
	"forewarn/stream/web"
	"forewarn/stream/web/site"
)

// Each instance's pages and /api/series show the series it owns and name
// the instance that owns the others (issue 15, "Queries and pages"): two
// instances with cluster.partitions: 8 and two loops each share the
// series on the 3-node cluster; a third joins and takes partitions from
// them. Afterwards each instance lists exactly the series of the
// partitions it holds, the former owner's copies of moved series are not
// shown, a request for a series another instance owns gets a 404 naming
// it, /api/partitions agrees with the assignment on every instance, and
// the index page names every owner. Reference: cluster.Assign
// (rendezvous hashing, checked against the paper in stream/cluster).
func TestClusterPagesNameOwners(t *testing.T) {
	cl := daemon.NatsClusterForTest(t)
	const parts = 8
	names := []string{"fw-one", "fw-two", "fw-three"}
	assign2 := cluster.Assign(names[:2], parts)
	assign3 := cluster.Assign(names, parts)
	moved := 0
	for p := range parts {
		if assign2[p] != assign3[p] {
			moved++
		}
	}
	if moved == 0 || !slices.Contains(assign3, "fw-one") || !slices.Contains(assign3, "fw-two") {
		t.Fatalf("assignments %v → %v: pick names under which the third instance takes partitions from the others", assign2, assign3)
	}
	streamName := fmt.Sprintf("CLPAGES%d", time.Now().UnixNano()%1e9)
	t.Cleanup(func() {
		js, err := jetstream.New(streamtest.Connect(t, cl.URL()))
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
	ds := map[string]*daemon.Daemon{}
	srvs := map[string]*httptest.Server{}
	run := func(k int) {
		name := names[k]
		cfg := daemon.TestConfigForTest(t.TempDir())
		cfg.NATS.URL = cl.URLFrom(k)
		cfg.Intake.Stream = streamName
		cfg.Intake.Replicas = 3
		cfg.Intake.Loops = 2
		cfg.Cluster.Partitions = parts
		cfg.Cluster.Instance = name
		cfg.Cluster.Lease = 2 * time.Second
		if err := cfg.Validate(); err != nil {
			t.Fatal(err)
		}
		d, _ := daemon.StartForTest(t, cfg.NATS.URL, cfg)
		if d.Loops() != 2 {
			t.Fatalf("%s runs %d loops, want 2", name, d.Loops())
		}
		ds[name] = d
		srvs[name] = httptest.NewServer(web.Handler(d, cfg))
		t.Cleanup(srvs[name].Close)
	}
	partitions := func(name string) []string {
		var c site.Cluster
		getJSON(t, srvs[name].URL+"/api/partitions", http.StatusOK, &c)
		out := make([]string, len(c.Owners))
		for _, o := range c.Owners {
			out[o.Partition] = o.Instance
		}
		return out
	}
	settled := func(assign []string, on ...string) func() bool {
		return func() bool {
			for _, n := range on {
				if !slices.Equal(partitions(n), assign) {
					return false
				}
			}
			return true
		}
	}
	partOf := func(i int) int { return cluster.Partition("metrics."+daemon.ClTopicForTest(i), parts) }
	forecastAt := func(assign []string, on ...string) func() bool {
		return func() bool {
			for i := range daemon.ClSeriesForTest {
				owner := assign[partOf(i)]
				if slices.Contains(on, owner) {
					if _, ok := ds[owner].Latest(daemon.ClTopicForTest(i)); !ok {
						return false
					}
				}
			}
			return true
		}
	}
	run(0)
	run(1)
	streamtest.Eventually(t, 60*time.Second, "two instances agree on the assignment", settled(assign2, names[:2]...))
	pub := streamtest.Connect(t, cl.URL())
	daemon.ClPublishForTest(t, pub, 0, 30)
	streamtest.Eventually(t, 60*time.Second, "every series forecast by its owner", forecastAt(assign2, names[:2]...))

	run(2)
	streamtest.Eventually(t, 60*time.Second, "three instances agree on the assignment", settled(assign3, names...))
	daemon.ClPublishForTest(t, pub, 30, 32) // the new owner forecasts its series from the stream
	streamtest.Eventually(t, 60*time.Second, "the moved series forecast by the new owner", forecastAt(assign3, names[2]))

	for _, name := range names {
		var list []site.Summary
		getJSON(t, srvs[name].URL+"/api/series", http.StatusOK, &list)
		var got, want []string
		for _, sm := range list {
			got = append(got, sm.Topic)
			if sm.Owner != name || sm.Partition == nil {
				t.Errorf("%s /api/series: %s has owner %q; want %s, and a partition", name, sm.Topic, sm.Owner, name)
			}
		}
		for i := range daemon.ClSeriesForTest {
			if assign3[partOf(i)] == name {
				want = append(want, daemon.ClTopicForTest(i))
			}
		}
		if !slices.Equal(got, want) {
			t.Errorf("%s /api/series lists %v, want the series of its partitions %v", name, got, want)
		}
		// A series another instance owns: a 404 that names the owner.
		for i := range daemon.ClSeriesForTest {
			owner := assign3[partOf(i)]
			if owner == name {
				continue
			}
			topic := daemon.ClTopicForTest(i)
			var body struct {
				Owner     string `json:"owner"`
				Partition int    `json:"partition"`
			}
			getJSON(t, srvs[name].URL+"/api/series/"+topic, http.StatusNotFound, &body)
			if body.Owner != owner || body.Partition != partOf(i) {
				t.Errorf("%s /api/series/%s: owner %q partition %d, want %s and %d", name, topic, body.Owner, body.Partition, owner, partOf(i))
			}
			page := get(t, srvs[name].URL+"/series/"+topic, http.StatusNotFound)
			if !strings.Contains(page, fmt.Sprintf("which instance %q owns", owner)) {
				t.Errorf("%s /series/%s: %q does not name the owner %s", name, topic, page, owner)
			}
			break
		}
		index := get(t, srvs[name].URL+"/", http.StatusOK)
		for _, other := range names {
			var ps []string
			for p, n := range assign3 {
				if n == other {
					ps = append(ps, fmt.Sprint(p))
				}
			}
			who := "instance <b>" + other + "</b>"
			if other == name {
				who = "this instance"
			}
			if want := fmt.Sprintf(`data-instance="%s">%s: %s</span>`, other, who, strings.Join(ps, ", ")); !strings.Contains(index, want) {
				t.Errorf("%s index page lacks %q", name, want)
			}
		}
	}
}

func get(t *testing.T, url string, code int) string {
	t.Helper()
	resp, err := http.Get(url)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	if err != nil {
		t.Fatal(err)
	}
	if resp.StatusCode != code {
		t.Fatalf("GET %s: %d %s, want %d", url, resp.StatusCode, b, code)
	}
	return string(b)
}

func getJSON(t *testing.T, url string, code int, v any) {
	t.Helper()
	if err := json.Unmarshal([]byte(get(t, url, code)), v); err != nil {
		t.Fatalf("GET %s: %v", url, err)
	}
}
