package site

import (
	"context"
	"math"
	"testing"
	"time"

	"forewarn/stream/web/internal/webtest"
)

// fixedSource serves views made once from reference data; it stands in
// for the daemon in the tests of this package (the browser test in
// package web runs the real daemon).
type fixedSource struct {
	views  []View
	latest map[string][]byte
	ready  chan struct{}
	down   bool
}

func (f *fixedSource) Views(ctx context.Context, topic string, history int) ([]View, error) {
	if f.down {
		return nil, ErrNotRunning
	}
	var out []View
	for _, v := range f.views {
		if topic != "" && v.Topic != topic {
			continue
		}
		if history >= 0 && len(v.History) > history {
			v.History = v.History[len(v.History)-history:]
		}
		out = append(out, v)
	}
	return out, nil
}

func (f *fixedSource) Latest(topic string) ([]byte, bool) {
	b, ok := f.latest[topic]
	return b, ok
}

func (f *fixedSource) Ready() <-chan struct{} { return f.ready }

const month = 2629746 // seconds in an average Gregorian month

// refView is a fitted monthly series with R 4.2.2's forecast of case id.
func refView(t *testing.T, topic, id string) View {
	r := webtest.Forecast(t, id, []float64{80, 95})
	v := View{Topic: topic, Kind: "gauge", Status: "fitted", StepSeconds: month,
		Closed: uint64(len(r.Values)), History: r.Values, HistoryEnd: r.Times[len(r.Times)-1],
		Model:  Model{Spec: "ARIMA(0,1,1)(0,1,1)[12]", Transform: "log", FittedAt: r.Times[len(r.Times)-1], NObs: len(r.Values) - 13},
		Refits: []time.Time{r.Times[len(r.Times)-25]}}
	f := &Forecast{Origin: v.HistoryEnd, Levels: r.Levels}
	for h := range r.Median {
		f.Points = append(f.Points, Point{H: h + 1, Time: r.ForecastTimes[h], Mean: r.Mean[h], Median: r.Median[h],
			Lower: r.Lower[h], Upper: r.Upper[h]})
	}
	v.Forecast = f
	return v
}

func fixture(t *testing.T) *fixedSource {
	air := refView(t, "air.passengers", "AirPassengers_na_log_airline")
	air.Rejects, air.Late = 3, 1
	air.Calibrated = true
	air.Coverage = []Coverage{{Level: 80, Share: 0.7843, Weight: 1234.4}, {Level: 95, Share: math.NaN()}}
	air.Rules = []Rule{{Name: "busy-summer", Threshold: 600, Above: true, Raised: true, Probability: 0.97},
		{Name: "quiet", Threshold: 100, Above: false, Probability: math.NaN()}}
	gas := refView(t, "uk.gas", "UKgas_log_airline")
	gas.Rules = []Rule{{Name: "winter-peak", Threshold: 1250, Above: true, Probability: 0.3123}}
	ts, vs := webtest.Dataset(t, "lh")
	warm := View{Topic: "lab.hormone", Kind: "gauge", Status: "warming_up", StepSeconds: 600,
		History: vs[:20], HistoryEnd: ts[19], Closed: 20}
	return &fixedSource{views: []View{gas, warm, air}, latest: map[string][]byte{
		"air.passengers": []byte(`{"topic":"air.passengers"}`)}, ready: make(chan struct{})}
}
