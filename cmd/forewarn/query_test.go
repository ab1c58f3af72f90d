package main

import (
	"bytes"
	"strings"
	"testing"

	"github.com/nats-io/nats.go"

	"forewarn/stream"
	"forewarn/stream/streamtest"
)

func TestQuery(t *testing.T) {
	_, url := streamtest.RunServer(t)
	nc := streamtest.Connect(t, url)
	forecast := `{"topic":"shop.orders","points":[]}`
	sub, err := stream.ServeQueries(nc, "fw", func(topic string) ([]byte, bool) {
		if topic == "shop.orders" {
			return []byte(forecast), true
		}
		return nil, false
	})
	if err != nil {
		t.Fatal(err)
	}
	defer sub.Unsubscribe()
	_ = nc.Flush()

	cases := []struct {
		name   string
		args   []string
		code   int
		stdout string
		stderr string
	}{
		{"forecast", []string{"--nats", url, "--prefix", "fw", "shop.orders"}, exitOK, forecast + "\n", ""},
		{"warming up", []string{"--nats", url, "--prefix", "fw", "disk.used"}, exitFailure, "", `no forecast for topic "disk.used" yet`},
		{"no daemon", []string{"--nats", url, "--prefix", "other", "shop.orders"}, exitFailure, "", "no daemon answers on other.query.shop.orders"},
		{"no server", []string{"--nats", "nats://127.0.0.1:1", "shop.orders"}, exitFailure, "", "cannot connect"},
		{"no topic", []string{"--nats", url}, exitUsage, "", "exactly one TOPIC"},
		{"two topics", []string{"a", "b"}, exitUsage, "", "exactly one TOPIC"},
		{"wildcard topic", []string{"shop.*"}, exitUsage, "", "bad topic"},
		{"bad flag", []string{"--bogus", "x"}, exitUsage, "", "bogus"},
		{"bad timeout", []string{"--timeout", "0s", "x"}, exitUsage, "", "--timeout"},
		{"conflicting auth", []string{"--nats", url, "--token", "t", "--user", "u", "x"}, exitUsage, "", "choose one"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			var out, errb bytes.Buffer
			code := dispatch(append([]string{"query"}, c.args...), &out, &errb)
			if code != c.code || out.String() != c.stdout || !strings.Contains(errb.String(), c.stderr) {
				t.Errorf("exit %d (want %d)\nstdout %q (want %q)\nstderr %q (want to contain %q)", code, c.code, out.String(), c.stdout, errb.String(), c.stderr)
			}
		})
	}
}

func TestQueryTimeout(t *testing.T) {
	_, url := streamtest.RunServer(t)
	nc := streamtest.Connect(t, url)
	// A responder that never answers: the request times out.
	sub, err := nc.Subscribe("forewarn.query.>", func(*nats.Msg) {})
	if err != nil {
		t.Fatal(err)
	}
	defer sub.Unsubscribe()
	_ = nc.Flush()
	var out, errb bytes.Buffer
	code := dispatch([]string{"query", "--nats", url, "--timeout", "200ms", "shop.orders"}, &out, &errb)
	if code != exitFailure || !strings.Contains(errb.String(), "no reply on forewarn.query.shop.orders within 200ms") {
		t.Fatalf("exit %d, stderr %q", code, errb.String())
	}
}
