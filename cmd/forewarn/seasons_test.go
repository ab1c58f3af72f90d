package main

import (
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"
)

// TestFitSeasonsDurations: --seasons 1d,7d on 15 days of hourly rows with
// a time column (Unix seconds) gives Fourier terms for both cycles in the
// automatic choice, reported in model.seasons with their pairs, and the
// coefficients by name in estimates.regression (sin<k>/<m>, cos<k>/<m>). The series
// is a seeded simulation with known truth (a property test): a daily sine
// of amplitude 10 and a weekly cosine of amplitude 4 around 100, with
// N(0, 1) noise; the phase starts at the data time of the first row,
// 1.7e9 s, so sin1/24 ≈ 10·cos(2π·(t₀ mod 1d)/1d) and cos1/24 ≈
// −10·sin(2π·(t₀ mod 1d)/1d) by angle addition.
func TestFitSeasonsDurations(t *testing.T) {
	const t0, n = 1.7e9, 360
	rng := rand.New(rand.NewPCG(7, 0))
	var b strings.Builder
	b.WriteString("time,value\n")
	for i := 0; i < n; i++ {
		tt := t0 + 3600*float64(i)
		a := 2 * math.Pi * math.Mod(tt-t0, 86400) / 86400
		w := 2 * math.Pi * math.Mod(tt-t0, 604800) / 604800
		fmt.Fprintf(&b, "%.0f,%.6f\n", tt, 100+10*math.Sin(a)+4*math.Cos(w)+rng.NormFloat64())
	}
	file := writeTemp(t, "hourly.csv", b.String())
	code, out, errs := runFitCmd(t, "--seasons", "1d,7d", "--transform", "none", "--format", "json", "--horizon", "3", file)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var doc struct {
		Model struct {
			Seasons []struct {
				Steps float64 `json:"steps"`
				Terms string  `json:"terms"`
				Pairs int     `json:"pairs"`
			} `json:"seasons"`
		} `json:"model"`
		Estimates struct {
			Regression []struct {
				Name  string  `json:"name"`
				Value float64 `json:"value"`
			} `json:"regression"`
		} `json:"estimates"`
		Forecast []struct {
			Mean float64 `json:"mean"`
		} `json:"forecast"`
	}
	if err := json.Unmarshal([]byte(out), &doc); err != nil {
		t.Fatalf("%v: %s", err, out)
	}
	s := doc.Model.Seasons
	if len(s) != 2 || s[0].Steps != 24 || s[1].Steps != 168 || s[0].Terms != "fourier" || s[0].Pairs < 1 || s[1].Terms != "fourier" || s[1].Pairs < 1 {
		t.Fatalf("seasons %+v: want 24 and 168 steps, both with Fourier pairs", s)
	}
	ph := 2 * math.Pi * math.Mod(t0, 86400) / 86400
	want := map[string]float64{"sin1/24": 10 * math.Cos(ph), "cos1/24": -10 * math.Sin(ph)}
	for _, r := range doc.Estimates.Regression {
		if v, ok := want[r.Name]; ok {
			if math.Abs(r.Value-v) > 1 {
				t.Errorf("%s = %.3f, truth %.3f", r.Name, r.Value, v)
			}
			delete(want, r.Name)
		}
	}
	if len(want) > 0 {
		t.Errorf("missing regression terms %v in %+v", want, doc.Estimates.Regression)
	}
	// The next hour continues the daily sine from the data time.
	a := 2 * math.Pi * float64(n%24) / 24
	truth := 100 + 10*math.Sin(a) + 4*math.Cos(2*math.Pi*float64(n%168)/168)
	if len(doc.Forecast) != 3 || math.Abs(doc.Forecast[0].Mean-truth) > 4 {
		t.Errorf("forecast %+v, truth at h=1 %.2f", doc.Forecast, truth)
	}
}
