package daemon

import (
	"fmt"
	"testing"
	"time"

	"forewarn/config"
	"forewarn/stream/streamtest"
)

// A daemon built from a Config whose fields are zero runs on the
// defaults config.Config.WithDefaults gives (limits.max_series 10000, a
// plain intake on metrics.>, the default series entry), as the Config's
// documentation says a zero field means.
func TestZeroConfigTakesDefaults(t *testing.T) {
	_, url := streamtest.RunServer(t)
	cfg := &config.Config{State: config.State{Dir: t.TempDir()}}
	r := start(t, url, cfg)
	defer r.stop(t)
	nc := streamtest.Connect(t, url)
	for i := range 3 {
		msg := fmt.Sprintf(`{"time": %d, "value": %d}`, time.Now().Unix()-int64(60*(3-i)), i+1)
		if err := nc.Publish("metrics.shop.orders", []byte(msg)); err != nil {
			t.Fatal(err)
		}
	}
	if err := nc.Flush(); err != nil {
		t.Fatal(err)
	}
	streamtest.Eventually(t, 10*time.Second, "three observations accepted", func() bool {
		return counter(t, r.d.Metrics().Accepted) == 3
	})
	if n := counter(t, r.d.Metrics().Series); n != 1 {
		t.Errorf("%v series, want 1", n)
	}
}
