package daemon

import (
	"fmt"
	"runtime"
	"sync"
	"time"

	"forewarn/engine/alert"
	"forewarn/engine/series"
)

// alertWorkers run the alert evaluations that need a simulation, for
// every loop, one worker per core the process may use (DEVELOPERS.md,
// "The alert pool"). A worker owns, while it holds it, one alertJob and
// its own alert.Evaluator; it touches nothing else, and hands the job
// back to the loop that sent it (alertJob.reply).
type alertWorkers struct {
	jobs chan *alertJob // loops → workers, unbuffered
	maxH int            // longest horizon, for the workers' evaluators
	wg   sync.WaitGroup
}

func newAlertWorkers(maxH int) *alertWorkers {
	return &alertWorkers{jobs: make(chan *alertJob), maxH: maxH}
}

// alertWorkerCount is the size of the alert pool: one per core the
// process may use.
func alertWorkerCount() int { return max(1, runtime.GOMAXPROCS(0)) }

// start runs n workers, each with its own evaluator. If an evaluator
// cannot be made, no worker runs.
func (w *alertWorkers) start(n int) error {
	evs := make([]*alert.Evaluator, n)
	for i := range evs {
		ev, err := alert.NewEvaluator(w.maxH, 0)
		if err != nil {
			return fmt.Errorf("daemon: %w", err)
		}
		evs[i] = ev
	}
	for _, ev := range evs {
		w.wg.Add(1)
		go func() {
			defer w.wg.Done()
			for j := range w.jobs {
				j.wait = time.Since(j.queued)
				j.w.Run(ev)
				j.reply <- j
			}
		}()
	}
	return nil
}

// stop ends the workers once they have finished their jobs; every loop
// must have taken every job back first (alerting is 0).
func (w *alertWorkers) stop() {
	close(w.jobs)
	w.wg.Wait()
}

// alertPool is one loop's side of the alert workers. Jobs go loop →
// worker on jobs and come back on done. Everything else here is the
// loop's: the queue (first in, first out), the free list, the loop's own
// evaluator (the cheap screens) and the late-answer log's state.
type alertPool struct {
	jobs chan<- *alertJob // the workers'
	done chan *alertJob   // workers → this loop

	// Loop-owned.
	evaluator  *alert.Evaluator    // the loop's: screens only
	events     []series.AlertEvent // alert events of one evaluation, reused
	queue      []*alertJob         // evaluations waiting for a worker, oldest first
	free       []*alertJob         // finished jobs, reused
	scratch    *alertJob           // the next evaluation's work
	alerting   int                 // series waiting for an alert evaluation
	lateLogged time.Time           // wall time of the last "late" log line
	lateQuiet  int                 // late answers since then, not logged
}

// alertJob is one close's alert evaluation that needs a simulation: the
// work prepared on the loop (series.Series.PrepareAlerts), run by an alert
// worker, finished on the loop.
type alertJob struct {
	topic  string
	e      *entry
	w      series.AlertWork
	issued time.Time        // the close's "issued" time, for the alert messages
	queued time.Time        // wall time it entered the queue
	wait   time.Duration    // time in the queue (set by the worker)
	reply  chan<- *alertJob // the sending loop's done
}

func newAlertPool(w *alertWorkers) (*alertPool, error) {
	ev, err := alert.NewEvaluator(w.maxH, 0)
	if err != nil {
		return nil, fmt.Errorf("daemon: %w", err)
	}
	return &alertPool{
		jobs:      w.jobs,
		done:      make(chan *alertJob, 64),
		evaluator: ev,
		scratch:   new(alertJob),
	}, nil
}

// next is refitPool.next for the alert queue.
func (p *alertPool) next() (chan<- *alertJob, *alertJob) {
	if len(p.queue) == 0 {
		return nil, nil
	}
	return p.jobs, p.queue[0]
}

// sent drops the job next returned: a worker has it.
func (p *alertPool) sent() { p.queue = p.queue[1:] }

// evaluate starts the evaluation of the series' alert rules on its latest
// forecast (engine/series does the work). The rules the cheap screens
// answer (exact, marginal, skip bound, bracket) are finished here; when
// one needs a simulation, the work goes to the alert pool and the series
// is held, like a refit, until it comes back (finishAlert): its next
// observations wait in its queue, so its next evaluation sees the rule
// states this one leaves (alert.Rule.Current) and its messages keep their
// order. Other series carry on meanwhile.
func (d *loop) evaluate(topic string, e *entry, now time.Time) {
	p := d.alerts
	j := p.scratch
	if err := e.s.PrepareAlerts(&j.w, e.rules, p.evaluator); err != nil {
		d.log.Warn("alert evaluation failed", "topic", topic, "err", err)
		return
	}
	if j.w.Pending() == 0 {
		d.finishAlerts(topic, e, j, now)
		return
	}
	if n := len(p.free); n > 0 {
		p.scratch, p.free = p.free[n-1], p.free[:n-1]
	} else {
		p.scratch = new(alertJob)
	}
	j.topic, j.e, j.issued, j.queued, j.reply = topic, e, now, time.Now(), p.done
	e.alerting = true
	p.alerting++
	d.metrics.AlertsQueued.Inc()
	p.queue = append(p.queue, j)
}

// finishAlert takes back an evaluation from the alert pool: it steps the
// rules' hysteresis, publishes the events, counts a late answer (one that
// observations of its series had to wait for) and releases the
// observations held behind it (not during shutdown, see Run).
func (d *loop) finishAlert(j *alertJob) {
	p := d.alerts
	e := j.e
	e.alerting = false
	p.alerting--
	d.metrics.AlertsQueued.Dec()
	d.metrics.AlertQueueSeconds.Observe(j.wait.Seconds())
	e.dirty = true
	d.finishAlerts(j.topic, e, j, j.issued)
	if len(e.pending) > 0 {
		d.late(j)
	}
	j.e = nil
	p.free = append(p.free, j)
	if !d.stopping {
		d.release(j.topic, e)
	}
}

// late counts an alert answer that came after its series' next
// observation arrived, and logs it, at most one line a second (wall time)
// with the number of late answers not logged since.
func (d *loop) late(j *alertJob) {
	p := d.alerts
	d.metrics.AlertsLate.Inc()
	now := time.Now()
	if now.Sub(p.lateLogged) < time.Second {
		p.lateQuiet++
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
		"held_observations", len(j.e.pending), "queued_evaluations", len(p.queue), "late_not_logged", p.lateQuiet)
	p.lateLogged, p.lateQuiet = now, 0
}

// finishAlerts finishes an evaluation prepared on the series (and run, if
// it needed a simulation) and publishes the alerts it returns.
func (d *loop) finishAlerts(topic string, e *entry, j *alertJob, now time.Time) {
	p := d.alerts
	var err error
	p.events, err = e.s.FinishAlerts(p.events[:0], &j.w)
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
	for i := range p.events {
		ev := &p.events[i]
		d.pub.alert(topic, ev, now)
		d.metrics.Alerts.Inc()
		if d.opt.OnAlert != nil {
			d.top.hookMu.Lock()
			d.opt.OnAlert(ev)
			d.top.hookMu.Unlock()
		}
	}
}
