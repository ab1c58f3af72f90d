package stream

import (
	"encoding/json"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats.go"

	"forewarn/stream/streamtest"
)

func TestPublisherSubjects(t *testing.T) {
	_, url := streamtest.RunServer(t)
	nc := streamtest.Connect(t, url)
	sub := streamtest.Connect(t, url)
	var mu sync.Mutex
	got := map[string]string{}
	s, err := sub.Subscribe("fw.>", func(m *nats.Msg) {
		mu.Lock()
		got[m.Subject] = string(m.Data)
		mu.Unlock()
	})
	if err != nil {
		t.Fatal(err)
	}
	defer s.Unsubscribe()
	_ = sub.Flush()
	p := NewPublisher(nc, "fw")
	for _, err := range []error{
		p.Forecast(p.ForecastSubject("shop.orders"), []byte("f")), p.Alert("shop.orders", []byte("a")),
		p.Reject("shop.orders", []byte("r")), p.Reject("", []byte("r0")), p.Flush(),
	} {
		if err != nil {
			t.Fatal(err)
		}
	}
	want := map[string]string{"fw.forecast.shop.orders": "f", "fw.alert.shop.orders": "a", "fw.reject.shop.orders": "r", "fw.reject": "r0"}
	streamtest.Eventually(t, 5*time.Second, "four messages", func() bool {
		mu.Lock()
		defer mu.Unlock()
		return len(got) == len(want)
	})
	mu.Lock()
	defer mu.Unlock()
	for k, v := range want {
		if got[k] != v {
			t.Errorf("%s: got %q, want %q", k, got[k], v)
		}
	}
	if NewPublisher(nc, "").Prefix() != "forewarn" {
		t.Error("default prefix")
	}
}

func TestServeQueries(t *testing.T) {
	_, url := streamtest.RunServer(t)
	nc := streamtest.Connect(t, url)
	latest := map[string][]byte{"shop.orders": []byte(`{"topic":"shop.orders"}`)}
	sub, err := ServeQueries(nc, "fw", func(topic string) ([]byte, bool) {
		b, ok := latest[topic]
		return b, ok
	})
	if err != nil {
		t.Fatal(err)
	}
	defer sub.Unsubscribe()
	client := streamtest.Connect(t, url)
	m, err := client.Request("fw.query.shop.orders", nil, 2*time.Second)
	if err != nil {
		t.Fatalf("known topic: %v", err)
	}
	if string(m.Data) != `{"topic":"shop.orders"}` {
		t.Fatalf("known topic: %q", m.Data)
	}
	m, err = client.Request("fw.query.disk.used", nil, 2*time.Second)
	if err != nil {
		t.Fatal(err)
	}
	var e struct{ Error string }
	if err := json.Unmarshal(m.Data, &e); err != nil || e.Error != `no forecast for topic "disk.used" yet (warming up or unknown)` {
		t.Fatalf("unknown topic: %q, %v", m.Data, err)
	}
}
