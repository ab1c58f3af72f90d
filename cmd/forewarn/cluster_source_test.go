package main

import (
	"context"
	"fmt"
	"io"
	"log/slog"
	"net/http"
	"net/http/httptest"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"forewarn/config"
	"forewarn/stream/cluster"
	"forewarn/stream/cluster/clustertest"
	"forewarn/stream/source"
	"forewarn/stream/streamtest"
)

// forewarn run in cluster mode hands its sources the cluster intake's
// leases (serve): two instances on the in-process 3-node cluster, the
// same two endpoints in both configs, one in a partition of each
// (source.Partition of the URL; owners from cluster.Assign). Each
// instance's config gives the sources a topic prefix of its own name, so
// the subjects published show who scraped: each endpoint's samples come
// from its owner only. The sharing itself, and the handover, are
// stream/source's TestClusterEachEndpointOneInstance.
func TestServeClusterScrapesByLease(t *testing.T) {
	if testing.Short() {
		t.Skip("a 3-node NATS cluster: not in -short")
	}
	cl, err := clustertest.Start(t.TempDir())
	if err != nil {
		t.Fatalf("start the test cluster: %v", err)
	}
	t.Cleanup(cl.Shutdown)
	const parts = 4
	names := []string{"fw-one", "fw-two"}
	assign := cluster.Assign(names, parts)

	var urls []string
	owner := map[string]string{} // endpoint name → instance
	for e, want := range names {
		name := fmt.Sprintf("ep%d", e)
		srv := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
			w.Header().Set("Content-Type", "text/plain; version=0.0.4")
			fmt.Fprintf(w, "# TYPE press_jobs gauge\npress_jobs{ep=%q} %d\n", name, 10+e)
		}))
		t.Cleanup(srv.Close)
		url := ""
		for j := 0; url == ""; j++ {
			if u := fmt.Sprintf("%s/metrics/%d", srv.URL, j); assign[source.Partition(u, parts)] == want {
				url = u
			}
		}
		urls = append(urls, url)
		owner[name] = want
	}

	// Who published each endpoint's samples, from the subjects.
	var mu sync.Mutex
	seen := map[string]map[string]int{} // endpoint → instance → samples
	sub := streamtest.Connect(t, cl.URL())
	if _, err := sub.Subscribe("metrics.>", func(m *nats.Msg) {
		// metrics.<instance>.press_jobs.<ep>
		tok := strings.Split(m.Subject, ".")
		if len(tok) != 4 {
			return
		}
		mu.Lock()
		if seen[tok[3]] == nil {
			seen[tok[3]] = map[string]int{}
		}
		seen[tok[3]][tok[1]]++
		mu.Unlock()
	}); err != nil {
		t.Fatal(err)
	}
	sub.Flush()

	quiet := slog.New(slog.NewTextHandler(io.Discard, nil))
	for k, n := range names {
		cfg := config.Default()
		cfg.State.Dir = t.TempDir()
		cfg.NATS.URL = cl.URLFrom(k)
		cfg.HTTP.Listen = ""
		cfg.Intake.Subjects = []string{"metrics.>"}
		cfg.Intake.Durable = true
		cfg.Intake.Stream = "SERVECL"
		cfg.Intake.Replicas = 3
		cfg.Cluster.Partitions = parts
		cfg.Cluster.Instance = n
		cfg.Cluster.Lease = 2 * time.Second
		for _, u := range urls {
			cfg.Sources = append(cfg.Sources, config.Source{OpenMetrics: u, TopicPrefix: n, Every: time.Second})
		}
		cfg.Series = []config.Series{{Match: ">"}}
		cfg = cfg.WithDefaults()
		if err := cfg.Validate(); err != nil {
			t.Fatal(err)
		}
		ctx, cancel := context.WithCancel(context.Background())
		done := make(chan error, 1)
		began := time.Now()
		go func() {
			err := serve(ctx, cfg, quiet, false, nil, io.Discard)
			t.Logf("%s: serve returned after %v: %v", n, time.Since(began), err)
			done <- err
		}()
		t.Cleanup(func() {
			cancel()
			if err := <-done; err != nil {
				t.Errorf("%s: %v", n, err)
			}
		})
		// One at a time, as the daemon's cluster tests start them: the
		// next once this one has joined (its member key is in the lease
		// bucket).
		js, err := jetstream.New(sub)
		if err != nil {
			t.Fatal(err)
		}
		streamtest.Eventually(t, 60*time.Second, n+" joined", func() bool {
			ctx, cancel := context.WithTimeout(context.Background(), time.Second)
			defer cancel()
			kv, err := js.KeyValue(ctx, "SERVECL_LEASES")
			if err != nil {
				return false
			}
			_, err = kv.Get(ctx, "member."+n)
			return err == nil
		})
	}

	// Both instances up, the leases settled, then each endpoint's owner
	// publishing: 3 scrapes of each by its owner.
	streamtest.Eventually(t, 60*time.Second, "each endpoint published 3 times by its owner", func() bool {
		mu.Lock()
		defer mu.Unlock()
		for ep, o := range owner {
			if seen[ep][o] < 3 {
				return false
			}
		}
		return true
	})
	// From the first scrape after both joined on, only owners: before the
	// second instance joined, the first held every partition.
	mu.Lock()
	clear(seen)
	mu.Unlock()
	streamtest.Eventually(t, 60*time.Second, "each endpoint published 3 more times by its owner", func() bool {
		mu.Lock()
		defer mu.Unlock()
		for ep, o := range owner {
			if seen[ep][o] < 3 {
				return false
			}
		}
		return true
	})
	mu.Lock()
	defer mu.Unlock()
	for ep, by := range seen {
		if len(by) != 1 || by[owner[ep]] == 0 {
			t.Errorf("%s (owner %s) published by %v", ep, owner[ep], by)
		}
	}
}
