package e2e

import (
	"encoding/json"
	"fmt"
	"strconv"
	"strings"
	"testing"
	"time"
)

// This file is the one place that spells the contract's formats the tests
// read or write: the forecast message (CONTRACT.md §2), the alert state
// words, a fixed model in the config, and `forewarn fit`'s flags and JSON
// (§3). Every test goes through the neutral types and functions below, so
// a change of spelling is a change here alone.

// The alert message's state words (CONTRACT.md §2; revision 2 names them
// after the ITU-T X.733 alarm states).
const (
	alertRaised  = "raised"
	alertCleared = "cleared"
)

// fixedModel is the config value of a fixed non-seasonal model of orders
// "p,d,q", quoted for YAML.
func fixedModel(orders string) string {
	return strconv.Quote(orders)
}

// forecast is the part of a forecast message the tests read; the full
// message is compared with normalized.
type forecast struct {
	Topic       string
	Issued      string
	Origin      time.Time
	StepSeconds int64
	LastValue   float64
	Kind        string
	Model       forecastModel
	Points      []forecastPoint
	// TakenAs is what the online check made of the origin's bucket
	// ("outlier", "level_shift"; "" when the message has no last_bucket),
	// TakenZ its standardised one-step error.
	TakenAs string
	TakenZ  float64
}

type forecastModel struct {
	Label            string
	Transform        string
	FittedAt         string
	ObservationsUsed int
	AICc             float64
}

type forecastPoint struct {
	H      int
	Time   time.Time
	Mean   float64
	Median float64
	Bands  []band // levels ascending
}

// band is the central interval at Level percent; a nil bound is null in
// the message (outside the transform's domain).
type band struct {
	Level     float64
	Low, High *float64
}

// bandAt returns the band of level, if there is one.
func bandAt(bs []band, level float64) (band, bool) {
	for _, b := range bs {
		if b.Level == level {
			return b, true
		}
	}
	return band{}, false
}

// wireForecast is the forecast message as the daemon writes it.
type wireForecast struct {
	Topic       string    `json:"topic"`
	Issued      string    `json:"issued"`
	Origin      time.Time `json:"origin"`
	StepSeconds int64     `json:"step_seconds"`
	LastValue   float64   `json:"last_value"`
	Kind        string    `json:"kind"`
	Model       struct {
		Label            string  `json:"label"`
		Transform        string  `json:"transform"`
		FittedAt         string  `json:"fitted_at"`
		ObservationsUsed int     `json:"observations_used"`
		AICc             float64 `json:"aicc"`
	} `json:"model"`
	LastBucket *struct {
		TakenAs string  `json:"taken_as"`
		Z       float64 `json:"z"`
	} `json:"last_bucket"`
	Points []struct {
		H      int        `json:"h"`
		Time   time.Time  `json:"time"`
		Mean   float64    `json:"mean"`
		Median float64    `json:"median"`
		Bands  []wireBand `json:"bands"`
	} `json:"points"`
}

// wireBand is one entry of a point's bands list.
type wireBand struct {
	Level *float64 `json:"level"`
	Low   *float64 `json:"low"`
	High  *float64 `json:"high"`
}

// decodeForecast reads a forecast message; anything that is not the
// contract's JSON fails the test.
func decodeForecast(t *testing.T, b []byte) forecast {
	t.Helper()
	f, err := parseForecast(b)
	if err != nil {
		t.Fatal(err)
	}
	return f
}

// parseForecast reads a forecast message.
func parseForecast(b []byte) (forecast, error) {
	var w wireForecast
	if err := json.Unmarshal(b, &w); err != nil {
		return forecast{}, fmt.Errorf("forecast message is not the contract's JSON: %v\n%s", err, b)
	}
	f := forecast{Topic: w.Topic, Issued: w.Issued, Origin: w.Origin, StepSeconds: w.StepSeconds,
		LastValue: w.LastValue, Kind: w.Kind,
		Model: forecastModel{Label: w.Model.Label, Transform: w.Model.Transform, FittedAt: w.Model.FittedAt,
			ObservationsUsed: w.Model.ObservationsUsed, AICc: w.Model.AICc}}
	if w.LastBucket != nil {
		f.TakenAs, f.TakenZ = w.LastBucket.TakenAs, w.LastBucket.Z
	}
	for _, p := range w.Points {
		bs, err := listBands(p.Bands)
		if err != nil {
			return forecast{}, fmt.Errorf("forecast message, h=%d: %v\n%s", p.H, err, b)
		}
		f.Points = append(f.Points, forecastPoint{H: p.H, Time: p.Time, Mean: p.Mean, Median: p.Median, Bands: bs})
	}
	return f, nil
}

// listBands checks a bands list (CONTRACT.md §2: levels present, finite
// and strictly ascending) and turns it into bands.
func listBands(ws []wireBand) ([]band, error) {
	var bs []band
	for i, w := range ws {
		if w.Level == nil {
			return nil, fmt.Errorf("band %d has no level", i)
		}
		if i > 0 && *w.Level <= *ws[i-1].Level {
			return nil, fmt.Errorf("band levels not ascending: %v after %v", *w.Level, *ws[i-1].Level)
		}
		bs = append(bs, band{Level: *w.Level, Low: w.Low, High: w.High})
	}
	return bs, nil
}

// fitResult is the part of `forewarn fit --format json` the tests read.
type fitResult struct {
	Label            string
	AICc             float64
	ObservationsUsed int
	Points           []fitPoint
}

type fitPoint struct {
	H     int
	Mean  float64
	SD    float64 // standard deviation of the forecast error
	Bands []band
}

// runFit runs `forewarn fit` on a CSV file with a fixed non-seasonal model
// of orders "p,d,q", no transform, the given horizon and levels, and
// reads its JSON.
func runFit(t *testing.T, file, orders string, horizon int, levels []float64) fitResult {
	t.Helper()
	var lv []string
	for _, l := range levels {
		lv = append(lv, strconv.FormatFloat(l, 'f', -1, 64))
	}
	args := []string{"fit", "--model", orders, "--transform", "none", "--horizon", strconv.Itoa(horizon),
		"--levels", strings.Join(lv, ","), "--format", "json", file}
	out, errOut, code := cli(t, args...)
	if code != 0 {
		t.Fatalf("forewarn %s: exit %d: %s", strings.Join(args, " "), code, errOut)
	}
	var w struct {
		Model struct {
			Label string `json:"label"`
		} `json:"model"`
		AICc             float64 `json:"aicc"`
		ObservationsUsed int     `json:"observations_used"`
		Forecast         []struct {
			H     int        `json:"h"`
			Mean  float64    `json:"mean"`
			SD    float64    `json:"sd"`
			Bands []wireBand `json:"bands"`
		} `json:"forecast"`
	}
	if err := json.Unmarshal([]byte(out), &w); err != nil {
		t.Fatalf("forewarn fit output: %v\n%s", err, out)
	}
	r := fitResult{Label: w.Model.Label, AICc: w.AICc, ObservationsUsed: w.ObservationsUsed}
	for _, p := range w.Forecast {
		bs, err := listBands(p.Bands)
		if err != nil {
			t.Fatalf("forewarn fit output, h=%d: %v\n%s", p.H, err, out)
		}
		r.Points = append(r.Points, fitPoint{H: p.H, Mean: p.Mean, SD: p.SD, Bands: bs})
	}
	return r
}
