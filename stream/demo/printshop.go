package demo

import (
	"fmt"
	"math"
	"math/rand/v2"
	"net/http"
	"sync"
	"time"

	"forewarn/config"
)

// The demo's scraped source: a print shop of our own invention whose job
// system serves OpenMetrics text. The daemon scrapes it like any other
// endpoint (package stream/source), every ShopEvery of wall time, so its
// forecasts appear in wall-clock time, after ShopMinPoints seconds.
//
//   - printshop_queue_jobs{shop="north"}: jobs waiting at the north shop (a
//     gauge), a slow swell of a minute's period with noise;
//   - printshop_pages_printed_total{shop="north"}: pages printed since the
//     press started (a counter by its TYPE, so its series becomes a counter).
const (
	ShopTopicPrefix = "printshop"
	ShopEvery       = time.Second
	ShopMinPoints   = 20
)

// PrintShop serves the print shop's metrics. Each request advances the
// shop by the wall time since the last one. Safe for concurrent use.
type PrintShop struct {
	mu    sync.Mutex
	rng   *rand.Rand
	start time.Time
	last  time.Time
	pages float64
}

// NewPrintShop returns the shop as it opens, now.
func NewPrintShop() *PrintShop {
	now := time.Now()
	return &PrintShop{rng: rand.New(rand.NewPCG(2026, 16)), start: now, last: now, pages: 18250}
}

// ServeHTTP writes the shop's current metrics as OpenMetrics 1.0.0 text.
func (p *PrintShop) ServeHTTP(w http.ResponseWriter, r *http.Request) {
	p.mu.Lock()
	now := time.Now()
	dt := now.Sub(p.last).Seconds()
	p.last = now
	el := now.Sub(p.start).Seconds()
	queue := math.Max(0, math.Round(14+6*math.Sin(2*math.Pi*el/60)+0.02*el+1.5*p.rng.NormFloat64()))
	p.pages += math.Max(0, dt*(3+0.2*queue)*(1+0.1*p.rng.NormFloat64()))
	pages := math.Floor(p.pages)
	p.mu.Unlock()
	w.Header().Set("Content-Type", "application/openmetrics-text; version=1.0.0; charset=utf-8")
	fmt.Fprintf(w, "# TYPE printshop_queue_jobs gauge\n# HELP printshop_queue_jobs Jobs waiting for a press.\n"+
		"printshop_queue_jobs{shop=\"north\"} %g\n"+
		"# TYPE printshop_pages_printed counter\n# HELP printshop_pages_printed Pages printed since the press started.\n"+
		"printshop_pages_printed_total{shop=\"north\"} %g\n# EOF\n", queue, pages)
}

// ShopSource returns the source entry that scrapes the shop at url.
func ShopSource(url string) config.Source {
	return config.Source{Name: "demo-printshop", OpenMetrics: url, Every: ShopEvery, TopicPrefix: ShopTopicPrefix}
}

// ShopSeries returns the series entry of the shop's topics: one-second
// buckets, kind auto (the source names the counter), a short window.
func ShopSeries() config.Series {
	return config.Series{Match: ShopTopicPrefix + ".>", Kind: "auto", Step: ShopEvery, Horizon: 30,
		Levels: []float64{50, 90}, Window: 300, MinPoints: ShopMinPoints, RefitEvery: 60, Model: "auto", Transform: "none"}
}
