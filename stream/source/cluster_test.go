package source

import (
	"context"
	"fmt"
	"io"
	"log/slog"
	"maps"
	"net/http"
	"net/http/httptest"
	"slices"
	"sync"
	"testing"
	"time"

	"forewarn/config"
	"forewarn/stream"
	"forewarn/stream/cluster"
	"forewarn/stream/cluster/clustertest"
	"forewarn/stream/streamtest"
)

// instanceHeader names the instance that sent a scrape (the test's own
// transport sets it), so that an endpoint knows who scraped it.
const instanceHeader = "X-Forewarn-Test-Instance"

type tagged struct {
	name string
	next http.RoundTripper
}

func (t tagged) RoundTrip(r *http.Request) (*http.Response, error) {
	r = r.Clone(r.Context())
	r.Header.Set(instanceHeader, t.name)
	return t.next.RoundTrip(r)
}

// scrapeLog records, in order, which instance scraped which endpoint.
type scrapeLog struct {
	mu  sync.Mutex
	log []scrapeBy
}

type scrapeBy struct{ endpoint, instance string }

func (l *scrapeLog) add(e, i string) {
	l.mu.Lock()
	l.log = append(l.log, scrapeBy{e, i})
	l.mu.Unlock()
}

func (l *scrapeLog) len() int { l.mu.Lock(); defer l.mu.Unlock(); return len(l.log) }

// since returns, for each endpoint, the instances that scraped it from
// entry from on, with their counts.
func (l *scrapeLog) since(from int) map[string]map[string]int {
	l.mu.Lock()
	defer l.mu.Unlock()
	out := map[string]map[string]int{}
	for _, s := range l.log[from:] {
		if out[s.endpoint] == nil {
			out[s.endpoint] = map[string]int{}
		}
		out[s.endpoint][s.instance]++
	}
	return out
}

// Cluster mode (issue 16): two instances on the in-process 3-node cluster
// share 4 partitions through their leases (stream.PartitionedIntake, the
// daemon's cluster intake); 4 endpoints served by httptest, two in the
// partitions of each instance (Partition of the URL; the expected owner is
// cluster.Assign's, rendezvous hashing). Each endpoint is scraped only by
// the owner of its partition, and its samples are published only by that
// instance. When one instance's leases go (a clean leave of its intake,
// its sources still running), it stops scraping and the other scrapes
// all four.
func TestClusterEachEndpointOneInstance(t *testing.T) {
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

	// Four endpoints, two in each instance's partitions: each picks the
	// first path whose URL falls in a partition of the wanted owner.
	scrapes := &scrapeLog{}
	var sources []config.Source
	owner := map[string]string{}
	for e := range 4 {
		name := fmt.Sprintf("ep%d", e)
		srv := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
			scrapes.add(name, r.Header.Get(instanceHeader))
			w.Header().Set("Content-Type", "text/plain; version=0.0.4")
			fmt.Fprintf(w, "# TYPE press_jobs gauge\npress_jobs %d\n", 10+e)
		}))
		t.Cleanup(srv.Close)
		want := names[e%2]
		url := ""
		for j := 0; url == ""; j++ {
			if u := fmt.Sprintf("%s/metrics/%d", srv.URL, j); assign[Partition(u, parts)] == want {
				url = u
			}
		}
		owner[name] = want
		sources = append(sources, config.Source{Name: name, OpenMetrics: url, TopicPrefix: name,
			Every: 150 * time.Millisecond, Timeout: time.Second, MaxBytes: 1 << 20, Kind: "auto"})
	}

	type instance struct {
		pi          *stream.PartitionedIntake
		runner      *Runner
		stopIntake  context.CancelFunc
		intakeDone  chan error
		stopSources context.CancelFunc
		sourcesDone chan struct{}
	}
	quiet := slog.New(slog.NewTextHandler(io.Discard, nil))
	inst := map[string]*instance{}
	for k, n := range names {
		cfg := config.Default()
		cfg.Intake.Subjects = []string{"metrics.>"}
		cfg.Intake.Durable = true
		cfg.Intake.Stream = "SRCCL"
		cfg.Intake.Consumer = "src"
		cfg.Intake.Replicas = 3
		cfg.Cluster.Partitions = parts
		cfg.Cluster.Instance = n
		cfg.Cluster.Lease = 2 * time.Second
		cfg = cfg.WithDefaults()
		nc := streamtest.Connect(t, cl.URLFrom(k))
		pi, err := stream.NewClusterIntake(nc, cfg, quiet)
		if err != nil {
			t.Fatal(err)
		}
		r, err := New(Options{Sources: sources, Conn: nc, Prefix: "metrics.", Logger: quiet,
			Client: &http.Client{Transport: tagged{n, http.DefaultTransport}},
			Owns:   ByPartition(parts, pi.Owned)})
		if err != nil {
			t.Fatal(err)
		}
		ictx, stopIntake := context.WithCancel(context.Background())
		in := &instance{pi: pi, runner: r, stopIntake: stopIntake, intakeDone: make(chan error, 1), sourcesDone: make(chan struct{})}
		go func() { in.intakeDone <- pi.Run(ictx, func([]stream.Message) {}) }()
		inst[n] = in
		t.Cleanup(func() {
			stopIntake()
			<-in.intakeDone
		})
		// One at a time, as the daemon's cluster tests start them: the
		// second joins once the first holds every partition.
		if k == 0 {
			streamtest.Eventually(t, 60*time.Second, n+" holds every partition alone", func() bool {
				return len(pi.Owned()) == parts
			})
		}
	}
	owned := func(n string) []int { return slices.Sorted(maps.Keys(inst[n].pi.Owned())) }
	streamtest.Eventually(t, 60*time.Second, "partitions held as cluster.Assign gives them", func() bool {
		for _, n := range names {
			var want []int
			for p, o := range assign {
				if o == n {
					want = append(want, p)
				}
			}
			if !slices.Equal(owned(n), want) {
				return false
			}
		}
		return true
	})
	for _, n := range names { // the sources start once the leases are settled, as in the daemon (after Ready)
		sctx, stop := context.WithCancel(context.Background())
		in := inst[n]
		in.stopSources = stop
		go func() { in.runner.Run(sctx); close(in.sourcesDone) }()
		t.Cleanup(func() { stop(); <-in.sourcesDone })
	}

	// Every endpoint scraped a few times, each by its owner alone.
	streamtest.Eventually(t, 30*time.Second, "every endpoint scraped 4 times", func() bool {
		by := scrapes.since(0)
		for _, s := range sources {
			total := 0
			for _, c := range by[s.Name] {
				total += c
			}
			if total < 4 {
				return false
			}
		}
		return true
	})
	by := scrapes.since(0)
	for _, s := range sources {
		if got := slices.Sorted(maps.Keys(by[s.Name])); !slices.Equal(got, []string{owner[s.Name]}) {
			t.Errorf("%s (partition %d, owner %s) scraped by %v", s.Name, Partition(s.OpenMetrics, parts), owner[s.Name], by[s.Name])
		}
		for _, n := range names {
			pub := value(t, inst[n].runner.Metrics().Published, "source", s.Name)
			scraping := value(t, inst[n].runner.Metrics().Scraping, "source", s.Name)
			if mine := n == owner[s.Name]; mine != (pub > 0) || mine != (scraping == 1) {
				t.Errorf("%s on %s: %v samples published, scraping %v; want published and scraping only on its owner %s",
					s.Name, n, pub, scraping, owner[s.Name])
			}
		}
	}
	if t.Failed() {
		t.FailNow()
	}

	// fw-one's leases go (its intake leaves cleanly); its sources keep
	// running and must stop scraping. fw-two takes every partition and
	// scrapes all four.
	inst["fw-one"].stopIntake()
	if err := <-inst["fw-one"].intakeDone; err != nil {
		t.Fatalf("fw-one's intake: %v", err)
	}
	inst["fw-one"].intakeDone <- nil // for the cleanup
	streamtest.Eventually(t, 30*time.Second, "fw-two holds all 4 partitions", func() bool {
		return slices.Equal(owned("fw-two"), []int{0, 1, 2, 3})
	})
	streamtest.Eventually(t, 10*time.Second, "fw-one no longer scraping", func() bool {
		for _, s := range sources {
			if value(t, inst["fw-one"].runner.Metrics().Scraping, "source", s.Name) != 0 {
				return false
			}
		}
		return true
	})
	mark := scrapes.len()
	streamtest.Eventually(t, 30*time.Second, "every endpoint scraped 4 times by fw-two", func() bool {
		by := scrapes.since(mark)
		for _, s := range sources {
			if by[s.Name]["fw-two"] < 4 {
				return false
			}
		}
		return true
	})
	for name, m := range scrapes.since(mark) {
		if got := slices.Sorted(maps.Keys(m)); !slices.Equal(got, []string{"fw-two"}) {
			t.Errorf("after fw-one left, %s scraped by %v; want fw-two only", name, m)
		}
	}
}
