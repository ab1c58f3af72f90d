package stream_test

import (
	"fmt"
	"time"

	"forewarn/engine/series"
	"forewarn/stream"
)

func ExampleParsePayload() {
	arrival := time.Date(2024, 5, 1, 12, 0, 0, 0, time.UTC)
	for _, p := range []string{
		`1834.5`,
		`[{"time": "2024-05-01T11:58:00Z", "value": 1830}, {"time": 1714564740, "value": 1832}]`,
		`{"value": "abc"}`,
	} {
		obs, err := stream.ParsePayload([]byte(p), arrival, stream.Limits{}, nil)
		if err != nil {
			fmt.Println(err.(*stream.Reject).Code+":", err.(*stream.Reject).Reason)
			continue
		}
		for _, o := range obs {
			fmt.Println(o.Time.Format(time.RFC3339), o.Value)
		}
	}
	// Output:
	// 2024-05-01T12:00:00Z 1834.5
	// 2024-05-01T11:58:00Z 1830
	// 2024-05-01T11:59:00Z 1832
	// bad_value: value "abc" is a string; send a number
}

func ExampleAppendForecast() {
	origin := time.Date(2024, 5, 1, 12, 0, 0, 0, time.UTC)
	f := &series.Forecast{
		Topic: "storage.vol1.used_bytes", Origin: origin, StepSeconds: 3600, LastValue: 8.1e11, Kind: "gauge",
		Model:  series.ModelInfo{Spec: "ARIMA 0,1,1", Transform: "none", FittedAt: origin, NObs: 200, AICc: 4012.25},
		Levels: []float64{80, 95},
		Points: []series.Point{{H: 1, Time: origin.Add(time.Hour), Mean: 8.2e11, Median: 8.2e11,
			Lower: []series.Bound{{Value: 8.15e11, OK: true}, {Value: 8.1e11, OK: true}},
			Upper: []series.Bound{{Value: 8.25e11, OK: true}, {OK: false}}}},
	}
	fmt.Println(string(stream.AppendForecast(nil, f, origin.Add(2*time.Second))))
	// Output:
	// {"topic":"storage.vol1.used_bytes","issued":"2024-05-01T12:00:02Z","origin":"2024-05-01T12:00:00Z","step_seconds":3600,"last_value":8.1e+11,"kind":"gauge","model":{"label":"ARIMA 0,1,1","transform":"none","fitted_at":"2024-05-01T12:00:00Z","observations_used":200,"aicc":4012.25,"bands":"model"},"points":[{"h":1,"time":"2024-05-01T13:00:00Z","mean":820000000000,"median":820000000000,"bands":[{"level":80,"low":815000000000,"high":825000000000,"scale":1},{"level":95,"low":8.1e+11,"high":null,"scale":1}]}]}
}
