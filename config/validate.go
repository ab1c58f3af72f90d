package config

import (
	"errors"
	"fmt"
	"math"
	"net"
	"net/url"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"sync"
	"time"
	"unicode"
	"unicode/utf8"

	"forewarn/engine/arima"
)

// Bounds checked by Validate. They keep every input able to make the
// daemon hold only a bounded amount of memory.
const (
	MaxHorizon       = 1000
	MaxLevels        = 10
	MinMinPoints     = 10
	MaxSeriesLimit   = 10_000_000
	MaxPayloadLimit  = 64 << 20 // the bus's own largest payload setting
	MaxBatchLimit    = 1_000_000
	MaxWindowLimit   = 10_000_000
	MaxWorkers       = 1024
	maxStep          = 8760 * time.Hour
	maxHorizonSpan   = 100 * 8760 * time.Hour
	maxNameLen       = 64
	maxStreamNameLen = 255
	boxCoxMin        = -1.0 // Guerrero (1993) search interval, common practice
	boxCoxMax        = 2.0
	maxOrder         = 10 // p and q (P and Q: arima.MaxSeasonalOrder)
	// MaxPartitions bounds cluster.partitions: each partition is a lease
	// key and a consumer on the bus.
	MaxPartitions = 4096
	// MaxReplicas bounds intake.replicas, as JetStream does.
	MaxReplicas = 5
	// MaxLoops bounds intake.loops: more loops than cores only add
	// switching.
	MaxLoops = 256
)

// Validate reports every problem with c, as an *Errors, or nil. It checks
// c with its defaults filled in (WithDefaults), so a zero field is valid
// wherever it means a default. Problems carry the source position of the
// value when c came from Parse or Load.
func (c *Config) Validate() error {
	if probs := c.WithDefaults().validate(nil); len(probs) > 0 {
		return newErrors(c.file, probs, 0)
	}
	return nil
}

// Overrides are settings from the command line that replace the file's.
// A nil field leaves the file's value.
type Overrides struct {
	NATSURL    *string // --nats: nats.url
	NATSListen *string // --listen-nats: nats.listen
	HTTPListen *string // --http: http.listen
	StateDir   *string // --data: state.dir
}

// Override returns a copy of c with the overrides applied, validated.
// Problems with an overridden value carry no file position, since the
// value did not come from the file.
func (c *Config) Override(o Overrides) (*Config, error) {
	d := c.Clone()
	d.pos = make(map[string]position, len(c.pos))
	for k, v := range c.pos {
		d.pos[k] = v
	}
	set := func(dst *string, v *string, path string) {
		if v != nil {
			*dst = *v
			d.pos[path] = position{}
		}
	}
	set(&d.NATS.URL, o.NATSURL, "nats.url")
	set(&d.NATS.Listen, o.NATSListen, "nats.listen")
	set(&d.HTTP.Listen, o.HTTPListen, "http.listen")
	set(&d.State.Dir, o.StateDir, "state.dir")
	d = d.WithDefaults()
	if err := d.Validate(); err != nil {
		return nil, err
	}
	return d, nil
}

type validator struct {
	c      *Config
	failed map[string]bool
	probs  []Problem
}

// add records a problem at path, unless the value at path (or inside it)
// could not be decoded: that has been reported already.
func (v *validator) add(path, format string, args ...any) {
	if v.isFailed(path) {
		return
	}
	p := Problem{Path: path, Msg: fmt.Sprintf(format, args...)}
	for k := v.sourcePath(path); k != ""; k = parentPath(k) {
		if pos, ok := v.c.pos[k]; ok {
			p.Line, p.Column = pos.line, pos.col
			break
		}
	}
	v.probs = append(v.probs, p)
}

// sourcePath maps a path to the key its value had in the file. Entries
// of series and alerts may have been added, removed or moved in Go after
// Parse (the demo puts its own entries first); an entry is found in the
// file by its Line, and one with Line 0 has no position ("" is returned).
func (v *validator) sourcePath(path string) string {
	for _, list := range []string{"series", "alerts", "sources"} {
		rest, ok := strings.CutPrefix(path, list+"[")
		if !ok {
			continue
		}
		idx, tail, ok := strings.Cut(rest, "]")
		i, err := strconv.Atoi(idx)
		if !ok || err != nil {
			return path
		}
		line := 0
		if list == "series" && i < len(v.c.Series) {
			line = v.c.Series[i].Line
		} else if list == "alerts" && i < len(v.c.Alerts) {
			line = v.c.Alerts[i].Line
		} else if list == "sources" && i < len(v.c.Sources) {
			line = v.c.Sources[i].Line
		}
		if line == 0 {
			return ""
		}
		for k := 0; ; k++ {
			pos, ok := v.c.pos[fmt.Sprintf("%s[%d]", list, k)]
			if !ok {
				return ""
			}
			if pos.line == line {
				return fmt.Sprintf("%s[%d]%s", list, k, tail)
			}
		}
	}
	return path
}

// isFailed reports whether the value at path, or one inside it, could
// not be decoded.
func (v *validator) isFailed(path string) bool { return v.failed[path] }

// parentPath strips the last key or index: "a.b[2]" → "a.b" → "a" → "".
func parentPath(p string) string {
	i := strings.LastIndexAny(p, ".[")
	if i < 0 {
		return ""
	}
	return p[:i]
}

// validate checks a defaulted configuration.
func (c *Config) validate(failed map[string]bool) []Problem {
	v := &validator{c: c, failed: failed}
	v.nats()
	v.intake()
	if why := checkSubject(c.Output.Prefix, false); why != "" {
		v.add("output.prefix", "%q is not a valid subject prefix: %s", clip(c.Output.Prefix), why)
	}
	v.cluster()
	v.state()
	if c.HTTP.Listen != "" {
		v.hostPort("http.listen", c.HTTP.Listen)
	}
	v.oneOf("log.level", c.Log.Level, "debug", "info", "warn", "error")
	v.oneOf("log.format", c.Log.Format, "auto", "text", "json")
	v.intRange("refit.workers", c.Refit.Workers, 0, MaxWorkers)
	v.limits()
	for i := range c.Series {
		v.series(i)
	}
	names := map[string]int{}
	for i := range c.Alerts {
		v.alert(i, names)
	}
	srcNames := map[string]int{}
	for i := range c.Sources {
		v.source(i, srcNames)
	}
	return v.probs
}

// pattern reports whether s is a valid subject pattern, recording a
// problem if it is not.
func (v *validator) pattern(path, s string) bool {
	if why := checkSubject(s, true); why != "" {
		v.add(path, "%q is not a valid subject pattern: %s", clip(s), why)
		return false
	}
	return true
}

func (v *validator) oneOf(path, got string, allowed ...string) {
	for _, a := range allowed {
		if got == a {
			return
		}
	}
	v.add(path, "%q is not one of %s", clip(got), strings.Join(allowed, ", "))
}

func (v *validator) intRange(path string, got, lo, hi int) {
	if got < lo || got > hi {
		v.add(path, "%d is outside %d..%d", got, lo, hi)
	}
}

func (v *validator) positive(path string, d time.Duration) bool {
	if d <= 0 {
		v.add(path, "must be a positive duration, got %v", d)
		return false
	}
	return true
}

func (v *validator) hostPort(path, addr string) {
	_, port, err := net.SplitHostPort(addr)
	if err != nil {
		v.add(path, "%q is not an address of the form host:port", clip(addr))
		return
	}
	if n, err := strconv.Atoi(port); err != nil || n < 0 || n > 65535 {
		v.add(path, "port %q is not a number in 0..65535", clip(port))
	}
}

func (v *validator) nats() {
	n := &v.c.NATS
	v.hostPort("nats.listen", n.Listen)
	if n.URL != "" {
		for _, u := range strings.Split(n.URL, ",") {
			u = strings.TrimSpace(u)
			p, err := url.Parse(u)
			if err != nil || p.Host == "" || p.Hostname() == "" {
				v.add("nats.url", "%q is not a server URL such as nats://host:4222", clip(u))
				continue
			}
			if s := p.Scheme; s != "nats" && s != "tls" && s != "ws" && s != "wss" {
				v.add("nats.url", "scheme %q of %q is not one of nats, tls, ws, wss", clip(s), clip(u))
			}
		}
	}
	if n.URL != "" && n.SyncAlways {
		v.add("nats.sync_always", "applies to the embedded server only; an external server sets its own sync policy")
	}
	external := map[string]string{
		"nats.user": n.User, "nats.password": n.Password, "nats.token": n.Token,
		"nats.nkey_seed_file": n.NKeySeedFile, "nats.creds_file": n.CredsFile,
		"nats.tls.ca_file": n.TLS.CAFile, "nats.tls.cert_file": n.TLS.CertFile,
		"nats.tls.key_file": n.TLS.KeyFile, "nats.tls.server_name": n.TLS.ServerName,
	}
	if n.TLS.InsecureSkipVerify {
		external["nats.tls.insecure_skip_verify"] = "true"
	}
	if n.URL == "" {
		for _, k := range sortedKeys(external) {
			if external[k] != "" {
				v.add(k, "applies to an external server; set nats.url (the embedded server needs no credentials)")
			}
		}
		return
	}
	if (n.User == "") != (n.Password == "") && !v.isFailed("nats.user") && !v.isFailed("nats.password") {
		if n.User == "" {
			v.add("nats.password", "needs nats.user")
		} else {
			v.add("nats.user", "needs nats.password")
		}
	}
	var methods []string
	for _, m := range []struct{ path, val string }{
		{"nats.user", n.User}, {"nats.token", n.Token},
		{"nats.nkey_seed_file", n.NKeySeedFile}, {"nats.creds_file", n.CredsFile},
	} {
		if m.val != "" {
			if len(methods) > 0 {
				v.add(m.path, "cannot be used together with %s; choose one way to authenticate", methods[0])
			}
			methods = append(methods, m.path)
		}
	}
	if (n.TLS.CertFile == "") != (n.TLS.KeyFile == "") {
		if n.TLS.CertFile == "" {
			v.add("nats.tls.key_file", "needs nats.tls.cert_file")
		} else {
			v.add("nats.tls.cert_file", "needs nats.tls.key_file")
		}
	}
}

func sortedKeys(m map[string]string) []string {
	keys := make([]string, 0, len(m))
	for k := range m {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	return keys
}

func (v *validator) intake() {
	in := &v.c.Intake
	out := v.c.Output.Prefix + ".>"
	for i, s := range in.Subjects {
		path := fmt.Sprintf("intake.subjects[%d]", i)
		if !v.pattern(path, s) {
			continue
		}
		if pre := subjectPrefix(s); pre == "" || pre == s {
			v.add(path, "%q needs literal tokens then a wildcard, such as \"metrics.>\": the topic is what follows the literal prefix", s)
			continue
		}
		if patternsOverlap(s, out) {
			v.add(path, "%q overlaps forewarn's own output subjects %q", s, out)
		}
		for j := range i {
			if patternsOverlap(s, in.Subjects[j]) {
				v.add(path, "%q overlaps intake.subjects[%d] %q: a message would be taken twice", s, j, in.Subjects[j])
				break
			}
		}
	}
	if in.Durable {
		v.streamName("intake.stream", in.Stream)
		v.streamName("intake.consumer", in.Consumer)
	}
	if v.positive("intake.max_age", in.MaxAge) && in.MaxAge < time.Second {
		v.add("intake.max_age", "%v is less than a second", in.MaxAge)
	}
	v.intRange("intake.replicas", in.Replicas, 1, MaxReplicas)
	v.intRange("intake.loops", in.Loops, 0, MaxLoops)
	if in.Replicas > 1 && v.c.NATS.URL == "" {
		v.add("intake.replicas", "%d replicas need a NATS cluster; the embedded server is one server (set nats.url, or replicas: 1)", in.Replicas)
	}
	if in.MaxBytes <= 0 {
		v.add("intake.max_bytes", "must be positive, got %d", in.MaxBytes)
	} else if lim := int64(v.c.Limits.MaxPayloadBytes); in.MaxBytes < lim {
		v.add("intake.max_bytes", "%d is smaller than limits.max_payload_bytes %d", in.MaxBytes, lim)
	}
}

// streamName checks a JetStream stream or consumer name: printable, no
// white space, none of . * > / \ (they have meanings in subjects and paths).
func (v *validator) streamName(path, name string) {
	switch {
	case len(name) > maxStreamNameLen:
		v.add(path, "longer than %d bytes", maxStreamNameLen)
	case strings.ContainsAny(name, ".*>/\\"):
		v.add(path, "%q contains one of . * > / \\", clip(name))
	case strings.IndexFunc(name, func(r rune) bool { return unicode.IsSpace(r) || !unicode.IsPrint(r) }) >= 0:
		v.add(path, "%q contains white space or a non-printable character", clip(name))
	}
}

var instanceRE = lazyRegexp(`^[A-Za-z0-9_-]+$`)

func (v *validator) cluster() {
	c := &v.c.Cluster
	v.intRange("cluster.partitions", c.Partitions, 0, MaxPartitions)
	if c.Partitions > 0 {
		if v.c.NATS.URL == "" {
			v.add("cluster.partitions", "%d partitions need instances sharing a NATS cluster, but the embedded server runs no cluster routes; set nats.url to your cluster (or partitions: 0)", c.Partitions)
		}
		if !v.c.Intake.Durable {
			v.add("cluster.partitions", "partitions need the JetStream intake (intake.durable: true)")
		}
	}
	if c.Instance != "" && (len(c.Instance) > maxNameLen || !instanceRE().MatchString(c.Instance)) {
		v.add("cluster.instance", "%q is not a name of letters, digits, - and _ of at most %d bytes", clip(c.Instance), maxNameLen)
	}
	if v.positive("cluster.lease", c.Lease) {
		switch {
		case c.Lease%time.Second != 0:
			v.add("cluster.lease", "%v is not a whole number of seconds (the bus keeps per-key lifetimes in seconds)", c.Lease)
		case c.Lease < 2*time.Second || c.Lease > time.Hour:
			v.add("cluster.lease", "%v is outside 2s..1h", c.Lease)
		}
	}
	if v.positive("cluster.snapshot_every", c.SnapshotEvery) && (c.SnapshotEvery < time.Second || c.SnapshotEvery > 24*time.Hour) {
		v.add("cluster.snapshot_every", "%v is outside 1s..24h", c.SnapshotEvery)
	}
}

func (v *validator) state() {
	s := &v.c.State
	if v.positive("state.flush_interval", s.FlushInterval) && (s.FlushInterval < time.Millisecond || s.FlushInterval > time.Hour) {
		v.add("state.flush_interval", "%v is outside 1ms..1h", s.FlushInterval)
	}
	v.intRange("state.flush_max", s.FlushMax, 1, 1_000_000)
}

func (v *validator) limits() {
	l := &v.c.Limits
	v.intRange("limits.max_series", l.MaxSeries, 1, MaxSeriesLimit)
	v.intRange("limits.max_payload_bytes", l.MaxPayloadBytes, 1, MaxPayloadLimit)
	v.intRange("limits.max_batch", l.MaxBatch, 1, MaxBatchLimit)
	v.intRange("limits.max_window", l.MaxWindow, MinMinPoints, MaxWindowLimit)
	v.positive("limits.max_future", l.MaxFuture)
	v.positive("limits.max_past", l.MaxPast)
}

// The patterns are compiled on first use, not at package initialisation:
// the offline commands link this package but never validate a config.
var (
	boxCoxRE    = lazyRegexp(`^boxcox\(([^()]*)\)$`)
	alertNameRE = lazyRegexp(`^[a-z0-9_-]+$`)
)

// lazyRegexp returns a function that compiles expr on its first call and
// returns that one *regexp.Regexp ever after; safe for concurrent use.
func lazyRegexp(expr string) func() *regexp.Regexp {
	return sync.OnceValue(func() *regexp.Regexp { return regexp.MustCompile(expr) })
}

func (v *validator) series(i int) {
	s := &v.c.Series[i]
	p := fmt.Sprintf("series[%d]", i)
	if v.pattern(p+".match", s.Match) {
		for j := range i {
			if o := v.c.Series[j]; ValidPattern(o.Match) == nil && patternCovers(o.Match, s.Match) {
				v.add(p+".match", "never applies: series[%d] (match %q) comes first and takes every topic %q matches", j, o.Match, s.Match)
				break
			}
		}
	}
	v.oneOf(p+".kind", s.Kind, "auto", "gauge", "counter")
	if v.positive(p+".step", s.Step) {
		switch {
		case s.Step%time.Second != 0:
			v.add(p+".step", "%v is not a whole number of seconds", s.Step)
		case s.Step > maxStep:
			v.add(p+".step", "%v is more than %v", s.Step, maxStep)
		case float64(s.Horizon)*s.Step.Hours() > maxHorizonSpan.Hours():
			v.add(p+".horizon", "%d steps of %v reach more than 100 years ahead", s.Horizon, s.Step)
		}
	}
	v.intRange(p+".horizon", s.Horizon, 1, MaxHorizon)
	v.levels(p+".levels", s.Levels)
	if s.MinPoints < MinMinPoints {
		v.add(p+".min_points", "%d is less than %d", s.MinPoints, MinMinPoints)
	}
	switch {
	case s.Window < s.MinPoints:
		v.add(p+".window", "%d is less than min_points %d", s.Window, s.MinPoints)
	case s.Window > v.c.Limits.MaxWindow:
		v.add(p+".window", "%d is more than limits.max_window %d", s.Window, v.c.Limits.MaxWindow)
	}
	if s.RefitEvery < 1 {
		v.add(p+".refit_every", "%d is less than 1", s.RefitEvery)
	}
	v.seasons(p, s)
	v.model(p, s)
	v.transform(p+".transform", s.Transform)
	if s.CloseAfter < 0 {
		v.add(p+".close_after", "must not be negative, got %v", s.CloseAfter)
	}
}

func (v *validator) levels(path string, levels []float64) {
	if len(levels) > MaxLevels {
		v.add(path, "%d levels, more than %d", len(levels), MaxLevels)
	}
	for k, l := range levels {
		if !(l > 0 && l < 100) {
			v.add(path, "level %v is outside (0, 100); levels are percentages", l)
		}
		if k > 0 && levels[k-1] == l {
			v.add(path, "level %v is given twice", l)
		}
	}
}

// seasons checks the cycles: each at least two steps and at most the
// window (issue 12: a shorter cycle has no shape, a longer one is never
// seen whole in the window). With model auto there may be several and
// they need not be whole steps; a fixed model's seasonal orders take one
// cycle of a whole number of 2..arima.MaxPeriod steps (model checks that
// they are given at all).
func (v *validator) seasons(p string, s *Series) {
	fixed := s.Model != "auto"
	_, _, seasonal, _ := arima.ParseOrders(s.Model)
	stepOK := s.Step > 0 && s.Step%time.Second == 0
	for i, c := range s.Seasons {
		path := fmt.Sprintf("%s.seasons[%d]", p, i)
		if fixed && seasonal && i > 0 {
			v.add(path, "%v: model %q uses one cycle, the period of its seasonal orders; keep the first, %v, or use model: auto for several", c, s.Model, s.Seasons[0])
			continue
		}
		var steps float64
		if c.Length == 0 {
			steps = float64(c.Steps)
		} else if stepOK {
			steps = float64(c.Length) / float64(s.Step)
		} else {
			continue // the step's own problem is reported under step
		}
		switch {
		case steps < 2:
			v.add(path, "%v is %.4g step of %v; a cycle needs at least 2", c, steps, s.Step)
			continue
		case s.Window >= 2 && steps > float64(s.Window):
			v.add(path, "%v is %.6g steps of %v, longer than the window of %d; make the window at least %d or leave the cycle out", c, steps, s.Step, s.Window, int(math.Ceil(steps)))
			continue
		}
		if fixed && seasonal {
			n, err := c.InSteps(s.Step)
			switch {
			case err != nil:
				v.add(path, "%v; model %q needs a cycle of a whole number of steps (model: auto takes any)", err, s.Model)
			case n > arima.MaxPeriod:
				v.add(path, "%v is %d steps, more than %d for the seasonal orders of model %q; use model: auto (Fourier pairs)", c, n, arima.MaxPeriod, s.Model)
			}
		}
	}
}

// model checks the model and the constant together, names an old
// spelling's replacement, and checks that min_points leaves the
// differenced series longer than its coefficients (common practice: at
// least two observations more than coefficients after differencing).
func (v *validator) model(p string, s *Series) {
	path := p + ".model"
	constant, cerr := arima.ParseConstant(s.Constant)
	if cerr != nil {
		v.add(p+".constant", "%q is not one of auto, none, mean, drift", clip(s.Constant))
	}
	if s.Model == "auto" {
		if constant == arima.ConstantMean || constant == arima.ConstantDrift {
			v.add(p+".constant", "%s needs fixed orders in model (with model: auto the search chooses d and D); use auto or none", constant)
		}
		return
	}
	ord, sord, seasonal, err := arima.ParseOrders(s.Model)
	if err != nil {
		if old, ok := oldSpelling(s.Model); ok {
			v.add(path, "%q is the old spelling; write %s", clip(s.Model), old)
		} else {
			v.add(path, "%q is not auto, \"p,d,q\" or \"p,d,q x P,D,Q\"", clip(s.Model))
		}
		return
	}
	if max(ord[0], ord[2]) > maxOrder {
		v.add(path, "%q: p and q are at most %d", s.Model, maxOrder)
		return
	}
	period := 0
	switch {
	case seasonal && len(s.Seasons) == 0:
		v.add(path, "%q has seasonal orders; give their cycle in seasons, e.g. seasons: [1d] or [24]", s.Model)
		return
	case seasonal:
		if period = s.Period(); period == 0 || period > arima.MaxPeriod || len(s.Seasons) > 1 {
			return // the cycle's own problem is reported under seasons
		}
	case len(s.Seasons) > 0:
		v.add(p+".seasons", "%v, but model %q has no seasonal orders to use them; write model: auto (which chooses terms per cycle), model: \"%s x P,D,Q\" for one cycle, or leave seasons out", s.Seasons[0], s.Model, s.Model)
		return
	}
	if cerr != nil {
		return
	}
	spec, err := arima.NewSpec(ord, sord, period, constant)
	if err != nil {
		var se *arima.SpecError
		switch {
		case errors.As(err, &se) && (se.Field == "mean" || se.Field == "drift"):
			v.add(p+".constant", "%s with model %q: %s", constant, s.Model, se.Reason)
		case errors.As(err, &se):
			v.add(path, "%q: %s", s.Model, specReason(se))
		default:
			v.add(path, "%q: %v", s.Model, err)
		}
		return
	}
	need := spec.D + period*spec.SD + spec.NumParams() + 2
	if s.MinPoints >= MinMinPoints && s.MinPoints < need {
		v.add(p+".min_points", "%d is too few for model %q, which needs at least %d", s.MinPoints, s.Model, need)
	}
}

// specReason words a specification error without the package prefix.
func specReason(se *arima.SpecError) string {
	if se.Value == "" {
		return se.Field + ": " + se.Reason
	}
	return se.Field + " = " + se.Value + ": " + se.Reason
}

// oldSpelling returns the keys that replace a model written in forewarn's
// first spelling ("ARIMA(p,d,q)(P,D,Q)[s] with drift"), or ok false when
// m is not in that spelling.
func oldSpelling(m string) (replacement string, ok bool) {
	r, old := arima.LegacyReplacement(m)
	if !old {
		return "", false
	}
	if !r.Known {
		return `model: "p,d,q" or "p,d,q x P,D,Q", the period as seasons: [s], and constant: none, mean or drift`, true
	}
	out := fmt.Sprintf("model: %q", r.Orders)
	if r.Period > 0 {
		out += fmt.Sprintf(", seasons: [%d]", r.Period)
	}
	if r.Constant != "" {
		out += ", constant: " + r.Constant
	}
	return out, true
}

func (v *validator) transform(path, t string) {
	switch t {
	case "auto", "none", "log", "boxcox", "scaled-exp":
		return
	}
	m := boxCoxRE().FindStringSubmatch(t)
	if m == nil {
		v.add(path, "%q is not one of auto, none, log, boxcox, boxcox(λ), scaled-exp", clip(t))
		return
	}
	l, err := strconv.ParseFloat(m[1], 64)
	if err != nil || math.IsNaN(l) || l < boxCoxMin || l > boxCoxMax {
		v.add(path, "%q: λ must be a number in [%v, %v]", clip(t), boxCoxMin, boxCoxMax)
	}
}

func (v *validator) alert(i int, names map[string]int) {
	a := &v.c.Alerts[i]
	p := fmt.Sprintf("alerts[%d]", i)
	switch {
	case a.Name == "":
		v.add(p+".name", "required")
	case len(a.Name) > maxNameLen || !alertNameRE().MatchString(a.Name):
		v.add(p+".name", "%q must be 1..%d of a-z, 0-9, _ and -", clip(a.Name), maxNameLen)
	default:
		if j, dup := names[a.Name]; dup {
			v.add(p+".name", "%q is also the name of alerts[%d]", a.Name, j)
		} else {
			names[a.Name] = i
		}
	}
	validMatch := false
	if a.Match == "" {
		v.add(p+".match", "required")
	} else {
		validMatch = v.pattern(p+".match", a.Match)
	}
	switch {
	case a.Above == nil && a.Below == nil:
		v.add(p, "needs a threshold: above or below")
	case a.Above != nil && a.Below != nil:
		v.add(p+".below", "give either above or below, not both")
	}
	if v.positive(p+".within", a.Within) && validMatch {
		v.alertSeries(p, a)
	}
	if !(a.Probability > 0 && a.Probability <= 1) {
		v.add(p+".probability", "%v is outside (0, 1]", a.Probability)
	} else if !(a.ClearProbability > 0 && a.ClearProbability < a.Probability) {
		v.add(p+".clear_probability", "%v is outside (0, probability %v)", a.ClearProbability, a.Probability)
	}
}

// alertSeries checks that some series entry can reach the rule's topics
// and that the window fits the horizon of at least one of them. The
// daemon checks each series it applies the rule to.
func (v *validator) alertSeries(p string, a *Alert) {
	reach := false
	var longest time.Duration
	for _, s := range v.c.Series {
		if ValidPattern(s.Match) == nil && patternsOverlap(s.Match, a.Match) {
			reach = true
			if s.Horizon >= 1 && s.Horizon <= MaxHorizon && s.Step > 0 && s.Step <= maxStep {
				longest = max(longest, s.Span())
			}
		}
	}
	switch {
	case !reach:
		v.add(p+".match", "%q matches no topic that a series entry matches", a.Match)
	case longest > 0 && a.Within > longest:
		v.add(p+".within", "%v is beyond every matching series' horizon (at most %v)", a.Within, longest)
	}
}

// patternCovers reports whether every subject that matches b also matches a.
func patternCovers(a, b string) bool {
	for {
		at, arest, amore := strings.Cut(a, ".")
		bt, brest, bmore := strings.Cut(b, ".")
		if at == ">" && !amore {
			return true
		}
		if bt == ">" && !bmore {
			return false
		}
		if at != "*" && at != bt {
			return false
		}
		if amore != bmore {
			return false
		}
		if !amore {
			return true
		}
		a, b = arest, brest
	}
}

// Bounds of a source's settings.
const (
	minSourceEvery    = 100 * time.Millisecond
	maxSourceEvery    = 24 * time.Hour
	maxSourceBytes    = 1 << 30
	maxSourceNameLen  = 256
	maxSelectNameLen  = 1024
	maxSelectPerEntry = 10000
)

func (v *validator) source(i int, names map[string]int) {
	s := &v.c.Sources[i]
	p := fmt.Sprintf("sources[%d]", i)
	if s.OpenMetrics == "" {
		v.add(p+".openmetrics", "required: the endpoint's URL, such as http://127.0.0.1:9100/metrics")
	} else if u, err := url.Parse(s.OpenMetrics); err != nil || u.Host == "" || (u.Scheme != "http" && u.Scheme != "https") {
		v.add(p+".openmetrics", "%q is not an http or https URL with a host, such as http://127.0.0.1:9100/metrics", clip(s.OpenMetrics))
	}
	switch {
	case len(s.Name) > maxSourceNameLen:
		v.add(p+".name", "longer than %d bytes", maxSourceNameLen)
	case !utf8.ValidString(s.Name):
		v.add(p+".name", "not valid UTF-8")
	case s.Name != "":
		if j, dup := names[s.Name]; dup {
			v.add(p+".name", "%q is also the name of sources[%d]; give one of them another name", clip(s.Name), j)
		} else {
			names[s.Name] = i
		}
	}
	if s.Every < minSourceEvery || s.Every > maxSourceEvery {
		v.add(p+".every", "%v is outside %v..%v", s.Every, minSourceEvery, maxSourceEvery)
	}
	if s.Timeout <= 0 {
		v.add(p+".timeout", "must be a positive duration, got %v", s.Timeout)
	} else if s.Every >= minSourceEvery && s.Timeout > s.Every {
		v.add(p+".timeout", "%v is longer than every %v; a scrape must end before the next one is due", s.Timeout, s.Every)
	}
	if s.MaxBytes < 1 || s.MaxBytes > maxSourceBytes {
		v.add(p+".max_bytes", "%d is outside 1..%d bytes", s.MaxBytes, maxSourceBytes)
	}
	if len(s.Select) > maxSelectPerEntry {
		v.add(p+".select", "%d names, more than %d", len(s.Select), maxSelectPerEntry)
	}
	for k, n := range s.Select {
		if n == "" || len(n) > maxSelectNameLen || !utf8.ValidString(n) || strings.IndexFunc(n, unicode.IsSpace) >= 0 {
			v.add(fmt.Sprintf("%s.select[%d]", p, k), "%q is not a metric name (1..%d bytes of UTF-8 without white space)", clip(n), maxSelectNameLen)
		}
	}
	if s.TopicPrefix != "" {
		if why := checkSubject(s.TopicPrefix, false); why != "" {
			v.add(p+".topic_prefix", "%q is not a topic prefix: %s", clip(s.TopicPrefix), why)
		}
	}
	v.oneOf(p+".kind", s.Kind, "auto", "gauge", "counter")
}
