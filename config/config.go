package config

import (
	"errors"
	"fmt"
	"os"
	"runtime"
	"slices"
	"strings"
	"time"

	"forewarn/engine/arima"
)

// Config is the whole daemon configuration. The zero value is valid: every
// zero field means its default, except where a field's comment says what
// its zero value means instead. Load and Parse return a Config with the
// defaults already filled in; a Config built in Go gets them from
// WithDefaults.
type Config struct {
	NATS   NATS
	Intake Intake
	Output Output
	State  State
	HTTP   HTTP
	Log    Log
	Refit  Refit
	Limits Limits
	// Cluster says how several instances share the series on one NATS
	// cluster (package stream/cluster). Zero: one instance owns every
	// series.
	Cluster Cluster
	// Series holds the per-topic settings; the first entry whose Match
	// matches a topic applies to it. Empty: one entry matching ">" with
	// the values of DefaultSeries. A topic that no entry matches is not
	// forecast (end the list with a `match: ">"` entry for a catch-all).
	Series []Series
	// Alerts holds the alert rules; every rule whose Match matches a topic
	// applies to it. Empty: no alerts.
	Alerts []Alert
	// Sources are the OpenMetrics endpoints forewarn scrapes itself and
	// publishes to the intake (package stream/source). Empty: none.
	Sources []Source

	// pos maps a key path ("series[0].step") to where its value was in the
	// source; nil for a Config built in Go. Read-only once set.
	pos map[string]position
	// file is the name given to Parse, for messages from Validate.
	file string
}

type position struct{ line, col int }

// NATS says which bus to use and how to reach it.
type NATS struct {
	// URL of an external server (comma-separated for a cluster), e.g.
	// "nats://bus.example:4222". Zero: run an embedded server.
	URL string
	// Listen is the embedded server's address. Zero: "127.0.0.1:4222".
	Listen string
	// User and Password authenticate to an external server. Zero: none.
	User, Password string
	// Token authenticates to an external server. Zero: none.
	Token string
	// NKeySeedFile is a file holding an NKey seed. Zero: none.
	NKeySeedFile string
	// CredsFile is a credentials file (user JWT and NKey seed). Zero: none.
	CredsFile string
	// TLS configures TLS to an external server.
	TLS TLS
	// SyncAlways makes the embedded server fsync every JetStream write.
	// Zero (false): JetStream's periodic sync, which can lose the last
	// moments of acknowledged writes if the machine (not just the process)
	// fails.
	SyncAlways bool
}

// TLS holds the TLS settings for an external server. All zero: TLS only if
// the URL's scheme asks for it, with the system roots.
type TLS struct {
	CAFile     string // PEM roots to verify the server with. Zero: system roots.
	CertFile   string // PEM client certificate. Zero: none. Needs KeyFile.
	KeyFile    string // PEM client key. Zero: none. Needs CertFile.
	ServerName string // name to verify the certificate against. Zero: the URL's host.
	// InsecureSkipVerify turns off certificate verification (testing
	// only). Zero (false): verify.
	InsecureSkipVerify bool
}

// Intake says where observations come from.
type Intake struct {
	// Subjects are the subject patterns to consume. The topic of a message
	// is its subject less the pattern's prefix: the literal tokens before
	// the first wildcard ("metrics.>" → prefix "metrics.", so
	// "metrics.shop.orders" is topic "shop.orders"). Zero: ["metrics.>"].
	Subjects []string
	// Durable selects a JetStream stream with a durable consumer, so an
	// observation is acknowledged only once its effect is stored. The zero
	// value false selects a plain subscription (best effort: messages sent
	// while the daemon is down are lost). Default() sets true.
	Durable bool
	// Stream is the JetStream stream name. Zero: "FOREWARN_INTAKE".
	Stream string
	// Consumer is the durable consumer name. Zero: "forewarn".
	Consumer string
	// MaxAge is the stream's retention by age: older messages are removed
	// whether or not they were consumed. Zero: 168h (7 days).
	MaxAge time.Duration
	// MaxBytes is the stream's retention by size in bytes: the oldest
	// messages are removed beyond it. Zero: 1 GiB.
	MaxBytes int64
	// Replicas is how many servers of a NATS cluster hold the intake
	// stream and the cluster's buckets, 1..5 (3 on a three-node cluster).
	// Zero: 1.
	Replicas int
	// Loops is how many loop goroutines apply the intake's messages to
	// their series, 0..MaxLoops. Each loop owns a set of partitions
	// (cluster.partitions, or in single-instance mode as many internal
	// partitions as loops, by topic) with their series and their
	// flush/acknowledgement pipeline, so that one instance uses more than
	// one core. A series' results do not depend on the number. Zero:
	// GOMAXPROCS, at most cluster.partitions, in cluster mode; 1 without
	// partitions (LoopCount says why).
	Loops int
}

// Cluster configures several instances sharing the series of one intake
// stream on a NATS cluster (CONTRACT.md §2, key cluster).
type Cluster struct {
	// Partitions cuts the intake into this many partitions, 0..MaxPartitions;
	// each is owned by one live instance at a time. Zero: no partitions,
	// this instance owns every series (the single-instance mode).
	Partitions int
	// Instance is this instance's name, unique among the instances that
	// share the intake: letters, digits, - and _, at most 64 bytes. Zero:
	// the host name (see InstanceName).
	Instance string
	// Lease is how long a partition stays with an instance that stopped
	// renewing it, a whole number of seconds in 2s..1h. Zero: 10s.
	Lease time.Duration
	// SnapshotEvery is how often an owner stores its partitions' records on
	// the bus for a handover, 1s..24h. Zero: 30s.
	SnapshotEvery time.Duration
}

// Output says where forecasts, alerts and rejects go.
type Output struct {
	// Prefix of every subject forewarn publishes on
	// (<prefix>.forecast.<topic>, .alert., .reject., .query.). Zero: "forewarn".
	Prefix string
}

// State says where and how often series state is stored.
type State struct {
	// Dir holds the state database (and the embedded server's store).
	// Zero: "./forewarn-data".
	Dir string
	// FlushInterval is how often dirty series are written, all in one
	// transaction. Zero: 1s.
	FlushInterval time.Duration
	// FlushMax forces a write after this many applied messages, whichever
	// of the two comes first (a write already in flight defers it). It also
	// bounds how many messages a crash makes the stream redeliver. Zero:
	// 150000, under the durable intake's 200000 unacknowledged messages, so
	// that acknowledgements flow before the server stops delivering; at
	// rates below that many messages a second the interval decides.
	FlushMax int
}

// HTTP configures the health, metrics and chart listener.
type HTTP struct {
	// Listen is the address to serve on. The zero value "" turns the
	// listener off. Default() sets "127.0.0.1:8714" (loopback only).
	Listen string
}

// Log configures the daemon's log.
type Log struct {
	// Level is debug, info, warn or error. Zero: "info".
	Level string
	// Format is auto, text or json; auto is text on a terminal and json
	// otherwise. Zero: "auto".
	Format string
}

// Refit configures the background refits.
type Refit struct {
	// Workers bounds the number of refits running at once. Zero: the
	// number of CPUs.
	Workers int
}

// Limits bound what any input can make the daemon hold.
type Limits struct {
	// MaxSeries is the most series held; observations for further new
	// topics are rejected (too_many_series). Zero: 10000.
	MaxSeries int
	// MaxPayloadBytes is the largest payload accepted (too_large). Zero: 65536.
	MaxPayloadBytes int
	// MaxBatch is the most elements in one JSON array payload. Zero: 1000.
	MaxBatch int
	// MaxWindow is the largest Window a series entry may ask for. Zero: 50400
	// (five weeks at one minute: a weekly cycle with room for the automatic
	// choice's route holdout, which needs more than three longest cycles).
	MaxWindow int
	// MaxFuture: observations stamped further ahead of their arrival time
	// are rejected (bad_time). Zero: 24h.
	MaxFuture time.Duration
	// MaxPast: observations stamped further behind their arrival time are
	// rejected (bad_time). Zero: 8760h (365 days).
	MaxPast time.Duration
}

// Series holds the settings of the topics an entry matches.
type Series struct {
	// Match is a subject pattern over topics: "*" matches one token, ">"
	// one or more trailing tokens. Zero: ">".
	Match string
	// Kind is gauge (the last value in a bucket), counter (the last
	// value, with reset detection) or auto: the kind the series' first
	// message names in its Forewarn-Kind header (a source names counter
	// for a metric whose TYPE is counter), else gauge. An auto series
	// keeps the kind it began with, across restarts. Zero: "auto".
	Kind string
	// Step is the bucket width, a whole number of seconds. Zero: 1m.
	Step time.Duration
	// Horizon is the number of steps forecast, 1..1000. Zero: 60.
	Horizon int
	// Levels are the prediction-interval levels in percent, each in
	// (0, 100), distinct; sorted ascending by WithDefaults. Zero: [50, 90].
	Levels []float64
	// Window is the number of buckets kept for refits, at least MinPoints
	// and at most Limits.MaxWindow. Zero: 2000.
	Window int
	// MinPoints is the number of buckets before the first fit, at least
	// 10. Zero: 50.
	MinPoints int
	// RefitEvery is the number of closed buckets between refits. Zero: 60.
	RefitEvery int
	// Seasons are the seasonal cycles (key seasons): each a duration
	// ("1d", "7d", "12h", "90m"; d is 24h and w is 7·24h) or a whole
	// number of steps ("12"), of at least two steps and at most the
	// window. With Model auto there may be several, and a duration need
	// not be a whole number of steps: each refit chooses per cycle
	// seasonal ARIMA terms, Fourier pairs or nothing. A fixed Model with
	// seasonal orders takes one cycle, a whole number of 2..arima.MaxPeriod
	// steps, their period. Zero: no seasonal part.
	Seasons []Cycle
	// Model is "auto" or fixed orders "p,d,q" or "p,d,q x P,D,Q" (x or ×;
	// the seasonal orders need a cycle in Seasons). WithDefaults writes
	// fixed orders in the form "p,d,q x P,D,Q". Zero: "auto".
	Model string
	// Constant is the constant term: auto (a fixed Model gets a mean when
	// d+D = 0, nothing otherwise; model auto tries both), none, mean
	// (needs d+D = 0) or drift (needs d+D = 1); mean and drift need a
	// fixed Model. Zero: "auto".
	Constant string
	// Transform is auto, none, log, boxcox (λ chosen from the data),
	// boxcox(λ) with λ in [-1, 2], or scaled-exp. Zero: "auto".
	Transform string
	// CloseAfter closes a bucket after this much wall time without new
	// data. Zero: a bucket closes only when an observation of a later
	// bucket arrives.
	CloseAfter time.Duration
	// Calibrate (key calibrate) calibrates the series' bands and alert
	// probabilities online from the errors of its own forecasts
	// (CONTRACT §4, package engine/calibrate). Zero (nil): true.
	Calibrate *bool
	// Outliers (key outliers) runs the online spike and level-shift check
	// on every closed bucket (an extreme one-step error is kept out of
	// the model's state; a run of them moves the level) and has each
	// refit find additive outliers, level shifts and temporary changes in
	// the window and fit them as regression terms. Zero (nil): true.
	Outliers *bool
	// Line is the source line of the entry; 0 when not from a file.
	Line int
}

// Calibrated reports whether the entry calibrates its bands: Calibrate,
// true when unset.
func (s *Series) Calibrated() bool { return s.Calibrate == nil || *s.Calibrate }

// Robust reports whether the entry runs the spike and level-shift check
// and the refit-time outlier search: Outliers, true when unset.
func (s *Series) Robust() bool { return s.Outliers == nil || *s.Outliers }

// CycleSeconds returns the cycles of Seasons in seconds (a cycle given in
// steps counts Step for each).
func (s *Series) CycleSeconds() []float64 {
	var out []float64
	for _, c := range s.Seasons {
		if c.Length != 0 {
			out = append(out, c.Length.Seconds())
		} else {
			out = append(out, float64(c.Steps)*s.Step.Seconds())
		}
	}
	return out
}

// Alert is a rule that is raised when a topic's forecast is likely to
// cross a threshold within a look-ahead window, and cleared when that
// becomes unlikely (the alarm states of ITU-T X.733).
type Alert struct {
	// Name identifies the rule: [a-z0-9_-]+, at most 64 bytes, unique.
	Name string
	// Match is a subject pattern over topics, as for Series. Required.
	Match string
	// Above or Below is the threshold in raw units; exactly one is set.
	Above, Below *float64
	// Within is the look-ahead window, > 0. The daemon checks, per series,
	// that it does not exceed Horizon·Step.
	Within time.Duration
	// Probability raises the rule once the chance of crossing within the
	// window reaches it, in (0, 1]. Required.
	Probability float64
	// ClearProbability clears a raised rule once the chance falls below
	// it, in (0, Probability). Zero: Probability/2. Key
	// clear_probability; the old key resolve_probability is refused.
	ClearProbability float64
	// Line is the source line of the rule; 0 when not from a file.
	Line int
}

// Source is an OpenMetrics (or older text exposition) endpoint that
// forewarn scrapes every Every. Each selected sample becomes one
// observation, stamped with the scrape's time, on the intake subject of
// its topic (package stream/source documents the topic mapping).
type Source struct {
	// OpenMetrics is the endpoint's http or https URL. Required.
	OpenMetrics string
	// Name labels the source's metrics and log lines; unique. Zero: the
	// URL.
	Name string
	// Every is the time between scrapes, 100ms..24h. Zero: 15s.
	Every time.Duration
	// Timeout bounds one scrape, from connecting to the last byte, and is
	// at most Every. Zero: Every, at most 10s.
	Timeout time.Duration
	// MaxBytes bounds a response's body; a longer one is dropped whole
	// (cause too_large). Zero: 16 MiB.
	MaxBytes int64
	// Select lists the metric names taken, as they appear on sample lines
	// (node_cpu_seconds_total); a histogram's or summary's family name
	// selects its _bucket, _sum, _count and quantile samples. Zero: every
	// metric.
	Select []string
	// TopicPrefix is put before every topic of the source, one or more
	// tokens ("host1", "eu.host1"). Zero: none.
	TopicPrefix string
	// Kind is auto (counter for a metric whose TYPE is counter, and for a
	// histogram's or summary's _bucket, _sum and _count; gauge otherwise),
	// gauge or counter (every sample of the source). It reaches a series
	// whose entry says kind: auto; an entry with a kind of its own wins.
	// Zero: "auto".
	Kind string
	// Line is the source line of the entry; 0 when not from a file.
	Line int
}

// Source defaults.
const (
	DefaultSourceEvery    = 15 * time.Second
	MaxSourceTimeout      = 10 * time.Second // the default Timeout's ceiling
	DefaultSourceMaxBytes = 16 << 20
)

// TimeoutOrDefault returns Timeout, or Every capped at MaxSourceTimeout
// when Timeout is zero.
func (s *Source) TimeoutOrDefault() time.Duration {
	if s.Timeout > 0 {
		return s.Timeout
	}
	return min(s.Every, MaxSourceTimeout)
}

// LoopCount returns the number of loops for gomaxprocs usable cores:
// Loops; when Loops is zero, gomaxprocs in cluster mode (partitions > 0)
// and 1 otherwise; never more than partitions when partitions > 0 (a loop
// owns whole partitions), never less than 1.
//
// Several loops are opt-in without partitions: the loops create their
// series concurrently, so once limits.max_series is reached which of
// several new topics arriving together is refused depends on the order
// the loops reach them (one loop refuses them in stream order). In
// cluster mode that order is already the partitions' consumers', not the
// stream's.
func (in Intake) LoopCount(gomaxprocs, partitions int) int {
	n := in.Loops
	if n <= 0 {
		n = 1
		if partitions > 0 {
			n = gomaxprocs
		}
	}
	if partitions > 0 {
		n = min(n, partitions)
	}
	return max(n, 1)
}

// WorkerCount returns the number of refit workers: Workers, or the number
// of CPUs when Workers is zero.
func (r Refit) WorkerCount() int {
	if r.Workers > 0 {
		return r.Workers
	}
	return runtime.NumCPU()
}

// Span returns how far ahead the series is forecast: Horizon·Step.
func (s *Series) Span() time.Duration {
	return time.Duration(s.Horizon) * s.Step
}

// CheckSeries returns nil if the rule can be evaluated on a series with
// settings s, or an error wrapping ErrWithinBeyondHorizon when the rule's
// window reaches further than the series is forecast.
func (a *Alert) CheckSeries(s *Series) error {
	if a.Within > s.Span() {
		return fmt.Errorf("%w: rule %q looks %v ahead, series entry %q forecasts %d steps of %v (%v)",
			ErrWithinBeyondHorizon, a.Name, a.Within, s.Match, s.Horizon, s.Step, s.Span())
	}
	return nil
}

// Threshold returns the rule's threshold and whether it is an "above" rule.
func (a *Alert) Threshold() (value float64, above bool) {
	if a.Above != nil {
		return *a.Above, true
	}
	if a.Below != nil {
		return *a.Below, false
	}
	return 0, true
}

// DefaultSeries returns the settings of the default series entry
// (match ">"). Each call returns a new value.
func DefaultSeries() Series {
	return Series{
		Match:      ">",
		Kind:       "auto",
		Step:       time.Minute,
		Horizon:    60,
		Levels:     []float64{50, 90},
		Window:     2000,
		MinPoints:  50,
		RefitEvery: 60,
		Model:      "auto",
		Constant:   "auto",
		Transform:  "auto",
		Calibrate:  new(true),
		Outliers:   new(true),
	}
}

// Default returns the default configuration. Each call returns a new value
// that the caller may change.
func Default() *Config {
	return &Config{
		NATS: NATS{Listen: "127.0.0.1:4222"},
		Intake: Intake{
			Subjects: []string{"metrics.>"},
			Durable:  true,
			Stream:   "FOREWARN_INTAKE",
			Consumer: "forewarn",
			MaxAge:   168 * time.Hour,
			MaxBytes: 1 << 30,
			Replicas: 1,
		},
		Cluster: Cluster{Lease: 10 * time.Second, SnapshotEvery: 30 * time.Second},
		Output:  Output{Prefix: "forewarn"},
		State:   State{Dir: "./forewarn-data", FlushInterval: time.Second, FlushMax: 150000},
		HTTP:    HTTP{Listen: "127.0.0.1:8714"},
		Log:     Log{Level: "info", Format: "auto"},
		Limits:  DefaultLimits(),
		Series:  []Series{DefaultSeries()},
	}
}

// DefaultLimits returns the default limits, those of Default. They are
// also the defaults of the payload limits of package stream
// (stream.DefaultLimits).
func DefaultLimits() Limits {
	return Limits{
		MaxSeries:       10000,
		MaxPayloadBytes: 65536,
		MaxBatch:        1000,
		MaxWindow:       50400,
		MaxFuture:       24 * time.Hour,
		MaxPast:         8760 * time.Hour,
	}
}

// Clone returns a deep copy of c.
func (c *Config) Clone() *Config {
	d := *c
	d.Intake.Subjects = slices.Clone(c.Intake.Subjects)
	d.Series = slices.Clone(c.Series)
	for i := range d.Series {
		d.Series[i].Levels = slices.Clone(d.Series[i].Levels)
		d.Series[i].Seasons = slices.Clone(d.Series[i].Seasons)
	}
	d.Alerts = slices.Clone(c.Alerts)
	for i := range d.Alerts {
		d.Alerts[i].Above = clonePtr(d.Alerts[i].Above)
		d.Alerts[i].Below = clonePtr(d.Alerts[i].Below)
	}
	d.Sources = slices.Clone(c.Sources)
	for i := range d.Sources {
		d.Sources[i].Select = slices.Clone(d.Sources[i].Select)
	}
	return &d
}

func clonePtr(p *float64) *float64 {
	if p == nil {
		return nil
	}
	v := *p
	return &v
}

// WithDefaults returns a copy of c with every zero field that means a
// default set to that default, the series levels sorted, and fixed model
// orders written as "p,d,q" or "p,d,q x P,D,Q". c is not changed.
func (c *Config) WithDefaults() *Config {
	d := c.Clone()
	def := Default()
	setZero(&d.NATS.Listen, def.NATS.Listen)
	if len(d.Intake.Subjects) == 0 {
		d.Intake.Subjects = def.Intake.Subjects
	}
	setZero(&d.Intake.Stream, def.Intake.Stream)
	setZero(&d.Intake.Consumer, def.Intake.Consumer)
	setZero(&d.Intake.MaxAge, def.Intake.MaxAge)
	setZero(&d.Intake.MaxBytes, def.Intake.MaxBytes)
	setZero(&d.Intake.Replicas, def.Intake.Replicas)
	setZero(&d.Cluster.Lease, def.Cluster.Lease)
	setZero(&d.Cluster.SnapshotEvery, def.Cluster.SnapshotEvery)
	setZero(&d.Output.Prefix, def.Output.Prefix)
	setZero(&d.State.Dir, def.State.Dir)
	setZero(&d.State.FlushInterval, def.State.FlushInterval)
	setZero(&d.State.FlushMax, def.State.FlushMax)
	setZero(&d.Log.Level, def.Log.Level)
	setZero(&d.Log.Format, def.Log.Format)
	l, dl := &d.Limits, def.Limits
	setZero(&l.MaxSeries, dl.MaxSeries)
	setZero(&l.MaxPayloadBytes, dl.MaxPayloadBytes)
	setZero(&l.MaxBatch, dl.MaxBatch)
	setZero(&l.MaxWindow, dl.MaxWindow)
	setZero(&l.MaxFuture, dl.MaxFuture)
	setZero(&l.MaxPast, dl.MaxPast)
	if len(d.Series) == 0 {
		d.Series = def.Series
	}
	for i := range d.Series {
		d.Series[i].fillDefaults()
	}
	for i := range d.Alerts {
		a := &d.Alerts[i]
		setZero(&a.ClearProbability, a.Probability/2)
	}
	for i := range d.Sources {
		s := &d.Sources[i]
		s.OpenMetrics = strings.TrimSpace(s.OpenMetrics)
		setZero(&s.Name, s.OpenMetrics)
		setZero(&s.Every, DefaultSourceEvery)
		setZero(&s.Timeout, s.TimeoutOrDefault())
		setZero(&s.MaxBytes, DefaultSourceMaxBytes)
		setZero(&s.Kind, "auto")
	}
	return d
}

func (s *Series) fillDefaults() {
	ds := DefaultSeries()
	setZero(&s.Match, ds.Match)
	setZero(&s.Kind, ds.Kind)
	setZero(&s.Step, ds.Step)
	setZero(&s.Horizon, ds.Horizon)
	if len(s.Levels) == 0 {
		s.Levels = ds.Levels
	}
	slices.Sort(s.Levels)
	setZero(&s.Window, ds.Window)
	setZero(&s.MinPoints, ds.MinPoints)
	setZero(&s.RefitEvery, ds.RefitEvery)
	s.Model = canonicalModel(s.Model)
	setZero(&s.Model, ds.Model)
	s.Constant = strings.TrimSpace(s.Constant)
	setZero(&s.Constant, ds.Constant)
	setZero(&s.Transform, ds.Transform)
	s.Transform = stripSpaces(s.Transform)
	if s.Calibrate == nil {
		s.Calibrate = new(true)
	}
	if s.Outliers == nil {
		s.Outliers = new(true)
	}
}

// canonicalModel writes fixed orders that arima.ParseOrders reads as
// "p,d,q" or "p,d,q x P,D,Q"; anything else is returned trimmed of white
// space, for Validate to report.
func canonicalModel(m string) string {
	m = strings.TrimSpace(m)
	ord, sord, seasonal, err := arima.ParseOrders(m)
	if err != nil {
		return m
	}
	out := fmt.Sprintf("%d,%d,%d", ord[0], ord[1], ord[2])
	if seasonal {
		out += fmt.Sprintf(" x %d,%d,%d", sord[0], sord[1], sord[2])
	}
	return out
}

// Period returns the first cycle of Seasons in steps, or 0 when there is
// none or it is not a whole number of at least 2 steps (Validate reports
// that).
func (s *Series) Period() int {
	if len(s.Seasons) == 0 {
		return 0
	}
	n, err := s.Seasons[0].InSteps(s.Step)
	if err != nil || n < 2 {
		return 0
	}
	return n
}

// setZero sets *p to def when *p is the zero value of its type.
func setZero[T comparable](p *T, def T) {
	var zero T
	if *p == zero {
		*p = def
	}
}

// stripSpaces removes every white-space character from s.
func stripSpaces(s string) string {
	return strings.Join(strings.Fields(s), "")
}

// InstanceName returns Instance, or when it is empty the host name cut at
// its first dot, with every character other than a letter, a digit, - or _
// replaced by _ and at most 64 bytes long, so that it can be part of a
// key and a consumer name on the bus.
func (c Cluster) InstanceName() (string, error) {
	if c.Instance != "" {
		return c.Instance, nil
	}
	h, err := os.Hostname()
	if err != nil {
		return "", fmt.Errorf("config: cluster.instance is empty and the host name is unknown (%w); set cluster.instance", err)
	}
	h, _, _ = strings.Cut(h, ".")
	b := []byte(h)
	for i, ch := range b {
		if !(ch >= 'a' && ch <= 'z' || ch >= 'A' && ch <= 'Z' || ch >= '0' && ch <= '9' || ch == '-' || ch == '_') {
			b[i] = '_'
		}
	}
	if len(b) > maxNameLen {
		b = b[:maxNameLen]
	}
	if len(b) == 0 {
		return "", errors.New("config: cluster.instance is empty and so is the host name; set cluster.instance")
	}
	return string(b), nil
}
