package e2e

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"net"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
)

// binPath is the forewarn binary built by TestMain; moduleRoot the
// directory of go.mod.
var binPath, moduleRoot string

func TestMain(m *testing.M) {
	os.Exit(runMain(m))
}

func runMain(m *testing.M) int {
	out, err := exec.Command("go", "env", "GOMOD").Output()
	gomod := strings.TrimSpace(string(out))
	if err != nil || gomod == "" || gomod == os.DevNull {
		fmt.Fprintf(os.Stderr, "e2e: cannot find the module root (go env GOMOD: %q, %v)\n", gomod, err)
		return 1
	}
	moduleRoot = filepath.Dir(gomod)
	tmp, err := os.MkdirTemp("", "forewarn-e2e-")
	if err != nil {
		fmt.Fprintf(os.Stderr, "e2e: %v\n", err)
		return 1
	}
	defer os.RemoveAll(tmp)
	binPath = filepath.Join(tmp, "forewarn")
	build := exec.Command("go", "build", "-o", binPath, "./cmd/forewarn")
	build.Dir = moduleRoot
	if b, err := build.CombinedOutput(); err != nil {
		fmt.Fprintf(os.Stderr, "e2e: go build ./cmd/forewarn: %v\n%s", err, b)
		return 1
	}
	return m.Run()
}

// datasetPath is a file of the module's testdata/datasets (R's datasets
// package, exported as CSV by the project).
func datasetPath(name string) string {
	return filepath.Join(moduleRoot, "testdata", "datasets", name)
}

// readDataset reads the value column (the last one) of a dataset CSV.
func readDataset(t *testing.T, name string) []float64 {
	t.Helper()
	b, err := os.ReadFile(datasetPath(name))
	if err != nil {
		t.Fatal(err)
	}
	var v []float64
	sc := bufio.NewScanner(bytes.NewReader(b))
	for line := 0; sc.Scan(); line++ {
		if line == 0 {
			continue // header
		}
		f := strings.Split(strings.TrimSpace(sc.Text()), ",")
		x, err := strconv.ParseFloat(f[len(f)-1], 64)
		if err != nil {
			t.Fatalf("%s line %d: %v", name, line+1, err)
		}
		v = append(v, x)
	}
	return v
}

// freePort returns a loopback port that was free a moment ago.
//
// The port is free when this returns, not reserved: the caller binds it
// later. So that two callers in this binary never get the same one (the
// kernel may hand a just-closed port out again at once), every port given
// out is remembered and never given again.
func freePort(t *testing.T) int {
	t.Helper()
	portsMu.Lock()
	defer portsMu.Unlock()
	for range 100 {
		ln, err := net.Listen("tcp", "127.0.0.1:0")
		if err != nil {
			t.Fatal(err)
		}
		p := ln.Addr().(*net.TCPAddr).Port
		ln.Close()
		if !portsGiven[p] {
			portsGiven[p] = true
			return p
		}
	}
	t.Fatal("e2e: no port that was not given out before in 100 tries")
	return 0
}

var (
	portsMu    sync.Mutex
	portsGiven = map[int]bool{}
)

// startNATS runs an in-process NATS server with JetStream on a port from
// freePort and returns its client URL.
func startNATS(t *testing.T) string {
	t.Helper()
	s, err := server.NewServer(&server.Options{
		Host: "127.0.0.1", Port: freePort(t), NoLog: true, NoSigs: true,
		JetStream: true, StoreDir: t.TempDir(),
	})
	if err != nil {
		t.Fatal(err)
	}
	s.Start()
	if !s.ReadyForConnections(10 * time.Second) {
		s.Shutdown()
		t.Fatal("nats server not ready within 10s")
	}
	t.Cleanup(func() { s.Shutdown(); s.WaitForShutdown() })
	return s.ClientURL()
}

// busMode says where the daemon's NATS server is.
type busMode int

const (
	external busMode = iota // an in-process server of the test, --nats URL
	embedded                // the daemon's own server, --listen-nats
)

func (m busMode) String() string {
	if m == embedded {
		return "embedded"
	}
	return "external"
}

// daemon is one forewarn run process and the flags it is started with;
// start may be called again after stop or kill (same --data).
type daemon struct {
	t        *testing.T
	name     string
	args     []string
	natsURL  string // for the test's clients
	httpAddr string
	logPath  string

	mu      sync.Mutex
	cmd     *exec.Cmd
	stdout  *syncBuffer
	done    chan struct{}
	waitErr error
	starts  int
}

// newDaemon prepares a daemon with the given config text (YAML) and a new
// data directory. With mode external a server is started for it.
func newDaemon(t *testing.T, mode busMode, configYAML string, extra ...string) *daemon {
	t.Helper()
	dir := t.TempDir()
	cfg := filepath.Join(dir, "forewarn.yaml")
	if err := os.WriteFile(cfg, []byte(configYAML), 0o600); err != nil {
		t.Fatal(err)
	}
	data := filepath.Join(dir, "data")
	d := &daemon{t: t, name: t.Name(), logPath: filepath.Join(dir, "daemon.log")}
	// An external server binds its port before the HTTP port is chosen, so
	// that the two cannot be the same.
	var externalURL string
	if mode == external {
		externalURL = startNATS(t)
	}
	d.httpAddr = fmt.Sprintf("127.0.0.1:%d", freePort(t))
	d.args = []string{"run", "--config", cfg, "--data", data, "--http", d.httpAddr}
	if mode == external {
		d.natsURL = externalURL
		d.args = append(d.args, "--nats", d.natsURL)
	} else {
		hp := fmt.Sprintf("127.0.0.1:%d", freePort(t))
		d.natsURL = "nats://" + hp
		d.args = append(d.args, "--listen-nats", hp)
	}
	d.args = append(d.args, extra...)
	t.Cleanup(func() {
		d.kill()
		if t.Failed() {
			t.Logf("daemon log tail (%s):\n%s", d.logPath, tail(d.logPath, 40))
		}
	})
	return d
}

func (d *daemon) dataDir() string {
	for i, a := range d.args {
		if a == "--data" {
			return d.args[i+1]
		}
	}
	panic("e2e: daemon without --data")
}

// start runs the process and waits for /readyz.
func (d *daemon) start() {
	d.t.Helper()
	d.mu.Lock()
	if d.cmd != nil {
		d.mu.Unlock()
		d.t.Fatal("e2e: daemon already running")
	}
	logf, err := os.OpenFile(d.logPath, os.O_CREATE|os.O_APPEND|os.O_WRONLY, 0o600)
	if err != nil {
		d.mu.Unlock()
		d.t.Fatal(err)
	}
	fmt.Fprintf(logf, "=== start %d: forewarn %s\n", d.starts, strings.Join(d.args, " "))
	d.starts++
	cmd := exec.Command(binPath, d.args...)
	d.stdout = &syncBuffer{}
	cmd.Stdout = d.stdout
	cmd.Stderr = logf
	if err := cmd.Start(); err != nil {
		logf.Close()
		d.mu.Unlock()
		d.t.Fatal(err)
	}
	done := make(chan struct{})
	d.cmd, d.done = cmd, done
	d.mu.Unlock()
	go func() {
		err := cmd.Wait()
		logf.Close()
		d.mu.Lock()
		d.waitErr = err
		d.mu.Unlock()
		close(done)
	}()
	d.waitReady(60 * time.Second)
}

func (d *daemon) waitReady(timeout time.Duration) {
	d.t.Helper()
	client := &http.Client{Timeout: time.Second}
	deadline := time.Now().Add(timeout)
	for {
		select {
		case <-d.done:
			d.t.Fatalf("daemon exited before it was ready (%v); log:\n%s", d.waitErr, tail(d.logPath, 40))
		default:
		}
		resp, err := client.Get("http://" + d.httpAddr + "/readyz")
		if err == nil {
			resp.Body.Close()
			if resp.StatusCode == http.StatusOK {
				return
			}
		}
		if time.Now().After(deadline) {
			d.t.Fatalf("daemon not ready within %s; log:\n%s", timeout, tail(d.logPath, 40))
		}
		time.Sleep(20 * time.Millisecond)
	}
}

// stop sends SIGTERM and requires a clean exit (status 0) within a minute.
func (d *daemon) stop() {
	d.t.Helper()
	d.mu.Lock()
	cmd, done := d.cmd, d.done
	d.mu.Unlock()
	if cmd == nil {
		return
	}
	_ = cmd.Process.Signal(syscall.SIGTERM)
	select {
	case <-done:
	case <-time.After(60 * time.Second):
		_ = cmd.Process.Kill()
		<-done
		d.t.Fatalf("daemon did not stop within 60s of SIGTERM")
	}
	d.mu.Lock()
	err := d.waitErr
	d.cmd = nil
	d.mu.Unlock()
	if err != nil {
		d.t.Fatalf("daemon exit after SIGTERM: %v; log:\n%s", err, tail(d.logPath, 40))
	}
}

// kill sends SIGKILL (a crash) and waits for the process to be gone.
func (d *daemon) kill() {
	d.mu.Lock()
	cmd, done := d.cmd, d.done
	d.mu.Unlock()
	if cmd == nil {
		return
	}
	_ = cmd.Process.Signal(syscall.SIGKILL)
	<-done
	d.mu.Lock()
	d.cmd = nil
	d.mu.Unlock()
}

// running reports whether the process is alive.
func (d *daemon) running() bool {
	d.mu.Lock()
	defer d.mu.Unlock()
	if d.cmd == nil {
		return false
	}
	select {
	case <-d.done:
		return false
	default:
		return true
	}
}

// cli runs the binary with args and returns stdout, stderr and exit code.
func cli(t *testing.T, args ...string) (string, string, int) {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	cmd := exec.CommandContext(ctx, binPath, args...)
	var out, errb bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errb
	err := cmd.Run()
	code := 0
	if err != nil {
		var ee *exec.ExitError
		if !errors.As(err, &ee) {
			t.Fatalf("forewarn %v: %v", args, err)
		}
		code = ee.ExitCode()
	}
	return out.String(), errb.String(), code
}

// syncBuffer is a bytes.Buffer safe for one writer and many readers.
type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

func tail(path string, n int) string {
	b, err := os.ReadFile(path)
	if err != nil {
		return err.Error()
	}
	lines := strings.Split(strings.TrimRight(string(b), "\n"), "\n")
	if len(lines) > n {
		lines = lines[len(lines)-n:]
	}
	return strings.Join(lines, "\n")
}

// connect makes a client connection that reconnects forever (the embedded
// server goes away with the daemon) and closes on cleanup.
func connect(t *testing.T, url string) *nats.Conn {
	t.Helper()
	nc, err := nats.Connect(url, nats.MaxReconnects(-1), nats.ReconnectWait(20*time.Millisecond),
		nats.RetryOnFailedConnect(true), nats.ReconnectBufSize(-1))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(nc.Close)
	waitConnected(t, nc)
	return nc
}

// waitConnected waits until nc is connected and its subscriptions are
// known to the server.
func waitConnected(t *testing.T, nc *nats.Conn) {
	t.Helper()
	eventually(t, 30*time.Second, "client connected", func() bool {
		return nc.IsConnected() && nc.FlushTimeout(time.Second) == nil
	})
}

// eventually polls cond until it holds or fails the test after timeout.
func eventually(t *testing.T, timeout time.Duration, what string, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(timeout)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatalf("not within %s: %s", timeout, what)
		}
		time.Sleep(10 * time.Millisecond)
	}
}

// message is one output message as received.
type message struct {
	Subject string
	Data    []byte
}

// collector keeps every message on forewarn.forecast.>, .alert.>, .reject.>
// and .reject (a reject without a topic).
type collector struct {
	mu   sync.Mutex
	msgs map[string][]message // by kind: forecast, alert, reject
}

func collect(t *testing.T, nc *nats.Conn) *collector {
	t.Helper()
	c := &collector{msgs: map[string][]message{}}
	for _, kind := range []string{"forecast", "alert", "reject"} {
		for _, subj := range []string{"forewarn." + kind + ".>", "forewarn." + kind} {
			_, err := nc.Subscribe(subj, func(m *nats.Msg) {
				c.mu.Lock()
				c.msgs[kind] = append(c.msgs[kind], message{m.Subject, append([]byte(nil), m.Data...)})
				c.mu.Unlock()
			})
			if err != nil {
				t.Fatal(err)
			}
		}
	}
	if err := nc.Flush(); err != nil {
		t.Fatal(err)
	}
	return c
}

// get returns a copy of the messages of kind on subject (all subjects if
// subject is "").
func (c *collector) get(kind, subject string) []message {
	c.mu.Lock()
	defer c.mu.Unlock()
	var out []message
	for _, m := range c.msgs[kind] {
		if subject == "" || m.Subject == subject {
			out = append(out, m)
		}
	}
	return out
}

func (c *collector) count(kind, subject string) int { return len(c.get(kind, subject)) }

// normalized decodes a JSON message keeping numbers as written and drops
// the keys that legitimately depend on wall time.
func normalized(t *testing.T, b []byte, drop ...string) map[string]any {
	t.Helper()
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.UseNumber()
	var m map[string]any
	if err := dec.Decode(&m); err != nil {
		t.Fatalf("not a JSON object: %v\n%s", err, b)
	}
	for _, k := range drop {
		delete(m, k)
	}
	return m
}

// repeats says whether a run may publish a forecast at one origin more
// than once.
type repeats int

const (
	// onceEach is for a run without SIGKILL. The durable intake applies
	// every observation exactly once, and SIGTERM commits and acknowledges
	// all that was applied (README, Operations: Durability and Shutdown),
	// so each bucket closes once and each origin is published once: a
	// second forecast at an origin fails the test even when it is
	// identical.
	onceEach repeats = iota
	// sameAgain is for a run with SIGKILL. Observations whose effect was
	// applied but not yet on disk when the process died are redelivered
	// and applied again to the committed state (DEVELOPERS.md, Exactly
	// once: only what a record already reflects is skipped), so a bucket
	// may close, and its forecast be published, a second time. Forecasts
	// are deterministic in data time (CONTRACT.md §2), so the repeat must
	// be byte-identical to the first apart from "issued", the wall time
	// of publication; anything else fails the test.
	sameAgain
)

// issuedRe is the one "issued" member of a forecast message.
var issuedRe = regexp.MustCompile(`"issued":"[^"]*"`)

// withoutIssued is a forecast message with its "issued" value blanked.
func withoutIssued(b []byte) ([]byte, error) {
	if n := len(issuedRe.FindAllIndex(b, -1)); n != 1 {
		return nil, fmt.Errorf("forecast message has %d \"issued\" members, want 1: %s", n, b)
	}
	return issuedRe.ReplaceAll(b, []byte(`"issued":""`)), nil
}

// sameApartFromIssued reports whether two forecast messages are
// byte-identical apart from the value of "issued".
func sameApartFromIssued(a, b []byte) (bool, error) {
	x, err := withoutIssued(a)
	if err != nil {
		return false, err
	}
	y, err := withoutIssued(b)
	if err != nil {
		return false, err
	}
	return bytes.Equal(x, y), nil
}

// byOrigin indexes forecast messages by origin, keeping the first at
// each, and lists the repeats policy forbids; repeated counts every
// repeat. An error is a message that is not a forecast.
func byOrigin(msgs []message, policy repeats) (out map[time.Time][]byte, repeated int, bad []string, err error) {
	out = map[time.Time][]byte{}
	for _, m := range msgs {
		f, err := parseForecast(m.Data)
		if err != nil {
			return nil, 0, nil, err
		}
		first, seen := out[f.Origin]
		if !seen {
			out[f.Origin] = m.Data
			continue
		}
		repeated++
		if policy == onceEach {
			bad = append(bad, fmt.Sprintf("%s: origin %s published again in a run without a crash", m.Subject, f.Origin.Format(time.RFC3339)))
			continue
		}
		same, err := sameApartFromIssued(first, m.Data)
		if err != nil {
			return nil, 0, nil, err
		}
		if !same {
			bad = append(bad, fmt.Sprintf("%s: origin %s published twice with different content:\n first %s\n again %s",
				m.Subject, f.Origin.Format(time.RFC3339), first, m.Data))
		}
	}
	return out, repeated, bad, nil
}

// forecastsByOrigin indexes the forecast messages of one subject by
// origin, keeping the first at each. Under onceEach it fails the test on
// any origin published twice; under sameAgain on a repeat that is not
// byte-identical to the first apart from "issued". It returns how many
// repeats it saw.
func forecastsByOrigin(t *testing.T, msgs []message, policy repeats) (map[time.Time][]byte, int) {
	t.Helper()
	out, repeated, bad, err := byOrigin(msgs, policy)
	if err != nil {
		t.Fatal(err)
	}
	for i, b := range bad { // the first in full, two more by their first line
		if i == 3 {
			t.Errorf("… %d bad repeats in all", len(bad))
			break
		}
		if i > 0 {
			b, _, _ = strings.Cut(b, "\n")
		}
		t.Error(b)
	}
	return out, repeated
}

// publisher publishes observations into the JetStream intake stream with a
// message id (so a retry after a lost acknowledgement is not stored twice)
// and retries until the stream acknowledges; the daemon may be down.
type publisher struct {
	t  *testing.T
	js jetstream.JetStream
	n  int
}

func newPublisher(t *testing.T, nc *nats.Conn) *publisher {
	t.Helper()
	js, err := jetstream.New(nc)
	if err != nil {
		t.Fatal(err)
	}
	return &publisher{t: t, js: js}
}

// publish stores one message; it returns an error only if the stream did
// not acknowledge within timeout.
func (p *publisher) publish(subject string, data []byte, timeout time.Duration) error {
	p.n++
	id := fmt.Sprintf("e2e-%d", p.n)
	deadline := time.Now().Add(timeout)
	for {
		ctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
		_, err := p.js.Publish(ctx, subject, data, jetstream.WithMsgID(id))
		cancel()
		if err == nil {
			return nil
		}
		if time.Now().After(deadline) {
			return fmt.Errorf("publish %s: %w", subject, err)
		}
		time.Sleep(20 * time.Millisecond)
	}
}

func (p *publisher) must(subject string, data []byte) {
	p.t.Helper()
	if err := p.publish(subject, data, 60*time.Second); err != nil {
		p.t.Fatal(err)
	}
}

// obsJSON is one observation object {"time": RFC 3339, "value": v}.
func obsJSON(at time.Time, v float64) []byte {
	return fmt.Appendf(nil, `{"time":%q,"value":%s}`, at.UTC().Format(time.RFC3339Nano), strconv.FormatFloat(v, 'g', -1, 64))
}

// waitConsumed waits until the durable consumer has acknowledged every
// message of the intake stream: each one's effect is committed.
func waitConsumed(t *testing.T, nc *nats.Conn, timeout time.Duration) {
	t.Helper()
	js, err := jetstream.New(nc)
	if err != nil {
		t.Fatal(err)
	}
	var last string
	deadline := time.Now().Add(timeout)
	for !consumed(js, &last) {
		if time.Now().After(deadline) {
			t.Fatalf("intake stream %s not fully acknowledged by consumer %s within %s: %s", streamName, consumerName, timeout, last)
		}
		time.Sleep(20 * time.Millisecond)
	}
}

// consumed reports whether the consumer has acknowledged the whole stream,
// and sets *state to what it saw.
func consumed(js jetstream.JetStream, state *string) bool {
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
	defer cancel()
	s, err := js.Stream(ctx, streamName)
	if err != nil {
		*state = err.Error()
		return false
	}
	si, err := s.Info(ctx)
	if err != nil {
		*state = err.Error()
		return false
	}
	c, err := s.Consumer(ctx, consumerName)
	if err != nil {
		*state = err.Error()
		return false
	}
	ci, err := c.Info(ctx)
	if err != nil {
		*state = err.Error()
		return false
	}
	*state = fmt.Sprintf("stream last seq %d, ack floor %d, pending %d, ack pending %d",
		si.State.LastSeq, ci.AckFloor.Stream, ci.NumPending, ci.NumAckPending)
	return ci.AckFloor.Stream == si.State.LastSeq && ci.NumPending == 0 && ci.NumAckPending == 0
}

// The stream and consumer names the tests set in every config
// (intake.stream, intake.consumer).
const (
	streamName   = "E2E_INTAKE"
	consumerName = "e2e"
)

// baseConfig is the head of every test config: durable intake, fast flushes
// and arrival-time limits that take the tests' data, which start at t0
// (thirty days back) and end before now, with room to spare.
func baseConfig(maxSeries int) string {
	return fmt.Sprintf(`intake:
  subjects: ["metrics.>"]
  durable: true
  stream: %s
  consumer: %s
state:
  flush_interval: 200ms
log:
  level: info
  format: json
limits:
  max_series: %d
  max_past: %s
  max_future: %s
`, streamName, consumerName, maxSeries, maxPast, maxFuture)
}

// stateShow runs forewarn state show TOPIC on a stopped daemon's data.
func stateShow(t *testing.T, dataDir, topic string) map[string]any {
	t.Helper()
	out, errOut, code := cli(t, "state", "show", topic, "--data", dataDir)
	if code != 0 {
		t.Fatalf("forewarn state show %s: exit %d: %s", topic, code, errOut)
	}
	return normalized(t, []byte(out))
}

// query asks the running daemon for the latest forecast of topic.
func query(t *testing.T, natsURL, topic string) ([]byte, int, string) {
	t.Helper()
	out, errOut, code := cli(t, "query", "--nats", natsURL, topic)
	return []byte(out), code, errOut
}

// t0 is the data-time origin of the tests' series: midnight UTC thirty
// days before the run, so that the data lie in the recent past for the
// daemon's arrival-time limits (maxPast, maxFuture) whatever the date.
// Every step the tests use (1m, 10m, 1h) divides a day, so buckets start
// at t0 + i·step; forecasts depend on data time only through the buckets,
// so they are the same on any day. The longest series (TestAlertEndToEnd:
// 221 hourly buckets) ends about nine days after t0.
var t0 = time.Now().UTC().Truncate(24*time.Hour).AddDate(0, 0, -30)

// The arrival-time limits of baseConfig: maxPast takes the thirty days
// back to t0 with twenty to spare; nothing the tests publish on purpose
// lies in the future.
const maxPast, maxFuture = 50 * 24 * time.Hour, 24 * time.Hour

// session starts d and returns a client connection, a collector on the
// output subjects and a publisher into the intake stream.
func session(t *testing.T, d *daemon) (*nats.Conn, *collector, *publisher) {
	t.Helper()
	d.start()
	nc := connect(t, d.natsURL)
	return nc, collect(t, nc), newPublisher(t, nc)
}
