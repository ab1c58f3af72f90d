// Package site serves forewarn's HTTP surface over a Source of plain
// series views: health and readiness, the daemon's own metrics as
// OpenMetrics text, the JSON API, a chart per series and the operator
// pages.
//
// # Routes
//
//	GET /healthz                          200 "ok" while the process serves
//	GET /readyz                           200 once the state is loaded, else 503
//	GET /metrics                          OpenMetrics (or Prometheus text, by Accept)
//	GET /api/series                       JSON list of Summary, sorted by topic (with realised coverage per level)
//	GET /api/series/{topic}               the latest forecast message (CONTRACT.md §2)
//	GET /api/series/{topic}/chart.svg     chart; ?w= and ?h= in pixels, ?points= history buckets
//	GET /api/partitions                   cluster mode: the instance owning each partition (owners.go)
//	GET /                                 index page: every series with a small chart
//	GET /series/{topic}                   one series: big chart, rules, forecast table
//
// # Contract
//
// The handlers only read: every request copies what it shows out of the
// Source (which, for the daemon, runs the copy on the loop goroutine that
// owns the series) and renders from the copy, so a slow client never
// holds the daemon up. Pages use html/template, carry their own style
// sheet and need neither external assets nor JavaScript. Bad query
// parameters get a 400 that names the parameter; an unknown topic a 404.
// Handler is safe for concurrent use.
//
// # Pages
//
// Pages write values as a person reads them (package humanfmt: the value's
// own significant digits, at most four, with an SI prefix symbol: "903.0 G")
// and keep every digit in the cell's title attribute; the JSON keeps full
// precision. Steps and forecast times relative to the origin are written in
// whole units ("10m", "+1h"). Alert rules show the ITU-T X.733 states
// "raised" and "cleared", which are also the class names that colour them.
package site
