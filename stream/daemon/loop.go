package daemon

import (
	"context"
	"errors"
	"fmt"
	"time"

	"forewarn/config"
	"forewarn/engine/series"
	"forewarn/stream"
)

// The loop: one goroutine that routes every message to its series, owns
// the series map and every entry in it, and drives the other parts
// (refits, alerts, publisher, flusher) through their channels.

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
}

// maxPending bounds the observations held back behind refits, all series
// together (about 100 bytes each).
const maxPending = 1 << 20

// loop processes messages, results and ticks until ctx ends or the
// intake stops. ended reports that the intake stopped (its result, taken
// from intakeErr, is err).
func (d *Daemon) loop(ctx context.Context, intakeErr <-chan error) (ended bool, err error) {
	tick := time.NewTicker(d.cfg.State.FlushInterval)
	defer tick.Stop()
	f := d.flusher
	for {
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
		case <-ctx.Done():
			return false, nil
		case err := <-intakeErr:
			return true, err
		case batch := <-d.batches:
			d.handleBatch(batch)
			d.handled <- struct{}{}
			if f.sinceSave >= d.cfg.State.FlushMax {
				d.flush()
			}
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
	e := &entry{s: s, subject: d.pub.forecastSubject(topic), rules: d.rulesFor(topic, sc)}
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
		d.metrics.Refitting.Inc()
		d.refits.add(fitTask{topic: topic, job: e.s.FitJob()})
	}
}

// held reports whether the series' observations wait: for a refit or for
// the alert evaluation of its latest close.
func (e *entry) held() bool { return e.busy || e.alerting }

// jobStep hands one waiting refit or alert evaluation to its pool, or
// finishes one that is done, whichever can happen first.
func (d *Daemon) jobStep() {
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
	}
}

// finishFit installs a refit and then applies what waited on it, in order.
func (d *Daemon) finishFit(r fitDone) {
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

// publish hands the series' latest forecast to the publisher, then
// evaluates its alert rules.
func (d *Daemon) publish(topic string, e *entry) {
	now := d.now()
	if part, epoch, ok := d.ownerEpoch(topic); ok { // issue 15: owner headers (partitioned.go)
		d.pub.forecastOwned(e.s.ModelForecast(), now, e.subject, part, epoch)
	} else {
		d.pub.forecast(e.s.ModelForecast(), now, e.subject)
	}
	if d.opt.OnForecast != nil {
		d.opt.OnForecast(e.s.Forecast())
	}
	if len(e.rules) > 0 {
		d.evaluate(topic, e, now)
	}
}

// reject counts and publishes one reject; code is one of stream's Code…
// constants.
func (d *Daemon) reject(subject, topic string, received time.Time, code, reason string) {
	d.metrics.Rejected.WithLabelValues(code).Inc()
	if e := d.series[topic]; e != nil {
		e.rejects++
	}
	d.pub.rejectMsg(subject, topic, code, reason, received)
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
// writer goroutine (flusher). The series carry on meanwhile; the
// acknowledgement waits for the commit. Only one flush is in flight: one
// asked for meanwhile is skipped, and the next trigger writes everything
// that changed since.
func (d *Daemon) flush() {
	if d.flusher.busy() {
		return
	}
	d.flusher.begin(d.series, ackFloor(d.series, d.lastSeq))
}

// finishFlush encodes the rest of the flush in progress and waits for its
// write.
func (d *Daemon) finishFlush() { d.flusher.finish(d.series) }

// syncFlush writes everything and waits for it (shutdown): the flush in
// progress, if any, then one of everything that changed since.
func (d *Daemon) syncFlush() {
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
