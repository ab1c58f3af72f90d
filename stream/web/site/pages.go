package site

import (
	"bytes"
	"html/template"
	"math"
	"net/http"
	"net/url"
	"strconv"
	"sync"
	"time"

	"forewarn/stream/humanfmt"
)

var funcs = template.FuncMap{
	"path":   url.PathEscape,
	"status": StatusText,
	"num":    num,
	"bound":  bound,
	"full":   full,
	"level":  func(l float64) string { return strconv.FormatFloat(l, 'g', -1, 64) },
	"utc":    utc,
	"alarm":  alarm,
	"dir":    direction,
	"pct": func(p float64) string {
		if !finite(p) {
			return "—"
		}
		return strconv.FormatFloat(100*p, 'f', 1, 64) + " %"
	},
	"at":    func(xs []float64, i int) float64 { return xs[i] },
	"count": func(w float64) string { return strconv.FormatFloat(w, 'f', 0, 64) },
	"step": func(s int64) string {
		return humanfmt.Duration(time.Duration(s) * time.Second)
	},
	"ahead": func(origin, t time.Time) string { return humanfmt.Offset(t.Sub(origin)) },
	"aicc":  func(x float64) string { return strconv.FormatFloat(x, 'f', 1, 64) },
	"zval":  func(x float64) string { return strconv.FormatFloat(x, 'f', 1, 64) },
	"dur":   func(d time.Duration) string { return humanfmt.Duration(d) },
	"terms": cycleTerms,
}

// cycleTerms says which terms carry a cycle.
func cycleTerms(c Cycle) string {
	switch c.Terms {
	case "fourier":
		if c.Pairs == 1 {
			return "1 Fourier pair (sin/cos of harmonic 1)"
		}
		return strconv.Itoa(c.Pairs) + " Fourier pairs (sin/cos of harmonics 1–" + strconv.Itoa(c.Pairs) + ")"
	case "arima":
		return "seasonal ARIMA terms"
	case "profile":
		return "profile (the cycle's shape at the last refit, by the phase of data time)"
	}
	return "none (not worth any terms at the last refit)"
}

// num writes a value for a person (humanfmt.Value); the page puts the
// full value, full, in the cell's title.
func num(x float64) string {
	if math.IsNaN(x) {
		return "missing"
	}
	return humanfmt.Value(x)
}

// bound is num for a band end, NaN or ±Inf when unbounded.
func bound(x float64) string {
	if !finite(x) {
		return "unbounded"
	}
	return humanfmt.Value(x)
}

// full writes x with every digit it has, the way the JSON does but
// without an exponent where a plain decimal is still short.
func full(x float64) string {
	switch a := math.Abs(x); {
	case math.IsNaN(x):
		return "missing"
	case math.IsInf(x, 0):
		return "unbounded"
	case a == 0 || a >= 1e-4 && a < 1e21:
		return strconv.FormatFloat(x, 'f', -1, 64)
	default:
		return strconv.FormatFloat(x, 'g', -1, 64)
	}
}

// alarm is a rule's state in the words of ITU-T X.733, also the class
// that colours it.
func alarm(r Rule) string {
	if r.Raised {
		return "raised"
	}
	return "cleared"
}

func utc(t time.Time) string {
	if t.IsZero() {
		return "—"
	}
	return t.UTC().Format(time.RFC3339)
}

const style = `<style>
body{font:14px/1.45 "Liberation Sans",Arial,Helvetica,sans-serif;margin:0;color:#1d1d1d;background:#f4f5f7}
header{background:#16324f;color:#fff;padding:10px 24px}
header a{color:#fff;text-decoration:none;font-weight:bold;font-size:17px}
main{padding:16px 24px}
h1{font-size:20px;margin:4px 0 12px}
h2{font-size:16px;margin:20px 0 8px}
table{border-collapse:collapse;background:#fff}
th,td{padding:5px 10px;border-bottom:1px solid #e2e4e8;text-align:left;vertical-align:middle}
th{background:#eceef2;font-weight:600}
td.n{text-align:right;font-variant-numeric:tabular-nums}
.st{display:inline-block;padding:1px 8px;border-radius:9px;font-size:12px}
.st-fitted{background:#d8efd9;color:#1e5e24}
.st-warming_up{background:#fdf0cc;color:#7a5a00}
.st-refitting{background:#dbe7f7;color:#17457a}
.raised{color:#a3320b;font-weight:bold}
.cleared{color:#3d5a6c}
.chart{background:#fff;border:1px solid #dcdfe4}
.muted{color:#666}
dl{display:grid;grid-template-columns:max-content auto;gap:2px 14px;background:#fff;padding:10px 14px;width:max-content}
dt{color:#555}
</style>`

var indexTmpl = lazyTemplate("index", indexText)

var indexText = `<!doctype html>
<html lang="en"><head><meta charset="utf-8"><title>forewarn — series</title>` + style + `</head>
<body><header><a href="./">forewarn</a></header><main>
<h1>Series <span class="muted">({{len .Series}})</span></h1>
{{with .Cluster}}<p id="owners">Instance <b>{{.Instance}}</b> shows the series of the partitions it owns, of {{.Partitions}}:
{{range .Groups}}<span class="owner" data-instance="{{.Instance}}">{{if .Self}}this instance{{else if .Instance}}instance <b>{{.Instance}}</b>{{else}}no instance (free){{end}}: {{range $i, $p := .Partitions}}{{if $i}}, {{end}}{{$p}}{{else}}none{{end}}</span>; {{end}}
JSON: <a href="api/partitions">api/partitions</a></p>{{end}}
{{if not .Series}}<p class="muted">No series yet: nothing has arrived on the intake subjects.</p>{{else}}
<table id="series">
<tr><th>topic</th><th>status</th><th>last value</th><th>model</th><th>rejects</th><th>alerts</th><th>history and forecast</th></tr>
{{range .Series}}<tr class="series" data-topic="{{.Topic}}">
<td><a href="series/{{path .Topic}}">{{.Topic}}</a><br><span class="muted">{{.Kind}}, step {{step .StepSeconds}}</span></td>
<td><span class="st st-{{.Status}}">{{status .Status}}</span></td>
<td class="n" title="{{full .LastValue}}">{{num .LastValue}}</td>
<td>{{if .Model.Spec}}{{.Model.Spec}}<br><span class="muted">{{.Model.Transform}}</span>{{else}}<span class="muted">none yet</span>{{end}}</td>
<td class="n">{{.Rejects}}{{if .Late}} <span class="muted">({{.Late}} late)</span>{{end}}</td>
<td>{{range .Rules}}<div class="{{alarm .}}">{{.Name}}: {{alarm .}}</div>{{else}}<span class="muted">no rules</span>{{end}}</td>
<td><img class="chart" src="api/series/{{path .Topic}}/chart.svg?w=` + strconv.Itoa(SmallWidth) + `&amp;h=` + strconv.Itoa(SmallHeight) + `" width="` + strconv.Itoa(SmallWidth) + `" height="` + strconv.Itoa(SmallHeight) + `" alt="chart of {{.Topic}}"></td>
</tr>
{{end}}</table>{{end}}
<p class="muted">Reading {{range $i, $s := .Subjects}}{{if $i}}, {{end}}<code>{{$s}}</code>{{end}}; publishing under <code>{{.Prefix}}.</code>
· JSON: <a href="api/series">api/series</a> · metrics: <a href="metrics">metrics</a></p>
</main></body></html>
`

var seriesTmpl = lazyTemplate("series", seriesText)

var seriesText = `<!doctype html>
<html lang="en"><head><meta charset="utf-8"><title>forewarn — {{.Topic}}</title>` + style + `</head>
<body><header><a href="../">forewarn</a></header><main>
<h1>{{.Topic}} <span class="st st-{{.Status}}">{{status .Status}}</span></h1>
<img id="chart" class="chart" src="../api/series/{{path .Topic}}/chart.svg?w=` + strconv.Itoa(LargeWidth) + `&amp;h=` + strconv.Itoa(LargeHeight) + `" width="` + strconv.Itoa(LargeWidth) + `" height="` + strconv.Itoa(LargeHeight) + `" alt="history and forecast of {{.Topic}}">
<h2>Series</h2>
<dl>
<dt>kind</dt><dd>{{.Kind}}</dd>
<dt>step</dt><dd>{{step .StepSeconds}}</dd>
<dt>last closed bucket</dt><dd>{{utc .HistoryEnd}}: <span title="{{full .LastValue}}">{{num .LastValue}}</span></dd>
<dt>buckets closed</dt><dd>{{.Closed}}</dd>
<dt>rejected</dt><dd>{{.Rejects}} ({{.Late}} late)</dd>
<dt>model</dt><dd>{{if .Model.Spec}}{{.Model.Spec}}, transform {{.Model.Transform}}, fitted on {{.Model.NObs}} buckets up to {{utc .Model.FittedAt}}, AICc <span title="{{full .Model.AICc}}">{{aicc .Model.AICc}}</span>{{else}}none yet{{end}}</dd>
<dt>failed refits</dt><dd>{{.RefitFailures}}{{if .LastRefitNote}}: {{.LastRefitNote}}{{end}}</dd>
<dt>online check</dt><dd>{{if .Flag.Kind}}{{.Flags}} buckets taken as outliers or level shifts; the latest, {{utc .Flag.Time}}, as {{.Flag.Kind}} (z = {{zval .Flag.Z}}){{else}}no bucket taken as an outlier or a level shift{{end}}</dd>
</dl>
<h2>Seasonal cycles</h2>
{{if .Cycles}}<table id="cycles"><tr><th>cycle</th><th>terms</th></tr>
{{range .Cycles}}<tr><td>{{dur .Length}}</td><td>{{terms .}}</td></tr>
{{end}}</table>{{else}}<p class="muted">No seasonal cycle{{if .Model.Spec}} in the model's settings{{end}}.</p>{{end}}
<h2>Outliers found at the last refit</h2>
{{if .Outliers}}<table id="outliers"><tr><th>bucket</th><th>type</th><th>size (model scale)</th><th>t value</th></tr>
{{range .Outliers}}<tr><td>{{utc .Time}}</td><td>{{.Kind}}</td><td class="n" title="{{full .Size}}">{{num .Size}}</td><td class="n">{{zval .Tau}}</td></tr>
{{end}}</table>{{else}}<p class="muted">None.</p>{{end}}
<h2>Alert rules</h2>
{{if .Rules}}<table id="rules"><tr><th>rule</th><th>threshold</th><th>state</th><th>probability</th><th>since</th></tr>
{{range .Rules}}<tr><td>{{.Name}}</td><td title="{{full .Threshold}}">{{dir .Above}} {{num .Threshold}}</td><td class="{{alarm .}}">{{alarm .}}</td><td class="n">{{pct .Probability}}</td><td>{{utc .Since}}</td></tr>
{{end}}</table>{{else}}<p class="muted">No alert rule watches this series.</p>{{end}}
<h2>Latest forecast</h2>
{{with .Forecast}}<p class="muted">from the bucket starting {{utc .Origin}}; <a href="../api/series/{{path $.Topic}}">as JSON</a></p>
<table id="forecast"><tr><th>h</th><th>ahead</th><th>time</th><th>mean</th><th>median</th>{{range .Levels}}<th>{{level .}} % interval</th>{{end}}</tr>
{{range .Points}}{{$p := .}}<tr><td class="n">{{.H}}</td><td class="n">{{ahead $.Forecast.Origin .Time}}</td><td class="muted">{{utc .Time}}</td><td class="n" title="{{full .Mean}}">{{num .Mean}}</td><td class="n" title="{{full .Median}}">{{num .Median}}</td>{{range $i, $l := $.Forecast.Levels}}<td class="n" title="{{full (at $p.Lower $i)}} … {{full (at $p.Upper $i)}}">{{bound (at $p.Lower $i)}} … {{bound (at $p.Upper $i)}}</td>{{end}}</tr>
{{end}}</table>{{else}}<p class="muted">No forecast yet: the series is warming up.</p>{{end}}
<h2>Band coverage</h2>
{{if .Calibrated}}<p class="muted">Bands calibrated from the series' own forecast errors. Realised: the share of recent forecasts, all horizons, that fell inside their band.</p>
<table id="coverage"><tr><th>level</th><th>nominal</th><th>realised</th><th>forecasts</th></tr>
{{range .Coverage}}<tr><td>{{level .Level}} % interval</td><td class="n">{{level .Level}} %</td><td class="n">{{pct .Share}}</td><td class="n">{{count .Weight}}</td></tr>
{{end}}</table>{{else}}<p class="muted">The bands are the model's own (calibrate: false).</p>{{end}}
</main></body></html>
`

func (s *server) index(w http.ResponseWriter, r *http.Request) {
	vs, ok := s.views(w, r, "", 1)
	if !ok {
		return
	}
	render(w, indexTmpl(), struct {
		Info
		Series  []View
		Cluster *Cluster
	}{s.info, vs, s.cluster()})
}

func (s *server) page(w http.ResponseWriter, r *http.Request) {
	v, ok := s.one(w, r, 1)
	if !ok {
		return
	}
	render(w, seriesTmpl(), v)
}

// lazyTemplate returns a function that parses text as the template name on
// its first call and returns that template ever after; safe for concurrent
// use. The pages are parsed when first served, not at package
// initialisation: the offline commands link this package but serve none.
func lazyTemplate(name, text string) func() *template.Template {
	return sync.OnceValue(func() *template.Template {
		return template.Must(template.New(name).Funcs(funcs).Parse(text))
	})
}

func render(w http.ResponseWriter, t *template.Template, data any) {
	var buf bytes.Buffer
	if err := t.Execute(&buf, data); err != nil {
		http.Error(w, err.Error(), http.StatusInternalServerError)
		return
	}
	w.Header().Set("Content-Type", "text/html; charset=utf-8")
	w.Write(buf.Bytes())
}
