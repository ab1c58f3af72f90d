package daemon

import (
	"errors"
	"fmt"
	"log/slog"
	"time"

	"forewarn/config"
	"forewarn/engine/series"
	"forewarn/stream"
)

// A loop: one goroutine that routes every message of its share of the
// intake to its series, owns its series map and every entry in it, and
// drives its parts (refit and alert queues, publisher, flusher) through
// their channels. A daemon runs one or more loops (route.go).
type loop struct {
	top *Daemon // shared: configuration, metrics, worker pools
	id  int

	// Copies of the daemon's, read only.
	opt     Options
	cfg     *config.Config
	log     *slog.Logger
	now     func() time.Time
	limits  stream.Limits
	metrics *Metrics

	refits  *refitPool
	alerts  *alertPool
	pub     *publisher
	flusher *flusher

	batches chan work // dispatch → loop
	inspect chan func()
	exited  chan struct{} // closed when run returns

	// Loop-owned.
	series   map[string]*entry
	pending  int      // observations held back behind refits, all series
	due      []string // restored series whose refit was in flight at the last save
	obsBuf   []stream.Observation
	ahead    []int64 // handle's per-message latest later times (series.ObserveIn)
	lastSeq  uint64  // highest stream position handled (work.upTo included)
	flushMax int     // messages after which this loop writes: its share of state.flush_max
	stopping bool    // shutdown: finished jobs no longer release held observations
	// lastOwned: cluster mode with handover, partition → the epoch at
	// which this instance last owned it, for the partitions of this loop
	// (partitioned.go).
	lastOwned map[int]uint64
}

func newLoop(d *Daemon, id int, a acker) (*loop, error) {
	alerts, err := newAlertPool(d.alertWorkers)
	if err != nil {
		return nil, err
	}
	return &loop{
		top: d, id: id,
		opt: d.opt, cfg: d.cfg, log: d.log, now: d.now, limits: d.limits, metrics: d.metrics,
		refits:  newRefitPool(d.refitWorkers),
		alerts:  alerts,
		pub:     newPublisher(d.opt.Conn, d.cfg.Output.Prefix, d.log, d.metrics),
		flusher: newFlusher(d.store, a, d.log, d.metrics),
		batches: make(chan work, loopQueue),
		inspect: make(chan func()),
		exited:  make(chan struct{}),
		series:  make(map[string]*entry),

		lastOwned: make(map[int]uint64),
	}, nil
}

// entry is one live series and its bookkeeping on the loop.
type entry struct {
	s       *series.Series
	subject string // where its forecasts go
	rules   []series.AlertRule
	busy    bool // waiting for a refit
	// alerting: waiting for the alert evaluation of its latest close
	// (an alertJob in the alert queue or on a worker). Its record is not
	// encoded meanwhile (see flusher.step).
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
	ahead   int64 // latest time of the message's later observations (series.ObserveIn)
}

// maxPending bounds the observations held back behind refits, all series
// together (about 100 bytes each).
const maxPending = 1 << 20

// run resumes the refits due at load, then processes messages, results
// and ticks until quit is closed (the intake has returned: every batch is
// in batches), applies what is left in batches, and finishes the refits
// and alert evaluations in flight (shutdown, see Daemon.Run).
func (d *loop) run(quit <-chan struct{}) {
	for _, t := range d.due {
		d.outcome(t, d.series[t], series.NeedFit)
	}
	d.due = nil
	tick := time.NewTicker(d.cfg.State.FlushInterval)
	defer tick.Stop()
	f := d.flusher
	for running := true; running; {
		jobs, next := d.refits.next()
		ajobs, anext := d.alerts.next()
		var flushing <-chan struct{} // ready while a flush is being encoded
		if f.encoding() {
			flushing = alwaysReady
		}
		select {
		case <-flushing:
			f.step()
		case jobs <- next:
			d.refits.sent()
		case ajobs <- anext:
			d.alerts.sent()
		case j := <-d.alerts.done:
			d.finishAlert(j)
		case <-quit:
			running = false
		case w := <-d.batches:
			d.take(w)
		case r := <-d.refits.results:
			d.finishFit(r)
		case w := <-f.committed:
			f.written(w, d.series)
		case <-tick.C:
			d.closeIdle()
			d.flush()
		case fn := <-d.inspect:
			fn()
		}
	}
	for {
		select {
		case w := <-d.batches:
			d.take(w)
			continue
		default:
		}
		break
	}
	// From here a finished alert evaluation no longer releases the
	// observations held behind it: they stay unapplied, unstored and
	// unacknowledged (a durable stream redelivers them), so the work left
	// is at most the evaluations already queued, one per series.
	d.stopping = true
	for d.refits.busy > 0 || d.alerts.alerting > 0 {
		d.jobStep()
	}
}

// take applies one share of a batch, and flushes past state.flush_max.
func (d *loop) take(w work) {
	d.handleBatch(w.msgs)
	d.lastSeq = max(d.lastSeq, w.upTo)
	w.done()
	if d.flusher.sinceSave >= d.flushMax {
		d.flush()
	}
}

// handleBatch applies one batch of messages in order.
func (d *loop) handleBatch(batch []stream.Message) {
	for i := range batch {
		d.handle(&batch[i])
	}
}

func (d *loop) handle(m *stream.Message) {
	if m.Seq > d.lastSeq {
		d.lastSeq = m.Seq
	}
	d.flusher.sinceSave++
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
	// Refits falling due inside the message wait for its last close
	// (series.ObserveIn): each observation carries the latest time of
	// those after it, over the whole message, redelivered or not.
	d.ahead = d.ahead[:0]
	for i := range obs {
		d.ahead = append(d.ahead, obs[i].Time.UnixNano())
	}
	after := int64(series.NoMore)
	for i := len(d.ahead) - 1; i >= 0; i-- {
		d.ahead[i], after = after, max(after, d.ahead[i])
	}
	for i := range obs {
		if e.s.Handled(m.Seq, i) {
			continue // a redelivered message: its effect is already in the state
		}
		p := pendingObs{seq: m.Seq, index: i, t: obs[i].Time.UnixNano(), v: obs[i].Value, subject: m.Subject, recv: m.Received, ahead: d.ahead[i]}
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

func (d *loop) create(m *stream.Message, topic string) *entry {
	if n := d.top.nseries.Load(); n >= int64(d.cfg.Limits.MaxSeries) {
		d.reject(m.Subject, topic, m.Received, stream.CodeTooManySeries,
			fmt.Sprintf("the daemon already tracks %d series (limits.max_series); new topic %q is not accepted", n, topic))
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
	// limits.max_series counts every loop's series: take a place, unless
	// another loop has taken the last one since the check above.
	for {
		n := d.top.nseries.Load()
		if n >= int64(d.cfg.Limits.MaxSeries) {
			d.reject(m.Subject, topic, m.Received, stream.CodeTooManySeries,
				fmt.Sprintf("the daemon already tracks %d series (limits.max_series); new topic %q is not accepted", n, topic))
			return nil
		}
		if d.top.nseries.CompareAndSwap(n, n+1) {
			d.metrics.Series.Inc()
			break
		}
	}
	e := &entry{s: s, subject: d.pub.forecastSubject(topic), rules: d.top.rulesFor(topic, sc)}
	d.series[topic] = e
	return e
}

// apply feeds one observation to a series that is not waiting on a refit.
func (d *loop) apply(topic string, e *entry, p pendingObs) {
	if e.firstDirty == 0 {
		e.firstDirty = p.seq
	}
	out, err := e.s.ObserveIn(p.t, p.v, p.ahead)
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
		if out == series.NeedFit { // a refit owed by its message (ObserveIn)
			d.outcome(topic, e, out)
		}
		return
	}
	d.metrics.Accepted.Inc()
	d.outcome(topic, e, out)
}

func (d *loop) outcome(topic string, e *entry, out series.Outcome) {
	switch out {
	case series.Published:
		d.publish(topic, e)
	case series.NeedFit:
		e.busy = true
		d.metrics.Refitting.Inc()
		d.refits.add(fitTask{topic: topic, job: e.s.FitJob()})
	}
}

// held reports whether the series' observations wait: for a refit or for
// the alert evaluation of its latest close.
func (e *entry) held() bool { return e.busy || e.alerting }

// jobStep hands one waiting refit or alert evaluation to its pool, or
// finishes one that is done, whichever can happen first.
func (d *loop) jobStep() {
	jobs, next := d.refits.next()
	ajobs, anext := d.alerts.next()
	select {
	case jobs <- next:
		d.refits.sent()
	case r := <-d.refits.results:
		d.finishFit(r)
	case ajobs <- anext:
		d.alerts.sent()
	case j := <-d.alerts.done:
		d.finishAlert(j)
	case fn := <-d.inspect:
		// Paused here, the loop holds no worker back: every loop can
		// pause, whatever the others wait for.
		fn()
	}
}

// finishFit installs a refit and then applies what waited on it, in order.
func (d *loop) finishFit(r fitDone) {
	e := d.series[r.topic]
	d.refits.taken()
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
func (d *loop) release(topic string, e *entry) {
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

// publish hands the series' latest forecast to the publisher, then
// evaluates its alert rules.
func (d *loop) publish(topic string, e *entry) {
	now := d.now()
	if part, epoch, ok := d.ownerEpoch(topic); ok { // issue 15: owner headers (partitioned.go)
		d.pub.forecastOwned(e.s.ModelForecast(), now, e.subject, part, epoch)
	} else {
		d.pub.forecast(e.s.ModelForecast(), now, e.subject)
	}
	if d.opt.OnForecast != nil {
		d.top.hookMu.Lock()
		d.opt.OnForecast(e.s.Forecast())
		d.top.hookMu.Unlock()
	}
	if len(e.rules) > 0 {
		d.evaluate(topic, e, now)
	}
}

// reject counts and publishes one reject; code is one of stream's Code…
// constants.
func (d *loop) reject(subject, topic string, received time.Time, code, reason string) {
	d.metrics.Rejected.WithLabelValues(code).Inc()
	if e := d.series[topic]; e != nil {
		e.rejects++
	}
	d.pub.rejectMsg(subject, topic, code, reason, received)
}

// closeIdle closes open buckets that saw no data for close_after (wall
// time). This is the one rule that depends on wall time; it is off unless
// configured.
func (d *loop) closeIdle() {
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
// writer goroutine (flusher). The series carry on meanwhile; the
// acknowledgement waits for the commit. Only one flush is in flight: one
// asked for meanwhile is skipped, and the next trigger writes everything
// that changed since.
func (d *loop) flush() {
	if d.flusher.busy() {
		return
	}
	d.flusher.begin(d.series, ackFloor(d.series, d.lastSeq))
}

// finishFlush encodes the rest of the flush in progress and waits for its
// write.
func (d *loop) finishFlush() { d.flusher.finish(d.series) }

// syncFlush writes everything and waits for it (shutdown): the flush in
// progress, if any, then one of everything that changed since.
func (d *loop) syncFlush() {
	d.finishFlush()
	d.flush()
	d.finishFlush()
}

// alwaysReady is a channel a select can always receive from.
var alwaysReady = func() <-chan struct{} {
	c := make(chan struct{})
	close(c)
	return c
}()
