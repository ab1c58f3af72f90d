package daemon

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"math"
	"runtime"
	"slices"
	"sync"
	"sync/atomic"
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
	// (stream.NewClusterIntake), whose OwnsTopic becomes Owns. A
	// PartitionedIntake from stream.NewClusterIntake given here gets the
	// daemon's handover (snapshots, owner headers) as one built by New.
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
// together. Its loops (loop.go) each own a set of partitions and the
// series in them, with their own publisher (publisher.go) and flush and
// acknowledgement pipeline (flusher.go); the refit and alert worker pools
// (refits.go, alerts.go) are shared by the loops. The intake's batches are
// split among the loops by partition (route.go). doc.go gives the
// ownership and the lock order.
type Daemon struct {
	opt     Options
	cfg     *config.Config
	log     *slog.Logger
	now     func() time.Time
	store   *state.Store
	intake  Intake
	limits  stream.Limits
	metrics *Metrics

	refitWorkers *refitWorkers
	alertWorkers *alertWorkers
	loops        []*loop
	route        router
	acks         *ackJoin     // several loops on one acknowledgement floor; nil otherwise
	nseries      atomic.Int64 // series of every loop, for limits.max_series
	hookMu       sync.Mutex   // serialises OnForecast and OnAlert over the loops

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
	if p, ok := in.(*stream.PartitionedIntake); ok && pi == nil && c.Cluster.Partitions > 0 && p.CanHandover() {
		// The caller built the cluster intake (cmd/forewarn does, for the
		// sources' leases): the handover is the daemon's all the same.
		pi = p
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
	m := NewMetrics()
	d := &Daemon{
		opt:          o,
		cfg:          c,
		log:          o.Logger,
		now:          o.Now,
		store:        o.Store,
		intake:       in,
		limits:       stream.LimitsOf(c.Limits),
		metrics:      m,
		refitWorkers: newRefitWorkers(),
		alertWorkers: newAlertWorkers(maxH),
		ready:        make(chan struct{}),
		done:         make(chan struct{}),
	}
	n := c.Intake.LoopCount(runtime.GOMAXPROCS(0), c.Cluster.Partitions)
	d.route = newRouter(c, n)
	_, marks := in.(Marker)
	pm, partMarks := in.(PartMarker)
	if n > 1 && marks && !partMarks {
		// Each loop acknowledges its own partitions; an intake that cannot
		// mark a subset gets one loop.
		n = 1
		d.route = newRouter(c, 1)
	}
	if n > 1 && !marks {
		d.acks = &ackJoin{in: in, floors: make([]uint64, n)}
	}
	if pi, ok := in.(*stream.PartitionedIntake); ok && n > 1 {
		// dispatch may run for several partitions at once: the loops
		// they go to then work in parallel.
		pi.Concurrent = true
	}
	for k := range n {
		var a acker = directAcker{in}
		switch {
		case n > 1 && marks:
			a = partAcker{pm: pm, sel: d.route.owns(k)}
		case n > 1:
			a = joinAcker{j: d.acks, k: k}
		}
		l, err := newLoop(d, k, a)
		if err != nil {
			return nil, err
		}
		// state.flush_max counts the daemon's messages, not each loop's:
		// each loop writes after its share, so that the whole writes (and
		// acknowledges) within flush_max messages, under the intake's
		// 200 000 unacknowledged (issue 15: with the loops' own
		// counts, two loops on one consumer reached that bound first and
		// the server stopped delivering until the next flush_interval).
		l.flushMax = (c.State.FlushMax + n - 1) / n
		d.loops = append(d.loops, l)
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

// Loops returns the number of loops the daemon runs (intake.loops).
func (d *Daemon) Loops() int { return len(d.loops) }

// Ready is closed once the state is loaded and intake runs.
func (d *Daemon) Ready() <-chan struct{} { return d.ready }

// Latest returns a copy of the latest forecast message of topic. Safe for
// concurrent use.
func (d *Daemon) Latest(topic string) ([]byte, bool) {
	if len(d.loops) == 1 {
		return d.loops[0].pub.Latest(topic)
	}
	k := d.route.loopOfTopic(topic)
	if b, ok := d.loops[k].pub.Latest(topic); ok {
		return b, true
	}
	// In cluster mode a topic that arrives on another intake subject than
	// the first that can carry it lives on the loop of that subject's
	// partition.
	for i, l := range d.loops {
		if i != k {
			if b, ok := l.pub.Latest(topic); ok {
				return b, true
			}
		}
	}
	return nil, false
}

// Inspect runs fn with every loop paused, where it may read (not keep)
// the series of all of them; it returns false when the daemon is not
// running (or stops) or ctx ends first.
func (d *Daemon) Inspect(ctx context.Context, fn func(all map[string]*Entry)) bool {
	paused := make(chan struct{}, len(d.loops))
	release := make(chan struct{})
	defer close(release)
	pause := func() {
		paused <- struct{}{}
		<-release
	}
	for _, l := range d.loops {
		select {
		case l.inspect <- pause:
		case <-ctx.Done():
			return false
		case <-l.exited:
			return false
		case <-d.done: // Run returned, perhaps before the loops started
			return false
		}
	}
	for range d.loops {
		<-paused
	}
	n := 0
	for _, l := range d.loops {
		n += len(l.series)
	}
	view := make(map[string]*Entry, n)
	for _, l := range d.loops {
		for k, e := range l.series {
			view[k] = &Entry{e: e}
		}
	}
	fn(view)
	return true
}

// Run loads the state, starts the worker pools, the loops, the intake and
// the query responder, and processes messages until ctx is cancelled. It
// then stops the intake, lets every loop apply what it was handed and
// finish the refits in flight, applies what waited on them, writes the
// state and acknowledges it.
func (d *Daemon) Run(ctx context.Context) error {
	defer close(d.done)
	if err := d.load(); err != nil {
		return err
	}
	d.refitWorkers.start(d.cfg.Refit.WorkerCount())
	if err := d.alertWorkers.start(alertWorkerCount()); err != nil {
		d.refitWorkers.stop()
		return err
	}
	stopWorkers := func() {
		d.refitWorkers.stop()
		d.alertWorkers.stop()
	}
	sub, err := stream.ServeQueriesOwned(d.opt.Conn, d.cfg.Output.Prefix, d.opt.Owns, d.Latest)
	if err != nil {
		stopWorkers()
		return err
	}
	defer sub.Unsubscribe()
	quit := make(chan struct{})
	var loops sync.WaitGroup
	for _, l := range d.loops {
		l.flusher.start()
		l.pub.start()
		loops.Add(1)
		go func() {
			defer loops.Done()
			defer close(l.exited)
			l.run(quit)
		}()
	}
	// finish stops the loops once the intake has returned, then the
	// pools, and writes and acknowledges every loop's state; in cluster
	// mode it then leaves (final snapshots at the acknowledged floors,
	// then the leases go) before the writers stop.
	finish := func() {
		close(quit)
		loops.Wait()
		stopWorkers()
		for _, l := range d.loops {
			l.pub.stop()
			l.syncFlush()
		}
		d.leave() // issue 15: every loop's last flush is acknowledged
		for _, l := range d.loops {
			l.flusher.stop()
			l.pub.flush()
		}
	}

	intakeCtx, stopIntake := context.WithCancel(context.Background())
	defer stopIntake()
	intakeErr := make(chan error, 1)
	go func() { intakeErr <- d.intake.Run(intakeCtx, d.dispatch) }()
	// Ready once the intake is on the server, so that nothing published
	// after Ready is missed (plain mode has no replay).
	select {
	case <-d.intake.Subscribed():
	case err := <-intakeErr:
		finish() // the Owner may have started: finish leaves (d.leave)
		if err == nil {
			err = errors.New("daemon: intake stopped before it subscribed")
		}
		return err
	case <-ctx.Done():
	}
	close(d.ready)

	var runErr error
	select {
	case <-ctx.Done():
		// Shutdown: stop intake first (the batches in hand are still
		// handled), then let the loops finish.
		stopIntake()
		if err := <-intakeErr; err != nil && !errors.Is(err, context.Canceled) {
			runErr = err
		}
	case runErr = <-intakeErr:
	}
	finish()
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
		l := d.loops[d.route.loopOfTopic(topic)]
		e := &entry{s: s, subject: l.pub.forecastSubject(topic), rules: d.rulesFor(topic, sc)}
		l.series[topic] = e
		d.nseries.Add(1)
		if s.HasModel() {
			l.pub.storeLatest(s, d.now())
		}
		return nil
	})
	if err != nil {
		return fmt.Errorf("daemon: load state: %w", err)
	}
	d.metrics.Series.Set(float64(d.nseries.Load()))
	// A record saved while its refit ran resumes with that refit, so the
	// schedule is the uninterrupted run's. Topics in order: deterministic.
	for _, l := range d.loops {
		topics := make([]string, 0, len(l.series))
		for t, e := range l.series {
			if e.s.FitDue() {
				topics = append(topics, t)
			}
		}
		slices.Sort(topics)
		l.due = topics
	}
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
		Seasons:     sc.CycleSeconds(),
		Guard:       sc.Robust(),
		Outliers:    sc.Robust(),
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
