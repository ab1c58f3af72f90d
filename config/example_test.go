package config_test

import (
	"fmt"

	"forewarn/config"
)

func ExampleParse() {
	src := []byte(`
series:
  - match: "storage.*.used_bytes"
    step: 5m
    horizon: 288
  - match: ">"
alerts:
  - {name: disk-nearly-full, match: "storage.*.used_bytes", above: 9.0e11, within: 6h, probability: 0.9}
`)
	cfg, err := config.Parse(src, "forewarn.yaml")
	if err != nil {
		fmt.Println(err)
		return
	}
	topic, _ := cfg.TopicOf("metrics.storage.vol1.used_bytes")
	s, _ := cfg.SeriesFor(topic)
	fmt.Println(topic, s.Kind, s.Step, s.Horizon, s.Levels)
	for _, a := range cfg.AlertsFor(topic) {
		v, above := a.Threshold()
		fmt.Println(a.Name, above, v, a.Within, a.Probability, a.ClearProbability)
	}

	_, err = config.Parse([]byte("series:\n  - step: 90\n    horizon: 5000\n"), "bad.yaml")
	fmt.Println(err)
	// Output:
	// storage.vol1.used_bytes auto 5m0s 288 [50 90]
	// disk-nearly-full true 9e+11 6h0m0s 0.9 0.45
	// bad.yaml:2:11: series[0].step: the bare number 90 has no unit; write e.g. "90s" for seconds
	// bad.yaml:3:14: series[0].horizon: 5000 is outside 1..1000
}
