package daemon

import (
	"context"
	"slices"
	"testing"
	"time"

	"forewarn/config"
	"forewarn/stream/streamtest"
)

// A series takes the alert rules whose window its forecast reaches, as
// config.Alert.CheckSeries decides: a window of exactly horizon·step
// applies, one a second longer is skipped for that series.
func TestRulesBeyondHorizonSkipped(t *testing.T) {
	_, url := streamtest.RunServer(t)
	cfg := testConfig(t.TempDir()) // horizon 6 steps of 1m
	span := cfg.Series[0].Span()
	above := 1e9
	cfg.Alerts = []config.Alert{
		{Name: "edge", Match: ">", Above: &above, Within: span, Probability: 0.9},
		{Name: "beyond", Match: ">", Above: &above, Within: span + time.Second, Probability: 0.9},
	}
	cfg = cfg.WithDefaults()
	r := start(t, url, cfg)
	defer r.stop(t)
	publishWalk(t, url, "disk.used", 0, 1)
	var rules []string
	streamtest.Eventually(t, 10*time.Second, "series disk.used created", func() bool {
		found := false
		r.d.Inspect(context.Background(), func(all map[string]*Entry) {
			if e := all["disk.used"]; e != nil {
				found = true
				rules = rules[:0]
				for _, rv := range e.Rules() {
					rules = append(rules, rv.Name)
				}
			}
		})
		return found
	})
	if !slices.Equal(rules, []string{"edge"}) {
		t.Errorf("rules on the series %v, want [edge]", rules)
	}
}
