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
	"time"

	"github.com/nats-io/nats.go"

	"forewarn/config"
	"forewarn/engine/alert"
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
// together. One loop goroutine owns every series; refits and the alert
// evaluations that need a simulation run in bounded pools of workers.
type Daemon struct {
	opt     Options
	cfg     *config.Config
	log     *slog.Logger
	now     func() time.Time
	store   *state.Store
	pub     *stream.Publisher
	intake  *stream.Intake
	limits  stream.Limits
	metrics *Metrics

	batches   chan []stream.Message
	handled   chan struct{}
	results   chan fitDone
	jobs      chan fitTask
	inspect   chan func()
	free      chan *slot     // empty forecast slots
	out       chan *slot     // loop → encoder, in order
	writes    chan writeJob  // loop → writer: commit d.batch
	committed chan writeDone // writer → loop
	alertJobs chan *alertJob // loop → alert workers
	alertDone chan *alertJob // alert workers → loop

	// Loop-owned.
	series    map[string]*entry
	busy      int       // series waiting for a refit
	pending   int       // observations held back behind refits, all series
	due       []string  // restored series whose refit was in flight at the last save
	queue     []fitTask // refits waiting for a worker (the loop never blocks on the pool)
	sinceSave int
	obsBuf    []stream.Observation
	encBuf    []byte
	lastSeq   uint64 // highest stream position handled
	acked     uint64
	batch     state.Batch // records of the write in flight (owned by the writer while writing)
	writing   bool
	// A flush in progress encodes its records a chunk at a time between
	// messages (flushStep), so that it never stalls the loop for long.
	toFlush    []*entry // the flush's series; toFlush[flushed:] still to encode
	flushed    int
	flushFloor uint64
	evaluator  *alert.Evaluator    // the loop's: screens only
	events     []series.AlertEvent // alert events of one evaluation, reused
	maxH       int                 // longest horizon, for the workers' evaluators
	alerting   int                 // series waiting for an alert evaluation
	alertQ     []*alertJob         // evaluations waiting for a worker, oldest first
	alertFree  []*alertJob         // finished jobs, reused
	scratch    *alertJob           // the next evaluation's work
	stopping   bool                // shutdown: finished jobs no longer release held observations
	lateLogged time.Time           // wall time of the last "late" log line
	lateQuiet  int                 // late answers since then, not logged

	mu     sync.RWMutex
	latest map[string][]byte // latest forecast JSON per topic, for queries

	ready chan struct{}
	done  chan struct{} // closed when Run returns
}

// entry is one live series and its bookkeeping on the loop.
type entry struct {
	s       *series.Series
	subject string // where its forecasts go
	rules   []series.AlertRule
	busy    bool // waiting for a refit
	// alerting: waiting for the alert evaluation of its latest close
	// (an alertJob in d.alertQ or on a worker). Its record is not encoded
	// meanwhile (see flushStep).
	alerting bool
	pending  []pendingObs // observations held back while busy or alerting
	dirty    bool
	// firstDirty is the stream position of the first observation applied
	// since the record was last encoded (0: none): what a record that is
	// not written yet leaves unstored.
	firstDirty uint64
	rejects    uint64
	seen       time.Time // wall time of the last observation, for close_after
	refits     []int64   // bucket indices of recent refits, for charts
}

type pendingObs struct {
	seq     uint64
	index   int
	t       int64
	v       float64
	subject string
	recv    time.Time
}

// alertJob is one close's alert evaluation that needs a simulation: the
// work prepared on the loop (series.Series.PrepareAlerts), run by an alert
// worker, finished on the loop.
type alertJob struct {
	topic  string
	e      *entry
	w      series.AlertWork
	issued time.Time     // the close's "issued" time, for the alert messages
	queued time.Time     // wall time it entered the queue
	wait   time.Duration // time in the queue (set by the worker)
}

type fitTask struct {
	topic string
	job   *series.FitJob
}

// outSlots bounds the forecasts waiting for the encoder.
const outSlots = 1024

// maxPending bounds the observations held back behind refits, all series
// together (about 100 bytes each).
const maxPending = 1 << 20

type writeJob struct{ floor uint64 }

type writeDone struct {
	floor uint64
	err   error
}

type fitDone struct {
	topic  string
	result series.FitResult
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
	in, err := stream.NewIntake(o.Conn, stream.IntakeOptions{
		Subjects: c.Intake.Subjects,
		Durable:  c.Intake.Durable,
		Stream:   c.Intake.Stream,
		Consumer: c.Intake.Consumer,
		MaxAge:   c.Intake.MaxAge,
		MaxBytes: c.Intake.MaxBytes,
	})
	if err != nil {
		return nil, err
	}
	maxH := 1
	for _, s := range c.Series {
		maxH = max(maxH, s.Horizon)
	}
	ev, err := alert.NewEvaluator(maxH, 0)
	if err != nil {
		return nil, fmt.Errorf("daemon: %w", err)
	}
	d := &Daemon{
		opt:       o,
		cfg:       c,
		log:       o.Logger,
		now:       o.Now,
		store:     o.Store,
		pub:       stream.NewPublisher(o.Conn, c.Output.Prefix),
		intake:    in,
		limits:    stream.LimitsOf(c.Limits),
		metrics:   NewMetrics(),
		batches:   make(chan []stream.Message),
		handled:   make(chan struct{}),
		results:   make(chan fitDone, 64),
		jobs:      make(chan fitTask),
		inspect:   make(chan func()),
		writes:    make(chan writeJob),
		free:      make(chan *slot, outSlots),
		out:       make(chan *slot, outSlots),
		committed: make(chan writeDone, 1),
		alertJobs: make(chan *alertJob),
		alertDone: make(chan *alertJob, 64),
		maxH:      maxH,
		scratch:   new(alertJob),
		series:    make(map[string]*entry),
		latest:    make(map[string][]byte),
		evaluator: ev,
		ready:     make(chan struct{}),
		done:      make(chan struct{}),
	}
	return d, nil
}

// Metrics returns the daemon's metrics, for the HTTP endpoint.
func (d *Daemon) Metrics() *Metrics { return d.metrics }

// Ready is closed once the state is loaded and intake runs.
func (d *Daemon) Ready() <-chan struct{} { return d.ready }

// Latest returns a copy of the latest forecast message of topic. Safe for
// concurrent use.
func (d *Daemon) Latest(topic string) ([]byte, bool) {
	d.mu.RLock()
	defer d.mu.RUnlock()
	b, ok := d.latest[topic]
	if !ok {
		return nil, false
	}
	return append([]byte(nil), b...), true // the encoder reuses b
}

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
	var wg sync.WaitGroup
	for range d.cfg.Refit.WorkerCount() {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for t := range d.jobs {
				d.results <- fitDone{topic: t.topic, result: t.job.Run()}
			}
		}()
	}
	var awg sync.WaitGroup
	for range alertWorkers() {
		ev, err := alert.NewEvaluator(d.maxH, 0)
		if err != nil {
			close(d.jobs)
			wg.Wait()
			return fmt.Errorf("daemon: %w", err)
		}
		awg.Add(1)
		go func() {
			defer awg.Done()
			for j := range d.alertJobs {
				j.wait = time.Since(j.queued)
				j.w.Run(ev)
				d.alertDone <- j
			}
		}()
	}
	stopWorkers := func() {
		close(d.jobs)
		close(d.alertJobs)
		wg.Wait()
		awg.Wait()
	}
	sub, err := stream.ServeQueries(d.opt.Conn, d.cfg.Output.Prefix, d.Latest)
	if err != nil {
		stopWorkers()
		return err
	}
	writerDone := make(chan struct{})
	go func() {
		defer close(writerDone)
		d.writeLoop()
	}()
	for range outSlots {
		d.free <- new(slot)
	}
	encoderDone := make(chan struct{})
	go func() {
		defer close(encoderDone)
		d.encodeLoop()
	}()
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
		close(d.out)
		<-encoderDone
		close(d.writes)
		<-writerDone
		if err == nil {
			err = errors.New("daemon: intake stopped before it subscribed")
		}
		return err
	case <-ctx.Done():
	}
	close(d.ready)

	tick := time.NewTicker(d.cfg.State.FlushInterval)
	defer tick.Stop()
	var runErr error
loop:
	for {
		jobs, next := d.nextJob()
		ajobs, anext := d.nextAlert()
		var flushing <-chan struct{} // ready while a flush is being encoded
		if len(d.toFlush) > 0 {
			flushing = alwaysReady
		}
		select {
		case <-flushing:
			d.flushStep()
		case jobs <- next:
			d.queue = d.queue[1:]
		case ajobs <- anext:
			d.alertQ = d.alertQ[1:]
		case j := <-d.alertDone:
			d.finishAlert(j)
		case <-ctx.Done():
			break loop
		case err := <-intakeErr:
			runErr = err
			intakeErr = nil
			break loop
		case batch := <-d.batches:
			d.handleBatch(batch)
			d.handled <- struct{}{}
			if d.sinceSave >= d.cfg.State.FlushMax {
				d.flush()
			}
		case r := <-d.results:
			d.finishFit(r)
		case w := <-d.committed:
			d.written(w)
		case <-tick.C:
			d.closeIdle()
			d.flush()
		case fn := <-d.inspect:
			fn()
		}
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
	for d.busy > 0 || d.alerting > 0 {
		d.jobStep()
	}
	stopWorkers()
	close(d.out)
	<-encoderDone
	d.syncFlush()
	close(d.writes)
	<-writerDone
	d.pub.Flush()
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
		e := &entry{s: s, subject: d.pub.ForecastSubject(topic), rules: d.rulesFor(topic, sc)}
		d.series[topic] = e
		if s.HasModel() {
			d.storeLatest(s)
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

// handleBatch applies one batch of messages in order.
func (d *Daemon) handleBatch(batch []stream.Message) {
	for i := range batch {
		d.handle(&batch[i])
	}
}

func (d *Daemon) handle(m *stream.Message) {
	if m.Seq > d.lastSeq {
		d.lastSeq = m.Seq
	}
	d.sinceSave++
	topic, ok := d.cfg.TopicOf(m.Subject)
	if !ok {
		d.reject(m.Subject, "", m.Received, stream.CodeBadTopic,
			fmt.Sprintf("subject %q carries no topic under the intake subjects", m.Subject))
		return
	}
	e := d.series[topic]
	if e == nil { // a known topic was checked when its series began
		if err := config.ValidTopic(topic); err != nil {
			d.reject(m.Subject, topic, m.Received, stream.CodeBadTopic, err.Error())
			return
		}
	}
	obs, err := stream.ParsePayload(m.Data, m.Received, d.limits, d.obsBuf[:0])
	d.obsBuf = obs[:0]
	if err != nil {
		// ParsePayload's errors are always a *Reject.
		var rj *stream.Reject
		if errors.As(err, &rj) {
			d.reject(m.Subject, topic, m.Received, rj.Code, rj.Reason)
		} else {
			d.reject(m.Subject, topic, m.Received, stream.CodeNotJSON, err.Error())
		}
		return
	}
	if e == nil {
		if e = d.create(m, topic); e == nil {
			return
		}
	}
	e.seen = m.Received
	for i := range obs {
		if e.s.Handled(m.Seq, i) {
			continue // a redelivered message: its effect is already in the state
		}
		p := pendingObs{seq: m.Seq, index: i, t: obs[i].Time.UnixNano(), v: obs[i].Value, subject: m.Subject, recv: m.Received}
		// Observations held back behind refits are bounded: past the
		// bound the loop waits for refits to finish (the intake, and so
		// the bus, is held back meanwhile).
		for e.held() && d.pending >= maxPending {
			d.jobStep()
		}
		if e.held() {
			e.pending = append(e.pending, p)
			d.pending++
			d.metrics.Pending.Inc()
			continue
		}
		d.apply(topic, e, p)
	}
}

func (d *Daemon) create(m *stream.Message, topic string) *entry {
	if len(d.series) >= d.cfg.Limits.MaxSeries {
		d.reject(m.Subject, topic, m.Received, stream.CodeTooManySeries,
			fmt.Sprintf("the daemon already tracks %d series (limits.max_series); new topic %q is not accepted", len(d.series), topic))
		return nil
	}
	sc, ok := d.cfg.SeriesFor(topic)
	if !ok {
		d.reject(m.Subject, topic, m.Received, stream.CodeNoSeriesEntry,
			fmt.Sprintf("no series entry in the configuration matches topic %q", topic))
		return nil
	}
	if m.Kind != "" && m.Kind != "gauge" && m.Kind != "counter" {
		d.reject(m.Subject, topic, m.Received, stream.CodeBadField,
			fmt.Sprintf("header %s is %q; name the kind gauge or counter, or leave the header out", stream.KindHeader, m.Kind))
		return nil
	}
	s, err := series.New(topic, settingsOf(sc, m.Kind))
	if err != nil {
		d.reject(m.Subject, topic, m.Received, stream.CodeBadSettings, err.Error())
		return nil
	}
	e := &entry{s: s, subject: d.pub.ForecastSubject(topic), rules: d.rulesFor(topic, sc)}
	d.series[topic] = e
	d.metrics.Series.Set(float64(len(d.series)))
	return e
}

// apply feeds one observation to a series that is not waiting on a refit.
func (d *Daemon) apply(topic string, e *entry, p pendingObs) {
	if e.firstDirty == 0 {
		e.firstDirty = p.seq
	}
	out, err := e.s.Observe(p.t, p.v)
	e.s.Advance(p.seq, p.index)
	e.dirty = true
	if err != nil {
		code := stream.CodeBadValue
		switch {
		case errors.Is(err, series.ErrLate):
			code = stream.CodeLate
		case errors.Is(err, series.ErrDomain):
			code = stream.CodeOutOfDomain
		case errors.Is(err, series.ErrNotFinite):
			code = stream.CodeNotFinite
		}
		d.reject(p.subject, topic, p.recv, code, err.Error())
		return
	}
	d.metrics.Accepted.Inc()
	d.outcome(topic, e, out)
}

func (d *Daemon) outcome(topic string, e *entry, out series.Outcome) {
	switch out {
	case series.Published:
		d.publish(topic, e)
	case series.NeedFit:
		e.busy = true
		d.busy++
		d.metrics.Refitting.Inc()
		d.queue = append(d.queue, fitTask{topic: topic, job: e.s.FitJob()})
	}
}

// held reports whether the series' observations wait: for a refit or for
// the alert evaluation of its latest close.
func (e *entry) held() bool { return e.busy || e.alerting }

// jobStep hands one waiting refit or alert evaluation to its pool, or
// finishes one that is done, whichever can happen first.
func (d *Daemon) jobStep() {
	jobs, next := d.nextJob()
	ajobs, anext := d.nextAlert()
	select {
	case jobs <- next:
		d.queue = d.queue[1:]
	case r := <-d.results:
		d.finishFit(r)
	case ajobs <- anext:
		d.alertQ = d.alertQ[1:]
	case j := <-d.alertDone:
		d.finishAlert(j)
	}
}

// nextAlert is nextJob for the alert queue.
func (d *Daemon) nextAlert() (chan<- *alertJob, *alertJob) {
	if len(d.alertQ) == 0 {
		return nil, nil
	}
	return d.alertJobs, d.alertQ[0]
}

// alertWorkers is the size of the alert pool: one per core the process
// may use.
func alertWorkers() int { return max(1, runtime.GOMAXPROCS(0)) }

// nextJob returns the pool's channel and the first waiting refit, or a
// nil channel (a select case that never fires) when none waits.
func (d *Daemon) nextJob() (chan<- fitTask, fitTask) {
	if len(d.queue) == 0 {
		return nil, fitTask{}
	}
	return d.jobs, d.queue[0]
}

// finishFit installs a refit and then applies what waited on it, in order.
func (d *Daemon) finishFit(r fitDone) {
	e := d.series[r.topic]
	d.busy--
	d.metrics.Refitting.Dec()
	d.metrics.RefitSeconds.Observe(r.result.Elapsed.Seconds())
	e.busy = false
	e.dirty = true
	out, err := e.s.Install(r.result)
	if err != nil {
		d.metrics.RefitFailures.Inc()
		d.log.Warn("refit failed; previous model kept", "topic", r.topic, "err", err)
	} else {
		d.metrics.Refits.Inc()
		e.refits = append(e.refits, r.result.End)
		if len(e.refits) > 32 {
			e.refits = e.refits[1:]
		}
	}
	d.outcome(r.topic, e, out)
	d.release(r.topic, e)
}

// release applies the observations held behind a finished job, in order,
// until the series is held again (or none is left).
func (d *Daemon) release(topic string, e *entry) {
	for len(e.pending) > 0 && !e.held() {
		p := e.pending[0]
		e.pending = e.pending[1:]
		d.pending--
		d.metrics.Pending.Dec()
		d.apply(topic, e, p)
	}
	if len(e.pending) == 0 {
		e.pending = nil
	}
}

// publish encodes and publishes the series' latest forecast, then
// evaluates its alert rules.
func (d *Daemon) publish(topic string, e *entry) {
	mf := e.s.ModelForecast()
	now := d.now()
	sl := <-d.free // waits only when the encoder is a full queue behind
	sl.mf.CopyFrom(mf)
	sl.issued, sl.subject = now, e.subject
	d.out <- sl
	if d.opt.OnForecast != nil {
		d.opt.OnForecast(e.s.Forecast())
	}
	if len(e.rules) > 0 {
		d.evaluate(topic, e, now)
	}
}

// slot carries one forecast from the loop to the encoder, on the model
// scale; the encoder fills its raw-unit form. Slots circulate between
// d.free and d.out, so publishing allocates nothing.
type slot struct {
	mf      series.ModelForecast
	fc      series.Forecast
	issued  time.Time
	subject string
}

// encodeLoop turns forecasts into raw units, encodes and publishes them in
// the order the loop made them, and keeps the latest one per topic for
// queries. It runs on its own goroutine so that this, the costliest part
// of a bucket close, uses another core than the loop. Filling a copy of
// the series' model-scale forecast gives exactly what Series.Forecast
// gives (ModelForecast.Fill is a function of the copy alone).
func (d *Daemon) encodeLoop() {
	var buf []byte
	for sl := range d.out {
		sl.mf.Fill(&sl.fc)
		buf = stream.AppendForecast(buf[:0], &sl.fc, sl.issued)
		if err := d.pub.Forecast(sl.subject, buf); err != nil {
			d.log.Warn("forecast not published", "topic", sl.fc.Topic, "err", err)
		}
		// The message becomes the topic's latest, and the one it replaces
		// the next encoding buffer: no copy.
		d.mu.Lock()
		buf, d.latest[sl.fc.Topic] = d.latest[sl.fc.Topic], buf
		d.mu.Unlock()
		d.metrics.Published.Inc()
		d.free <- sl
	}
}

func (d *Daemon) storeLatest(s *series.Series) {
	b := stream.AppendForecast(nil, s.Forecast(), d.now())
	d.mu.Lock()
	d.latest[s.Topic()] = b
	d.mu.Unlock()
}

// evaluate starts the evaluation of the series' alert rules on its latest
// forecast (engine/series does the work). The rules the cheap screens
// answer (exact, marginal, skip bound, bracket) are finished here; when
// one needs a simulation, the work goes to the alert pool and the series
// is held, like a refit, until it comes back (finishAlert): its next
// observations wait in its queue, so its next evaluation sees the rule
// states this one leaves (alert.Rule.Current) and its messages keep their
// order. Other series carry on meanwhile.
func (d *Daemon) evaluate(topic string, e *entry, now time.Time) {
	j := d.scratch
	if err := e.s.PrepareAlerts(&j.w, e.rules, d.evaluator); err != nil {
		d.log.Warn("alert evaluation failed", "topic", topic, "err", err)
		return
	}
	if j.w.Pending() == 0 {
		d.finishAlerts(topic, e, j, now)
		return
	}
	if n := len(d.alertFree); n > 0 {
		d.scratch, d.alertFree = d.alertFree[n-1], d.alertFree[:n-1]
	} else {
		d.scratch = new(alertJob)
	}
	j.topic, j.e, j.issued, j.queued = topic, e, now, time.Now()
	e.alerting = true
	d.alerting++
	d.metrics.AlertsQueued.Inc()
	d.alertQ = append(d.alertQ, j)
}

// finishAlert takes back an evaluation from the alert pool: it steps the
// rules' hysteresis, publishes the events, counts a late answer (one that
// observations of its series had to wait for) and releases the
// observations held behind it (not during shutdown, see Run).
func (d *Daemon) finishAlert(j *alertJob) {
	e := j.e
	e.alerting = false
	d.alerting--
	d.metrics.AlertsQueued.Dec()
	d.metrics.AlertQueueSeconds.Observe(j.wait.Seconds())
	e.dirty = true
	d.finishAlerts(j.topic, e, j, j.issued)
	if len(e.pending) > 0 {
		d.late(j)
	}
	j.e = nil
	d.alertFree = append(d.alertFree, j)
	if !d.stopping {
		d.release(j.topic, e)
	}
}

// late counts an alert answer that came after its series' next
// observation arrived, and logs it, at most one line a second (wall time)
// with the number of late answers not logged since.
func (d *Daemon) late(j *alertJob) {
	d.metrics.AlertsLate.Inc()
	now := time.Now()
	if now.Sub(d.lateLogged) < time.Second {
		d.lateQuiet++
		return
	}
	rules := make([]string, 0, j.w.Len())
	for i := range j.w.Len() {
		if j.w.Method(i) == alert.MethodSimulation {
			rules = append(rules, j.w.Rule(i))
		}
	}
	d.log.Warn("alert answer late: the series' next observations waited for it",
		"topic", j.topic, "rules", rules, "origin_bucket", j.w.Bucket(), "queue_wait", j.wait.String(),
		"held_observations", len(j.e.pending), "queued_evaluations", len(d.alertQ), "late_not_logged", d.lateQuiet)
	d.lateLogged, d.lateQuiet = now, 0
}

// finishAlerts finishes an evaluation prepared on the series (and run, if
// it needed a simulation) and publishes the alerts it returns.
func (d *Daemon) finishAlerts(topic string, e *entry, j *alertJob, now time.Time) {
	var err error
	d.events, err = e.s.FinishAlerts(d.events[:0], &j.w)
	if err != nil {
		d.log.Warn("alert evaluation failed", "topic", topic, "err", err)
	}
	for i := range j.w.Len() {
		if !j.w.Failed(i) {
			d.metrics.AlertEvaluations[j.w.Method(i)].Inc()
		}
		if n := j.w.Paths(i); n > 0 {
			d.metrics.AlertPaths.Add(float64(n))
		}
		if j.w.Undecided(i) {
			d.metrics.AlertsUndecided.Inc()
		}
	}
	for i := range d.events {
		ev := &d.events[i]
		d.encBuf = stream.AppendAlert(d.encBuf[:0], ev, now)
		d.pub.Alert(topic, d.encBuf)
		d.metrics.Alerts.Inc()
		if d.opt.OnAlert != nil {
			d.opt.OnAlert(ev)
		}
	}
}

// reject counts and publishes one reject; code is one of stream's Code…
// constants.
func (d *Daemon) reject(subject, topic string, received time.Time, code, reason string) {
	d.metrics.Rejected.WithLabelValues(code).Inc()
	if e := d.series[topic]; e != nil {
		e.rejects++
	}
	d.encBuf = stream.AppendReject(d.encBuf[:0], subject, topic, code, reason, received)
	d.pub.Reject(topic, d.encBuf)
}

// closeIdle closes open buckets that saw no data for close_after (wall
// time). This is the one rule that depends on wall time; it is off unless
// configured.
func (d *Daemon) closeIdle() {
	now := d.now()
	for topic, e := range d.series {
		sc, ok := d.cfg.SeriesFor(topic)
		if !ok || sc.CloseAfter <= 0 || e.held() || e.seen.IsZero() || now.Sub(e.seen) < sc.CloseAfter {
			continue
		}
		if out := e.s.CloseOpen(); out != series.Absorbed {
			e.dirty = true
			d.outcome(topic, e, out)
		}
	}
}

// flush starts writing every changed series in one transaction on the
// writer goroutine. The records are encoded on the loop into the daemon's
// one Batch, flushChunk at a time between messages (flushStep), and the
// series carry on meanwhile; the acknowledgement waits for the commit
// (written). The acknowledgement floor is taken when the flush starts:
// every record encoded afterwards reflects at least that position. Only
// one flush is in flight: one asked for meanwhile is skipped, and the next
// trigger writes everything that changed since.
func (d *Daemon) flush() {
	if d.writing || len(d.toFlush) > 0 {
		return
	}
	d.sinceSave = 0
	d.batch.Reset()
	for _, e := range d.series {
		if e.dirty {
			d.toFlush = append(d.toFlush, e)
		}
	}
	d.flushFloor = d.ackFloor()
	if len(d.toFlush) == 0 {
		d.ack(d.flushFloor) // nothing new to store: every earlier write has committed
		return
	}
	d.flushStep()
}

// flushChunk is how many records one flushStep encodes: with records of a
// few kilobytes, well under a millisecond of the loop.
const flushChunk = 256

// flushStep encodes the next chunk of the flush in progress and, after the
// last one, hands the batch to the writer.
func (d *Daemon) flushStep() {
	end := min(d.flushed+flushChunk, len(d.toFlush))
	for _, e := range d.toFlush[d.flushed:end] {
		if e.alerting {
			// Its record says its latest close is applied, but not yet that
			// close's alert evaluation: stored, a restart would skip the
			// close (Series.Handled) and the evaluation would never happen.
			// It stays dirty for the next flush, and this flush
			// acknowledges nothing it has applied since its last record.
			if e.firstDirty > 0 && e.firstDirty-1 < d.flushFloor {
				d.flushFloor = e.firstDirty - 1
			}
			continue
		}
		if err := d.batch.Add(e.s.Snapshot()); err != nil {
			d.log.Error("series state cannot be stored", "topic", e.s.Topic(), "err", err)
			d.metrics.StateWriteFailures.Inc()
			continue
		}
		e.dirty, e.firstDirty = false, 0
	}
	d.flushed = end
	if end < len(d.toFlush) {
		return
	}
	clear(d.toFlush)
	d.toFlush, d.flushed = d.toFlush[:0], 0
	if d.batch.Len() == 0 {
		d.ack(d.flushFloor)
		return
	}
	d.writing = true
	d.writes <- writeJob{floor: d.flushFloor}
}

// ackFloor is the last stream position whose effect is in memory with
// nothing at or before it still waiting on a refit or an alert
// evaluation, nor applied to a series whose record cannot be written
// until its alert evaluation is back (see flushStep).
func (d *Daemon) ackFloor() uint64 {
	floor := d.lastSeq
	for _, e := range d.series {
		if len(e.pending) > 0 && e.pending[0].seq > 0 && e.pending[0].seq-1 < floor {
			floor = e.pending[0].seq - 1
		}
		if e.alerting && e.firstDirty > 0 && e.firstDirty-1 < floor {
			floor = e.firstDirty - 1
		}
	}
	return floor
}

// written finishes a write: acknowledge what it stored, or, when it
// failed, mark every series changed so that the next flush writes them.
func (d *Daemon) written(w writeDone) {
	d.writing = false
	if w.err != nil {
		d.log.Error("state write failed; will retry at the next flush", "err", w.err)
		d.metrics.StateWriteFailures.Inc()
		// The failed records' series may hold anything after the last
		// acknowledged position unstored.
		for _, e := range d.series {
			e.dirty = true
			if e.firstDirty == 0 || e.firstDirty > d.acked+1 {
				e.firstDirty = d.acked + 1
			}
		}
		return
	}
	if size, err := d.store.Size(); err == nil {
		d.metrics.StateBytes.Set(float64(size))
	}
	d.ack(w.floor)
}

func (d *Daemon) ack(floor uint64) {
	if floor <= d.acked {
		return
	}
	if err := d.intake.Ack(floor); err != nil {
		d.log.Warn("acknowledgement failed; the stream will redeliver (no effect twice)", "seq", floor, "err", err)
		return
	}
	d.acked = floor
}

// writeLoop commits batches for the loop, one at a time.
func (d *Daemon) writeLoop() {
	for j := range d.writes {
		d.committed <- writeDone{floor: j.floor, err: d.store.Commit(&d.batch)}
	}
}

// syncFlush writes everything and waits for it (shutdown): the flush in
// progress, if any, then one of everything that changed since.
func (d *Daemon) syncFlush() {
	d.finishFlush()
	d.flush()
	d.finishFlush()
}

// finishFlush encodes the rest of the flush in progress and waits for its
// write.
func (d *Daemon) finishFlush() {
	for len(d.toFlush) > 0 {
		d.flushStep()
	}
	if d.writing {
		d.written(<-d.committed)
	}
}

// alwaysReady is a channel a select can always receive from.
var alwaysReady = func() <-chan struct{} {
	c := make(chan struct{})
	close(c)
	return c
}()
