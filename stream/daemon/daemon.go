package daemon

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"math"
	"slices"
	"time"

	"github.com/nats-io/nats.go"

	"forewarn/config"
	"forewarn/engine/series"
	"forewarn/state"
	"forewarn/stream"
)

// Options are the parts a Daemon runs on. Config, Conn and Store are
// required.
type Options struct {
	// Config's zero fields take their defaults (config.Config.WithDefaults).
	Config *config.Config
	Conn   *nats.Conn
	Store  *state.Store
	Logger *slog.Logger
	// Intake is where the messages come from. Nil means a stream.Intake
	// on Conn, as Config.Intake describes it, or with
	// Config.Cluster.Partitions > 0 a stream.PartitionedIntake
	// (stream.NewClusterIntake), whose OwnsTopic becomes Owns.
	Intake Intake
	// Owns says whether this instance answers queries for a topic (cluster
	// mode: it owns the topic's partition, stream.PartitionedIntake's
	// OwnsTopic); for another topic it stays silent, so that the owner's
	// answer is the one a requester gets. Nil: every topic.
	Owns func(topic string) bool
	// Now is the wall clock, for arrival stamps and "issued" times.
	// Nil means time.Now.
	Now func() time.Time
	// OnForecast and OnAlert, when set, are called on the loop goroutine
	// after each publication (the demo prints lines from them). They must
	// not block and must not keep the values.
	OnForecast func(f *series.Forecast)
	OnAlert    func(e *series.AlertEvent)
}

// Daemon ties the intake, the series, the state store and the publisher
// together. Its loop goroutine routes messages to the series, which it
// owns (loop.go); the parts it drives each own their goroutines: the
// refit pool (refits.go), the alert pool (alerts.go), the encoder and
// publisher (publisher.go) and the writer and acknowledger (flusher.go).
// doc.go gives the ownership and the lock order.
type Daemon struct {
	opt     Options
	cfg     *config.Config
	log     *slog.Logger
	now     func() time.Time
	store   *state.Store
	intake  Intake
	limits  stream.Limits
	metrics *Metrics

	refits  *refitPool
	alerts  *alertPool
	pub     *publisher
	flusher *flusher

	batches chan []stream.Message // intake → loop
	handled chan struct{}         // loop → intake: the batch is applied
	inspect chan func()

	// Loop-owned.
	series   map[string]*entry
	pending  int      // observations held back behind refits, all series
	due      []string // restored series whose refit was in flight at the last save
	obsBuf   []stream.Observation
	lastSeq  uint64 // highest stream position handled
	stopping bool   // shutdown: finished jobs no longer release held observations

	ready chan struct{}
	done  chan struct{} // closed when Run returns

	handover *handover // cluster mode with snapshots (partitioned.go); nil otherwise
}

// New builds a daemon; Run starts it.
func New(o Options) (*Daemon, error) {
	if o.Config == nil || o.Conn == nil || o.Store == nil {
		return nil, errors.New("daemon: Config, Conn and Store are required")
	}
	if o.Logger == nil {
		o.Logger = slog.Default()
	}
	if o.Now == nil {
		o.Now = time.Now
	}
	c := o.Config.WithDefaults()
	in := o.Intake
	var pi *stream.PartitionedIntake // issue 15: cluster mode, for the handover (partitioned.go)
	if in == nil && c.Cluster.Partitions > 0 {
		// Cluster mode: this instance consumes the partitions it owns.
		var err error
		pi, err = stream.NewClusterIntake(o.Conn, c, o.Logger)
		if err != nil {
			return nil, err
		}
		in = pi
		if o.Owns == nil {
			o.Owns = pi.OwnsTopic
		}
	}
	if in == nil {
		si, err := stream.NewIntake(o.Conn, stream.IntakeOptions{
			Subjects: c.Intake.Subjects,
			Durable:  c.Intake.Durable,
			Stream:   c.Intake.Stream,
			Consumer: c.Intake.Consumer,
			MaxAge:   c.Intake.MaxAge,
			MaxBytes: c.Intake.MaxBytes,
			Replicas: c.Intake.Replicas,
		})
		if err != nil {
			return nil, err
		}
		in = si
	}
	maxH := 1
	for _, s := range c.Series {
		maxH = max(maxH, s.Horizon)
	}
	alerts, err := newAlertPool(maxH)
	if err != nil {
		return nil, err
	}
	m := NewMetrics()
	d := &Daemon{
		opt:     o,
		cfg:     c,
		log:     o.Logger,
		now:     o.Now,
		store:   o.Store,
		intake:  in,
		limits:  stream.LimitsOf(c.Limits),
		metrics: m,
		refits:  newRefitPool(),
		alerts:  alerts,
		pub:     newPublisher(o.Conn, c.Output.Prefix, o.Logger, m),
		flusher: newFlusher(o.Store, in, o.Logger, m),
		batches: make(chan []stream.Message),
		handled: make(chan struct{}),
		inspect: make(chan func()),
		series:  make(map[string]*entry),
		ready:   make(chan struct{}),
		done:    make(chan struct{}),
	}
	if pi != nil { // issue 15: snapshots for handover (partitioned.go)
		if err := d.enableHandover(pi); err != nil {
			return nil, err
		}
	}
	return d, nil
}

// Metrics returns the daemon's metrics, for the HTTP endpoint.
func (d *Daemon) Metrics() *Metrics { return d.metrics }

// Ready is closed once the state is loaded and intake runs.
func (d *Daemon) Ready() <-chan struct{} { return d.ready }

// Latest returns a copy of the latest forecast message of topic. Safe for
// concurrent use.
func (d *Daemon) Latest(topic string) ([]byte, bool) { return d.pub.Latest(topic) }

// Inspect runs fn on the loop goroutine, where it may read (not keep) the
// series; it returns false when the daemon is not running (or stops) or
// ctx ends first.
func (d *Daemon) Inspect(ctx context.Context, fn func(all map[string]*Entry)) bool {
	done := make(chan struct{})
	f := func() {
		defer close(done)
		view := make(map[string]*Entry, len(d.series))
		for k, e := range d.series {
			view[k] = &Entry{e: e}
		}
		fn(view)
	}
	select {
	case d.inspect <- f:
	case <-ctx.Done():
		return false
	case <-d.done:
		return false
	}
	<-done
	return true
}

// Run loads the state, starts the refit workers, the intake and the query
// responder, and processes messages until ctx is cancelled. It then stops
// the intake, finishes refits in flight, applies what waited on them,
// writes the state and acknowledges it.
func (d *Daemon) Run(ctx context.Context) error {
	defer close(d.done)
	if err := d.load(); err != nil {
		return err
	}
	d.refits.start(d.cfg.Refit.WorkerCount())
	if err := d.alerts.start(alertWorkers()); err != nil {
		d.refits.stop()
		return err
	}
	stopWorkers := func() {
		d.refits.stop()
		d.alerts.stop()
	}
	sub, err := stream.ServeQueriesOwned(d.opt.Conn, d.cfg.Output.Prefix, d.opt.Owns, d.Latest)
	if err != nil {
		stopWorkers()
		return err
	}
	d.flusher.start()
	d.pub.start()
	defer sub.Unsubscribe()

	intakeCtx, stopIntake := context.WithCancel(context.Background())
	intakeErr := make(chan error, 1)
	go func() {
		intakeErr <- d.intake.Run(intakeCtx, func(batch []stream.Message) {
			select {
			case d.batches <- batch:
				<-d.handled
			case <-intakeCtx.Done():
			}
		})
	}()
	for _, t := range d.due {
		d.outcome(t, d.series[t], series.NeedFit)
	}
	d.due = nil
	// Ready once the intake is on the server, so that nothing published
	// after Ready is missed (plain mode has no replay).
	select {
	case <-d.intake.Subscribed():
	case err := <-intakeErr:
		stopIntake()
		stopWorkers()
		d.pub.stop()
		d.flusher.stop()
		d.leave() // issue 15: the Owner may have started
		if err == nil {
			err = errors.New("daemon: intake stopped before it subscribed")
		}
		return err
	case <-ctx.Done():
	}
	close(d.ready)

	ended, runErr := d.loop(ctx, intakeErr)
	if ended {
		intakeErr = nil
	}

	// Shutdown: stop intake first (a batch in hand is still handled), then
	// finish the refits in flight, then persist and acknowledge.
	stopIntake()
	for intakeErr != nil {
		select {
		case batch := <-d.batches:
			d.handleBatch(batch)
			d.handled <- struct{}{}
		case err := <-intakeErr:
			if err != nil && !errors.Is(err, context.Canceled) && runErr == nil {
				runErr = err
			}
			intakeErr = nil
		}
	}
	// From here a finished alert evaluation no longer releases the
	// observations held behind it: they stay unapplied, unstored and
	// unacknowledged (a durable stream redelivers them), so the work left
	// is at most the evaluations already queued, one per series.
	d.stopping = true
	for d.refits.busy > 0 || d.alerts.alerting > 0 {
		d.jobStep()
	}
	stopWorkers()
	d.pub.stop()
	d.syncFlush()
	d.leave() // issue 15: final snapshots at the acknowledged floors, then the leases go
	d.flusher.stop()
	d.pub.flush()
	return runErr
}

// load restores every persisted series. A record that cannot be read
// affects only its own series, which starts afresh (and, with a durable
// intake, is rebuilt from what the stream still holds); the record is set
// aside first, so that the fresh series' first flush does not overwrite
// it. So is a record of another kind or step than the config now gives.
func (d *Daemon) load() error {
	err := d.store.LoadAll(func(topic string, snap *series.Snapshot, err error) error {
		if err != nil {
			d.log.Warn("state record unreadable; set aside, and the series starts afresh", "topic", topic, "err", err)
			d.metrics.StateResets.Inc()
			d.setAside(topic)
			return nil
		}
		sc, ok := d.cfg.SeriesFor(topic)
		if !ok {
			d.log.Info("persisted series no longer matches any series entry; dropped", "topic", topic)
			return nil
		}
		s, rerr := series.Restore(snap, settingsOf(sc, snap.Kind))
		if rerr != nil {
			d.log.Warn("state record does not fit the settings; set aside, and the series starts afresh", "topic", topic, "err", rerr)
			d.metrics.StateResets.Inc()
			d.setAside(topic)
			s, rerr = series.New(topic, settingsOf(sc, ""))
			if rerr != nil {
				return rerr
			}
		}
		e := &entry{s: s, subject: d.pub.forecastSubject(topic), rules: d.rulesFor(topic, sc)}
		d.series[topic] = e
		if s.HasModel() {
			d.pub.storeLatest(s, d.now())
		}
		return nil
	})
	if err != nil {
		return fmt.Errorf("daemon: load state: %w", err)
	}
	d.metrics.Series.Set(float64(len(d.series)))
	// A record saved while its refit ran resumes with that refit, so the
	// schedule is the uninterrupted run's. Topics in order: deterministic.
	topics := make([]string, 0, len(d.series))
	for t, e := range d.series {
		if e.s.FitDue() {
			topics = append(topics, t)
		}
	}
	slices.Sort(topics)
	d.due = topics
	return nil
}

// setAside moves topic's stored record to the state file's set-aside
// bucket. If that fails, the record stays where it is until the series'
// first flush replaces it; the error is logged and counted.
func (d *Daemon) setAside(topic string) {
	if _, err := d.store.SetAside(topic, time.Now()); err != nil {
		d.log.Error("state record could not be set aside; the series' next flush replaces it", "topic", topic, "err", err)
		d.metrics.StateWriteFailures.Inc()
	}
}

// settingsOf copies the maths-relevant settings out of a config entry.
// An entry of kind auto gives the series the kind named (a message's
// stream.KindHeader, or a stored record's kind, so that an auto series
// keeps the kind it began with), gauge when that is neither gauge nor
// counter.
func settingsOf(sc *config.Series, named string) series.Settings {
	if sc.Kind == "auto" {
		c := *sc
		c.Kind = "gauge"
		if named == "counter" {
			c.Kind = named
		}
		sc = &c
	}
	return series.Settings{
		Kind:        sc.Kind,
		StepSeconds: int64(sc.Step / time.Second),
		Horizon:     sc.Horizon,
		Levels:      sc.Levels,
		Window:      sc.Window,
		MinPoints:   sc.MinPoints,
		RefitEvery:  sc.RefitEvery,
		Model:       sc.Model,
		Period:      sc.Period(),
		Constant:    sc.Constant,
		Transform:   sc.Transform,
		Calibrate:   sc.Calibrated(),
		Fingerprint: sc.Fingerprint(),
	}
}

func (d *Daemon) rulesFor(topic string, sc *config.Series) []series.AlertRule {
	var rs []series.AlertRule
	for _, a := range d.cfg.AlertsFor(topic) {
		if err := a.CheckSeries(sc); err != nil {
			d.log.Warn("alert window longer than the series horizon; rule skipped for this series",
				"topic", topic, "rule", a.Name, "err", err)
			continue
		}
		thr, above := a.Threshold()
		k := int(math.Ceil(float64(a.Within) / float64(sc.Step))) // ≤ Horizon after CheckSeries
		rs = append(rs, series.AlertRule{Name: a.Name, Threshold: thr, Above: above, Window: max(k, 1),
			WithinSeconds: int64(a.Within / time.Second), Raise: a.Probability, Clear: a.ClearProbability})
	}
	return rs
}
