package config

import (
	"errors"
	"flag"
	"os"
	"reflect"
	"runtime"
	"strings"
	"testing"
	"time"
)

var update = flag.Bool("update", false, "rewrite the golden files under testdata/")

// problemsOf parses src and returns its problems; it fails the test if
// the error is not an *Errors.
func problemsOf(t *testing.T, src string) []Problem {
	t.Helper()
	_, err := Parse([]byte(src), "t.yaml")
	if err == nil {
		return nil
	}
	var e *Errors
	if !errors.As(err, &e) {
		t.Fatalf("error %v (%T) is not a *config.Errors", err, err)
	}
	if !errors.Is(err, ErrInvalid) {
		t.Errorf("error does not wrap ErrInvalid")
	}
	return e.Problems
}

func TestDefaultIsFreshAndValid(t *testing.T) {
	a := Default()
	a.Series[0].Levels[0] = 1
	a.Intake.Subjects[0] = "x.>"
	b := Default()
	if b.Series[0].Levels[0] != 50 || b.Intake.Subjects[0] != "metrics.>" {
		t.Fatal("Default shares mutable state between calls")
	}
	if err := b.Validate(); err != nil {
		t.Fatalf("Default() is not valid: %v", err)
	}
	// The zero Config is valid: every zero field means a default.
	if err := (&Config{}).Validate(); err != nil {
		t.Fatalf("zero Config is not valid: %v", err)
	}
}

// The documented defaults, CONTRACT.md §2 and the field comments.
func TestEmptyFileGivesDefaults(t *testing.T) {
	for _, src := range []string{"", "# only a comment\n", "{}", "nats:\nseries:\n"} {
		c, err := Parse([]byte(src), "empty.yaml")
		if err != nil {
			t.Fatalf("%q: %v", src, err)
		}
		c.pos, c.file = nil, ""
		want := Default()
		if !reflect.DeepEqual(c, want) {
			t.Errorf("%q:\n got %+v\nwant %+v", src, c, want)
		}
	}
	d := Default()
	s := d.Series[0]
	checks := []struct {
		name     string
		got, exp any
	}{
		{"nats.url", d.NATS.URL, ""},
		{"nats.listen", d.NATS.Listen, "127.0.0.1:4222"},
		{"intake.subjects", d.Intake.Subjects, []string{"metrics.>"}},
		{"intake.durable", d.Intake.Durable, true},
		{"output.prefix", d.Output.Prefix, "forewarn"},
		{"state.dir", d.State.Dir, "./forewarn-data"},
		{"http.listen", d.HTTP.Listen, "127.0.0.1:8714"},
		{"series.match", s.Match, ">"},
		{"series.kind", s.Kind, "auto"},
		{"series.step", s.Step, time.Minute},
		{"series.horizon", s.Horizon, 60},
		{"series.levels", s.Levels, []float64{50, 90}},
		{"series.window", s.Window, 2000},
		{"series.min_points", s.MinPoints, 50},
		{"series.refit_every", s.RefitEvery, 60},
		{"series.seasons", s.Seasons, []Cycle(nil)},
		{"series.model", s.Model, "auto"},
		{"series.constant", s.Constant, "auto"},
		{"series.transform", s.Transform, "auto"},
	}
	for _, c := range checks {
		if !reflect.DeepEqual(c.got, c.exp) {
			t.Errorf("default %s = %v, want %v", c.name, c.got, c.exp)
		}
	}
}

func TestWithDefaultsDoesNotChangeReceiver(t *testing.T) {
	c := &Config{Series: []Series{{Match: "a.>", Levels: []float64{95, 80}, Model: " 0, 1,1 ×0,1,1", Seasons: []Cycle{{Length: Day}}}}}
	d := c.WithDefaults()
	if c.Series[0].Levels[0] != 95 || c.Series[0].Model != " 0, 1,1 ×0,1,1" || c.Series[0].Kind != "" || c.Series[0].Constant != "" {
		t.Errorf("WithDefaults changed its receiver: %+v", c.Series[0])
	}
	got := d.Series[0]
	if !reflect.DeepEqual(got.Levels, []float64{80, 95}) || got.Model != "0,1,1 x 0,1,1" || got.Constant != "auto" ||
		got.Kind != "auto" || got.Step != time.Minute || got.Period() != 1440 {
		t.Errorf("WithDefaults gave %+v (period %d)", got, got.Period())
	}
	d.Series[0].Seasons[0].Steps = 7
	if c.Series[0].Seasons[0].Steps != 0 {
		t.Error("WithDefaults shares the seasons with its receiver")
	}
}

func TestLoadFull(t *testing.T) {
	c, err := Load("testdata/full.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if c.NATS.URL != "tls://bus-1.example.net:4222, tls://bus-2.example.net:4222" || c.NATS.TLS.ServerName != "bus.example.net" {
		t.Errorf("nats: %+v", c.NATS)
	}
	if c.Intake.MaxBytes != 2<<30 || c.Intake.MaxAge != 72*time.Hour || c.Intake.Stream != "TELEMETRY_IN" {
		t.Errorf("intake: %+v", c.Intake)
	}
	if c.Limits.MaxPayloadBytes != 32<<10 || c.Limits.MaxPast != 720*time.Hour {
		t.Errorf("limits: %+v", c.Limits)
	}
	if c.State.FlushInterval != 500*time.Millisecond || c.Refit.Workers != 3 || c.Log.Format != "json" {
		t.Errorf("state/refit/log: %+v %+v %+v", c.State, c.Refit, c.Log)
	}
	if len(c.Series) != 3 {
		t.Fatalf("%d series entries, want 3", len(c.Series))
	}
	s0 := c.Series[0]
	want0 := Series{Match: "shop.*.orders", Kind: "counter", Step: time.Hour, Horizon: 48,
		Levels: []float64{50, 80, 95}, Window: 2400, MinPoints: 72, RefitEvery: 60, Seasons: []Cycle{{Length: Day}},
		Model: "0,1,1 x 0,1,1", Constant: "auto", Transform: "log", CloseAfter: 90 * time.Second, Calibrate: new(true), Outliers: new(true), Line: 45}
	if !reflect.DeepEqual(s0, want0) {
		t.Errorf("series[0]:\n got %+v\nwant %+v", s0, want0)
	}
	if s1 := c.Series[1]; s1.Step != 5*time.Minute || s1.Horizon != 288 || s1.Window != 2000 || s1.Transform != "boxcox(0.5)" || s1.Period() != 288 || s1.Line != 56 {
		t.Errorf("series[1]: %+v", s1)
	}
	a0, a1 := c.Alerts[0], c.Alerts[1]
	if v, above := a0.Threshold(); !above || v != 9e11 || a0.Within != 6*time.Hour || a0.ClearProbability != 0.45 || a0.Line != 63 {
		t.Errorf("alerts[0]: %+v", a0)
	}
	if v, above := a1.Threshold(); above || v != 100 || a1.ClearProbability != 0.3 || a1.Line != 68 {
		t.Errorf("alerts[1]: %+v", a1)
	}
}

func TestLoadMinimal(t *testing.T) {
	c, err := Load("testdata/minimal.yaml")
	if err != nil {
		t.Fatal(err)
	}
	s, ok := c.SeriesFor("shop.eu.orders")
	if !ok || s.Kind != "counter" || s.Step != time.Hour || s.Horizon != 60 {
		t.Errorf("SeriesFor(shop.eu.orders) = %+v, %v", s, ok)
	}
	s, ok = c.SeriesFor("storage.vol1.used_bytes")
	if !ok || s.Match != ">" || s.Kind != "auto" {
		t.Errorf("SeriesFor(storage...) = %+v, %v", s, ok)
	}
}

func TestLoadMissingFile(t *testing.T) {
	_, err := Load("testdata/no-such-file.yaml")
	if !errors.Is(err, os.ErrNotExist) || !strings.Contains(err.Error(), "no-such-file.yaml") {
		t.Errorf("Load of a missing file: %v", err)
	}
}

// A file with many problems reports them all at once, in source order,
// formatted FILE:LINE:COL: path: message.
func TestManyProblemsAtOnce(t *testing.T) {
	_, err := Load("testdata/many-problems.yaml")
	if err == nil {
		t.Fatal("no error")
	}
	got := err.Error() + "\n"
	const golden = "testdata/many-problems.golden"
	if *update {
		if err := os.WriteFile(golden, []byte(got), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, rerr := os.ReadFile(golden)
	if rerr != nil {
		t.Fatal(rerr)
	}
	if got != string(want) {
		t.Errorf("got:\n%s\nwant:\n%s", got, want)
	}
	var e *Errors
	errors.As(err, &e)
	if len(e.Problems) < 20 {
		t.Errorf("only %d problems reported", len(e.Problems))
	}
	for i := 1; i < len(e.Problems); i++ {
		if e.Problems[i].Line < e.Problems[i-1].Line {
			t.Errorf("problems out of order at %d: %+v after %+v", i, e.Problems[i], e.Problems[i-1])
		}
	}
}

func TestErrorFormat(t *testing.T) {
	e := &Errors{File: "f.yaml", Problems: []Problem{
		{Line: 3, Column: 7, Path: "a.b", Msg: "bad"},
		{Line: 4, Msg: "syntax"},
		{Path: "c", Msg: "no position"},
	}}
	want := "f.yaml:3:7: a.b: bad\nf.yaml:4: syntax\nf.yaml: c: no position"
	if e.Error() != want {
		t.Errorf("got %q, want %q", e.Error(), want)
	}
	e.File = ""
	if got := e.Error(); got != "3:7: a.b: bad\n4: syntax\nc: no position" {
		t.Errorf("without a file: %q", got)
	}
}

// One case a rule: the source, then the one problem expected, by line,
// path and a part of its message.
func TestValidationRules(t *testing.T) {
	cases := []struct {
		name string
		src  string
		line int
		path string
		msg  string
	}{
		// decoding
		{"unknown top key", "nats: {}\nbogus: 1\n", 2, "bogus", "unknown key"},
		{"unknown key suggestion", "series:\n  - match: \">\"\n    horizn: 5\n", 3, "series[0].horizn", `did you mean "horizon"`},
		{"duplicate key", "log:\n  level: info\n  level: warn\n", 3, "log.level", "given twice"},
		{"section not a mapping", "nats: [1, 2]\n", 1, "nats", "expected a mapping"},
		{"string given a number", "nats:\n  password: 12345\n  url: nats://h:4222\n  user: u\n", 2, "nats.password", "put it in quotes"},
		{"bool given a word", "intake:\n  durable: yes\n", 2, "intake.durable", "expected true or false"},
		{"int given a float", "refit:\n  workers: 2.5\n", 2, "refit.workers", "whole number"},
		{"int too large", "limits:\n  max_series: 99999999999999\n", 2, "limits.max_series", "whole number"},
		{"duration bare number", "state:\n  flush_interval: 5\n", 2, "state.flush_interval", "has no unit"},
		{"duration garbage", "state:\n  flush_interval: soon\n", 2, "state.flush_interval", "is not a duration"},
		{"size garbage", "intake:\n  max_bytes: lots\n", 2, "intake.max_bytes", "expected a size"},
		{"size overflow", "intake:\n  max_bytes: 99999999TiB\n", 2, "intake.max_bytes", "expected a size"},
		{"number not finite", "alerts:\n  - {name: a, match: x.y, above: .inf, within: 1m, probability: 0.5}\n", 2, "alerts[0].above", "finite"},
		{"list given a scalar", "intake:\n  subjects: metrics.>\n", 2, "intake.subjects", "expected a list"},
		{"merge key", "base: &b {kind: gauge}\n", 1, "base", "unknown key"},
		{"merge key in series", "series:\n  - <<: {kind: gauge}\n    match: \">\"\n", 2, "series[0]", "merge keys"},
		{"second document", "log: {level: info}\n---\nlog: {level: warn}\n", 2, "", "second YAML document"},
		{"syntax", "nats:\n  url: [\n", 2, "", "YAML syntax"},
		// nats
		{"listen not host:port", "nats:\n  listen: localhost\n", 2, "nats.listen", "host:port"},
		{"listen bad port", "nats:\n  listen: \"127.0.0.1:99999\"\n", 2, "nats.listen", "0..65535"},
		{"url not a url", "nats:\n  url: \"just words\"\n", 2, "nats.url", "not a server URL"},
		{"url scheme", "nats:\n  url: \"http://h:4222\"\n", 2, "nats.url", "scheme"},
		{"password without user", "nats:\n  url: nats://h:4222\n  password: p\n", 3, "nats.password", "needs nats.user"},
		{"two auth methods", "nats:\n  url: nats://h:4222\n  token: t\n  creds_file: c.creds\n", 4, "nats.creds_file", "choose one"},
		{"cert without key", "nats:\n  url: tls://h:4222\n  tls: {cert_file: c.pem}\n", 3, "nats.tls.cert_file", "needs nats.tls.key_file"},
		{"credentials on embedded", "nats:\n  creds_file: c.creds\n", 2, "nats.creds_file", "external server"},
		{"sync_always on external", "nats:\n  url: nats://h:4222\n  sync_always: true\n", 3, "nats.sync_always", "embedded server only"},
		// intake, output
		{"subject without wildcard", "intake:\n  subjects: [metrics.cpu]\n", 2, "intake.subjects[0]", "literal tokens then a wildcard"},
		{"subject all wildcard", "intake:\n  subjects: [\">\"]\n", 2, "intake.subjects[0]", "literal tokens then a wildcard"},
		{"subject bad", "intake:\n  subjects: [\"metrics.>.x\"]\n", 2, "intake.subjects[0]", "last token"},
		{"subjects overlap", "intake:\n  subjects: [\"a.>\", \"a.*.b\"]\n", 2, "intake.subjects[1]", "overlaps intake.subjects[0]"},
		{"subject eats output", "intake:\n  subjects: [\"forewarn.>\"]\n", 2, "intake.subjects[0]", "own output"},
		{"stream name", "intake:\n  stream: \"my.stream\"\n", 2, "intake.stream", "contains one of"},
		{"consumer name", "intake:\n  consumer: \"a b\"\n", 2, "intake.consumer", "white space"},
		{"max_age negative", "intake:\n  max_age: -1h\n", 2, "intake.max_age", "positive"},
		{"max_age tiny", "intake:\n  max_age: 10ms\n", 2, "intake.max_age", "less than a second"},
		{"max_bytes below payload", "intake:\n  max_bytes: 1000\n", 2, "intake.max_bytes", "smaller than limits.max_payload_bytes"},
		{"prefix wildcard", "output:\n  prefix: \"fw.*\"\n", 2, "output.prefix", "wildcard"},
		{"replicas zero on cluster", "nats: {url: nats://h:4222}\nintake:\n  replicas: 7\n", 3, "intake.replicas", "outside 1..5"},
		{"replicas on embedded", "intake:\n  replicas: 3\n", 2, "intake.replicas", "need a NATS cluster"},
		// cluster
		{"partitions on embedded", "cluster:\n  partitions: 8\n", 2, "cluster.partitions", "embedded server runs no cluster routes"},
		{"partitions negative", "nats: {url: nats://h:4222}\ncluster:\n  partitions: -1\n", 3, "cluster.partitions", "outside 0..4096"},
		{"partitions plain intake", "nats: {url: nats://h:4222}\nintake: {durable: false}\ncluster:\n  partitions: 4\n", 4, "cluster.partitions", "intake.durable: true"},
		{"instance name", "cluster:\n  instance: \"a.b\"\n", 2, "cluster.instance", "letters, digits"},
		{"lease fraction", "cluster:\n  lease: 2500ms\n", 2, "cluster.lease", "whole number of seconds"},
		{"lease short", "cluster:\n  lease: 1s\n", 2, "cluster.lease", "outside 2s..1h"},
		{"snapshot_every negative", "cluster:\n  snapshot_every: -5s\n", 2, "cluster.snapshot_every", "positive"},
		{"snapshot_every long", "cluster:\n  snapshot_every: 48h\n", 2, "cluster.snapshot_every", "outside 1s..24h"},
		// state, http, log, refit, limits
		{"flush_interval long", "state:\n  flush_interval: 2h\n", 2, "state.flush_interval", "1ms..1h"},
		{"flush_max negative", "state:\n  flush_max: -1\n", 2, "state.flush_max", "outside 1..1000000"},
		{"http listen bad", "http:\n  listen: \"nowhere\"\n", 2, "http.listen", "host:port"},
		{"log level", "log:\n  level: verbose\n", 2, "log.level", "not one of debug"},
		{"log format", "log:\n  format: xml\n", 2, "log.format", "not one of auto"},
		{"workers negative", "refit:\n  workers: -2\n", 2, "refit.workers", "outside 0..1024"},
		{"max_series huge", "limits:\n  max_series: 20000000\n", 2, "limits.max_series", "outside"},
		{"max_payload huge", "limits:\n  max_payload_bytes: 1GiB\nintake: {max_bytes: 2GiB}\n", 2, "limits.max_payload_bytes", "outside"},
		{"max_batch negative", "limits:\n  max_batch: -5\n", 2, "limits.max_batch", "outside"},
		{"max_window huge", "limits:\n  max_window: 20000000\n", 2, "limits.max_window", "outside"},
		{"max_future negative", "limits:\n  max_future: -1s\n", 2, "limits.max_future", "positive"},
		// series
		{"series match bad", "series:\n  - match: \"a..b\"\n", 2, "series[0].match", "token 2 is empty"},
		{"series match wildcard inside", "series:\n  - match: \"a.b*\"\n", 2, "series[0].match", "whole token"},
		{"series shadowed", "series:\n  - match: \"a.>\"\n  - match: \"a.b.c\"\n", 3, "series[1].match", "never applies"},
		{"kind", "series:\n  - kind: rate\n", 2, "series[0].kind", "not one of auto, gauge, counter"},
		{"step fraction", "series:\n  - step: 1500ms\n", 2, "series[0].step", "whole number of seconds"},
		{"step negative", "series:\n  - step: -1m\n", 2, "series[0].step", "positive"},
		{"step too long", "series:\n  - step: 9000h\n", 2, "series[0].step", "more than"},
		{"horizon span", "series:\n  - {step: 8000h, horizon: 1000}\n", 2, "series[0].horizon", "100 years"},
		{"horizon large", "series:\n  - horizon: 1001\n", 2, "series[0].horizon", "outside 1..1000"},
		{"horizon negative", "series:\n  - horizon: -1\n", 2, "series[0].horizon", "outside 1..1000"},
		{"level 100", "series:\n  - levels: [80, 100]\n", 2, "series[0].levels", "outside (0, 100)"},
		{"level zero", "series:\n  - levels: [0.0, 95]\n", 2, "series[0].levels", "outside (0, 100)"},
		{"level duplicate", "series:\n  - levels: [95, 80, 95]\n", 2, "series[0].levels", "given twice"},
		{"too many levels", "series:\n  - levels: [1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11]\n", 2, "series[0].levels", "more than 10"},
		{"level not a number", "series:\n  - levels: [80, high]\n", 2, "series[0].levels[1]", "expected a number"},
		{"window below min_points", "series:\n  - {window: 40, min_points: 50}\n", 2, "series[0].window", "less than min_points"},
		{"window above max", "series:\n  - window: 50401\n", 2, "series[0].window", "more than limits.max_window"},
		{"min_points small", "series:\n  - min_points: 9\n", 2, "series[0].min_points", "less than 10"},
		{"refit_every negative", "series:\n  - refit_every: -1\n", 2, "series[0].refit_every", "less than 1"},
		{"model syntax", "series:\n  - model: \"ARMA(1,1)\"\n", 2, "series[0].model", `is not auto, "p,d,q" or "p,d,q x P,D,Q"`},
		{"model two orders", "series:\n  - model: \"1,1\"\n", 2, "series[0].model", "is not auto"},
		{"model two x", "series:\n  - {model: \"0,1,1 x 0,1,1 x 0,1,1\", seasons: [12]}\n", 2, "series[0].model", "is not auto"},
		{"model order", "series:\n  - model: \"11,0,0\"\n", 2, "series[0].model", "p and q are at most 10"},
		{"model d", "series:\n  - model: \"0,3,1\"\n", 2, "series[0].model", "d = 3: exceeds the limit of 2"},
		{"model D", "series:\n  - {model: \"0,1,1 x 0,2,1\", seasons: [12]}\n", 2, "series[0].model", "D = 2: exceeds the limit of 1"},
		{"model P", "series:\n  - {model: \"0,1,1 x 5,0,0\", seasons: [12]}\n", 2, "series[0].model", "P = 5: exceeds the limit of 4"},
		{"model needs points", "series:\n  - {model: \"1,1,1 x 1,1,1\", seasons: [168], window: 5000}\n", 2, "series[0].min_points", "needs at least 175"},
		{"seasonal model without seasons", "series:\n  - model: \"0,1,1 x 0,1,1\"\n", 2, "series[0].model", "give their cycle in seasons"},
		{"seasons with a plain model", "series:\n  - {model: \"1,1,1\", seasons: [1h]}\n", 2, "series[0].seasons", `1h0m0s, but model "1,1,1" has no seasonal orders`},
		{"old spelling", "series:\n  - model: \"ARIMA(1,1,1)(0,1,1)[12] with drift\"\n", 2, "series[0].model",
			`"ARIMA(1,1,1)(0,1,1)[12] with drift" is the old spelling; write`},
		{"old spelling plain", "series:\n  - model: \"ARIMA(1,1,1)\"\n", 2, "series[0].model", `is the old spelling; write model: "1,1,1"`},
		{"old spelling zero mean", "series:\n  - model: \"ARIMA(2,0,0) with zero mean\"\n", 2, "series[0].model", `write model: "2,0,0", constant: none`},
		{"old spelling seasonal", "series:\n  - model: \"ARIMA(0,1,1)(0,1,1)[24]\"\n", 2, "series[0].model", `write model: "0,1,1 x 0,1,1", seasons: [24]`},
		{"old spelling drift", "series:\n  - model: \"ARIMA(0,1,1) with drift\"\n", 2, "series[0].model", `write model: "0,1,1", constant: drift`},
		{"old spelling broken", "series:\n  - model: \"ARIMA(0,1,1)(0,1,1)\"\n", 2, "series[0].model", `is the old spelling; write model: "p,d,q" or "p,d,q x P,D,Q"`},
		{"period renamed", "series:\n  - period: 12\n", 2, "series[0].period", "was renamed: write seasons: [12]"},
		{"seasons not whole steps, fixed model", "series:\n  - {step: 7m, model: \"0,1,1 x 0,1,1\", seasons: [1d]}\n", 2, "series[0].seasons[0]", "1d is not a whole number of steps of 7m0s; model \"0,1,1 x 0,1,1\" needs a cycle of a whole number of steps"},
		{"seasons one step", "series:\n  - seasons: [1m]\n", 2, "series[0].seasons[0]", "1m0s is 1 step of 1m0s; a cycle needs at least 2"},
		{"seasons under two steps", "series:\n  - {step: 1m, seasons: [90s]}\n", 2, "series[0].seasons[0]", "1m30s is 1.5 step of 1m0s; a cycle needs at least 2"},
		{"seasons longer than the window", "series:\n  - {step: 1m, seasons: [1d, 7d], window: 5000}\n", 2, "series[0].seasons[1]", "7d is 10080 steps of 1m0s, longer than the window of 5000; make the window at least 10080"},
		{"seasons too long for seasonal orders", "series:\n  - {model: \"0,1,1 x 0,1,1\", seasons: [1d], window: 5000}\n", 2, "series[0].seasons[0]", "1d is 1440 steps, more than 1000 for the seasonal orders"},
		{"seasons two cycles with a fixed model", "series:\n  - {step: 1h, model: \"1,0,0 x 1,0,0\", seasons: [1d, 7d]}\n", 2, "series[0].seasons[1]", `7d: model "1,0,0 x 1,0,0" uses one cycle, the period of its seasonal orders`},
		{"outliers not a bool", "series:\n  - outliers: maybe\n", 2, "series[0].outliers", "expected"},
		{"seasons zero", "series:\n  - seasons: [0]\n", 2, "series[0].seasons[0]", "not a number of steps"},
		{"seasons garbage", "series:\n  - seasons: [daily]\n", 2, "series[0].seasons[0]", "is not a duration"},
		{"seasons float", "series:\n  - seasons: [1.5]\n", 2, "series[0].seasons[0]", "expected a cycle"},
		{"seasons negative", "series:\n  - seasons: [-1d]\n", 2, "series[0].seasons[0]", "not a positive duration"},
		{"seasons not a list", "series:\n  - seasons: 12\n", 2, "series[0].seasons", "expected a list"},
		{"constant word", "series:\n  - constant: yes\n", 2, "series[0].constant", "not one of auto, none, mean, drift"},
		{"constant with auto", "series:\n  - constant: drift\n", 2, "series[0].constant", "drift needs fixed orders in model"},
		{"constant mean differenced", "series:\n  - {model: \"0,1,1\", constant: mean}\n", 2, "series[0].constant", "a mean is only estimated when d+D = 0, here d+D = 1"},
		{"constant drift d=2", "series:\n  - {model: \"0,1,1 x 0,1,1\", seasons: [12], constant: drift}\n", 2, "series[0].constant", "here d+D = 2"},
		{"transform", "series:\n  - transform: sqrt\n", 2, "series[0].transform", "is not one of auto"},
		{"boxcox lambda", "series:\n  - transform: boxcox(3)\n", 2, "series[0].transform", "λ must be"},
		{"boxcox lambda nan", "series:\n  - transform: boxcox(NaN)\n", 2, "series[0].transform", "λ must be"},
		{"close_after negative", "series:\n  - close_after: -5s\n", 2, "series[0].close_after", "not be negative"},
		// alerts
		{"alert name missing", "alerts:\n  - {match: x.y, above: 1, within: 1m, probability: 0.5}\n", 2, "alerts[0].name", "required"},
		{"alert name chars", "alerts:\n  - {name: Disk, match: x.y, above: 1, within: 1m, probability: 0.5}\n", 2, "alerts[0].name", "a-z, 0-9"},
		{"alert name duplicate", "alerts:\n  - {name: a, match: x.y, above: 1, within: 1m, probability: 0.5}\n  - {name: a, match: x.z, above: 1, within: 1m, probability: 0.5}\n", 3, "alerts[1].name", "also the name of alerts[0]"},
		{"alert match missing", "alerts:\n  - {name: a, above: 1, within: 1m, probability: 0.5}\n", 2, "alerts[0].match", "required"},
		{"alert match bad", "alerts:\n  - {name: a, match: \">.x\", above: 1, within: 1m, probability: 0.5}\n", 2, "alerts[0].match", "last token"},
		{"alert no series", "series: [{match: \"shop.>\"}]\nalerts:\n  - {name: a, match: \"disk.*\", above: 1, within: 1m, probability: 0.5}\n", 3, "alerts[0].match", "no topic that a series entry matches"},
		{"alert no threshold", "alerts:\n  - {name: a, match: x.y, within: 1m, probability: 0.5}\n", 2, "alerts[0]", "needs a threshold"},
		{"alert both thresholds", "alerts:\n  - {name: a, match: x.y, above: 1, below: 0, within: 1m, probability: 0.5}\n", 2, "alerts[0].below", "not both"},
		{"alert within missing", "alerts:\n  - {name: a, match: x.y, above: 1, probability: 0.5}\n", 2, "alerts[0].within", "positive"},
		{"alert within beyond horizon", "alerts:\n  - {name: a, match: x.y, above: 1, within: 2h, probability: 0.5}\n", 2, "alerts[0].within", "beyond every matching series' horizon (at most 1h0m0s)"},
		{"alert probability zero", "alerts:\n  - {name: a, match: x.y, above: 1, within: 1m, probability: 0}\n", 2, "alerts[0].probability", "outside (0, 1]"},
		{"alert probability above 1", "alerts:\n  - {name: a, match: x.y, above: 1, within: 1m, probability: 1.01}\n", 2, "alerts[0].probability", "outside (0, 1]"},
		{"alert clear at raise", "alerts:\n  - {name: a, match: x.y, above: 1, within: 1m, probability: 0.5, clear_probability: 0.5}\n", 2, "alerts[0].clear_probability", "outside (0, probability 0.5)"},
		{"alert clear negative", "alerts:\n  - {name: a, match: x.y, above: 1, within: 1m, probability: 0.5, clear_probability: -0.1}\n", 2, "alerts[0].clear_probability", "outside"},
		{"alert resolve_probability renamed", "alerts:\n  - name: a\n    match: x.y\n    above: 1\n    within: 1m\n    probability: 0.5\n    resolve_probability: 0.2\n", 7, "alerts[0].resolve_probability", "was renamed: write clear_probability"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			probs := problemsOf(t, tc.src)
			if len(probs) != 1 {
				t.Fatalf("want 1 problem, got %d:\n%v", len(probs), (&Errors{Problems: probs}).Error())
			}
			p := probs[0]
			if p.Line != tc.line || p.Path != tc.path || !strings.Contains(p.Msg, tc.msg) {
				t.Errorf("got line %d path %q msg %q\nwant line %d path %q msg containing %q", p.Line, p.Path, p.Msg, tc.line, tc.path, tc.msg)
			}
		})
	}
}

// Values that look odd but are allowed.
func TestAccepted(t *testing.T) {
	for _, src := range []string{
		"series:\n  - close_after: 0\n",                                            // bare 0 is a duration
		"series:\n  - {horizon: 0, levels: []}\n",                                  // zero means default
		"http:\n  listen: \"\"\n",                                                  // empty disables
		"intake:\n  durable: false\n  stream: \"a.b\"\n",                           // names unused when not durable
		"series:\n  - {model: \" 1 , 1 , 1  x  0 , 1 , 1 \", seasons: [\"12\"]}\n", // spaces, steps as text
		"series:\n  - {model: \"0,1,1×0,1,1\", seasons: [1d], step: 1h}\n",         // ×, a day of hours
		"series:\n  - {model: \"0,1,1 x 0,1,1\", seasons: [24], min_points: 29}\n", // exactly enough points
		"series:\n  - {model: \"1,1,0\", constant: drift}\n",
		"series:\n  - {model: \"2,0,0\", constant: none}\n",
		"series:\n  - {seasons: [1w], step: 1h, constant: none}\n", // 168 steps
		"series:\n  - {seasons: [1.5d], step: 1h}\n",
		"limits: {max_window: 20160}\nseries:\n  - {seasons: [1d, 7d], step: 1m, window: 20160, outliers: false}\n", // two cycles, model auto
		"series:\n  - {seasons: [90.5m], step: 1m}\n",                                                               // not a whole number of steps, model auto
		"series:\n  - {seasons: [], model: \"1,0,0\"}\n",
		"series:\n  - transform: boxcox(-0.5)\n",
		"nats:\n  url: nats://h:4222\n  user: u\n  password: \"12345\"\n",
		"limits:\n  max_payload_bytes: \"1 MB\"\n",
		"series:\n  - &s {match: \">\", step: 5m}\n", // an unused anchor
	} {
		if _, err := Parse([]byte(src), "ok.yaml"); err != nil {
			t.Errorf("%q: %v", src, err)
		}
	}
}

func TestAliases(t *testing.T) {
	src := "x-common: &common\n  step: 5m\n"
	if _, err := Parse([]byte(src), ""); err == nil {
		t.Fatal("an unknown top-level key holding an anchor was accepted")
	}
	src = "series:\n  - &one {match: \"a.>\", step: 5m, levels: &lv [50, 90]}\n  - {match: \"b.>\", levels: *lv}\n  - match: \">\"\n"
	c, err := Parse([]byte(src), "")
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(c.Series[1].Levels, []float64{50, 90}) {
		t.Errorf("alias levels: %v", c.Series[1].Levels)
	}
}

func TestOverride(t *testing.T) {
	c, err := Load("testdata/minimal.yaml")
	if err != nil {
		t.Fatal(err)
	}
	url, dir, bad := "nats://10.0.0.5:4222", "/tmp/fw-data", "nowhere"
	d, err := c.Override(Overrides{NATSURL: &url, StateDir: &dir})
	if err != nil {
		t.Fatal(err)
	}
	if d.NATS.URL != url || d.State.Dir != dir || c.NATS.URL != "" {
		t.Errorf("override: %+v %+v (original %+v)", d.NATS, d.State, c.NATS)
	}
	_, err = c.Override(Overrides{HTTPListen: &bad})
	var e *Errors
	if !errors.As(err, &e) || len(e.Problems) != 1 || e.Problems[0].Line != 0 || e.Problems[0].Path != "http.listen" {
		t.Errorf("bad override: %v", err)
	}
}

func TestAlertCheckSeries(t *testing.T) {
	s := DefaultSeries() // 60 steps of 1m
	a := Alert{Name: "a", Within: time.Hour}
	if err := a.CheckSeries(&s); err != nil {
		t.Errorf("within = horizon·step: %v", err)
	}
	a.Within = time.Hour + time.Second
	if err := a.CheckSeries(&s); !errors.Is(err, ErrWithinBeyondHorizon) {
		t.Errorf("within beyond horizon·step: %v", err)
	}
}

func TestWorkerCount(t *testing.T) {
	if n := (Refit{Workers: 3}).WorkerCount(); n != 3 {
		t.Errorf("WorkerCount(3) = %d", n)
	}
	// Zero means one worker per CPU (the field's documented default).
	if n := (Refit{}).WorkerCount(); n != runtime.NumCPU() {
		t.Errorf("WorkerCount(0) = %d, want runtime.NumCPU() = %d", n, runtime.NumCPU())
	}
}

func BenchmarkParseFull(b *testing.B) {
	data, err := os.ReadFile("testdata/full.yaml")
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	for b.Loop() {
		if _, err := Parse(data, "full.yaml"); err != nil {
			b.Fatal(err)
		}
	}
}

// Entries added in Go before the file's (as the demo does) carry no
// position, and the file's entries keep their own lines.
func TestPositionsFollowMovedEntries(t *testing.T) {
	c, err := Parse([]byte("series:\n  - match: \"a.>\"\n  - match: \">\"\n    window: 30\n    min_points: 10\n"), "f.yaml")
	if err != nil {
		t.Fatal(err)
	}
	c.Series = append([]Series{{Match: "demo.>", Horizon: -1}}, c.Series...)
	c.Series[2].Window = 5
	var e *Errors
	if !errors.As(c.Validate(), &e) || len(e.Problems) != 2 {
		t.Fatalf("Validate: %v", c.Validate())
	}
	got := e.Error()
	want := "f.yaml:4:13: series[2].window: 5 is less than min_points 10\nf.yaml: series[0].horizon: -1 is outside 1..1000"
	if got != want {
		t.Errorf("got:\n%s\nwant:\n%s", got, want)
	}
}

// The cluster keys decode onto Cluster and Intake.Replicas (CONTRACT.md §2).
func TestClusterKeys(t *testing.T) {
	src := "nats: {url: \"nats://a:4222,nats://b:4222\"}\nintake: {replicas: 3}\n" +
		"cluster: {partitions: 8, instance: fw-1, lease: 4s, snapshot_every: 1m}\n"
	c, err := Parse([]byte(src), "c.yaml")
	if err != nil {
		t.Fatal(err)
	}
	want := Cluster{Partitions: 8, Instance: "fw-1", Lease: 4 * time.Second, SnapshotEvery: time.Minute}
	if c.Cluster != want || c.Intake.Replicas != 3 {
		t.Errorf("got %+v replicas %d, want %+v replicas 3", c.Cluster, c.Intake.Replicas, want)
	}
	if n, err := c.Cluster.InstanceName(); err != nil || n != "fw-1" {
		t.Errorf("InstanceName = %q, %v; want fw-1", n, err)
	}
	c.Cluster.Instance = ""
	n, err := c.Cluster.InstanceName()
	if err != nil {
		t.Fatal(err)
	}
	// The fallback must itself pass the rule for cluster.instance.
	if !instanceRE().MatchString(n) || len(n) > maxNameLen {
		t.Errorf("host-name fallback %q is not a valid instance name", n)
	}
}

// intake.loops decodes, is checked against its range with its key named,
// and LoopCount caps it by the partitions (a loop owns whole partitions;
// common practice: never fewer than one).
func TestIntakeLoops(t *testing.T) {
	c, err := Parse([]byte("intake: {loops: 3}\n"), "c.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if c.Intake.Loops != 3 {
		t.Errorf("loops %d, want 3", c.Intake.Loops)
	}
	_, err = Parse([]byte("intake: {loops: -1}\n"), "c.yaml")
	if err == nil || !strings.Contains(err.Error(), "intake.loops") {
		t.Errorf("loops -1: error %v, want one naming intake.loops", err)
	}
	for _, c := range []struct{ loops, procs, parts, want int }{
		{0, 2, 0, 1}, {0, 8, 4, 4}, {0, 2, 8, 2}, {3, 2, 0, 3}, {3, 2, 2, 2}, {0, 0, 0, 1}, {5, 1, 1, 1},
	} {
		if got := (Intake{Loops: c.loops}).LoopCount(c.procs, c.parts); got != c.want {
			t.Errorf("LoopCount(loops %d, procs %d, partitions %d) = %d, want %d", c.loops, c.procs, c.parts, got, c.want)
		}
	}
}

// calibrate defaults to true, reads true and false, and refuses anything
// else with the key's line (common practice: a YAML boolean key).
func TestSeriesCalibrate(t *testing.T) {
	for src, want := range map[string]bool{
		"series:\n  - match: \">\"\n":                       true,
		"series:\n  - match: \">\"\n    calibrate: true\n":  true,
		"series:\n  - match: \">\"\n    calibrate: false\n": false,
	} {
		c, err := Parse([]byte(src), "t.yaml")
		if err != nil {
			t.Fatalf("%q: %v", src, err)
		}
		if got := c.Series[0].Calibrated(); got != want {
			t.Errorf("%q: Calibrated() = %v, want %v", src, got, want)
		}
	}
	ps := problemsOf(t, "series:\n  - match: \">\"\n    calibrate: \"yes\"\n")
	if len(ps) != 1 || ps[0].Line != 3 || !strings.Contains(ps[0].Path, "calibrate") {
		t.Errorf("problems %+v, want one at line 3 naming calibrate", ps)
	}
}
