package daemon

import (
	"sync"

	"forewarn/engine/series"
)

// refitWorkers is the bounded set of refit worker goroutines that every
// loop's refits run on (refit.workers of them, however many loops: the
// key keeps its meaning, and a loop whose series are quiet leaves the
// cores to the others).
//
// The workers own nothing but the job they hold: a series.FitJob works on
// a copy of the window, and its result goes back to the loop that sent
// it, on that loop's refitPool.results.
type refitWorkers struct {
	jobs chan fitTask // loops → workers, unbuffered
	wg   sync.WaitGroup
}

func newRefitWorkers() *refitWorkers { return &refitWorkers{jobs: make(chan fitTask)} }

// start runs n workers.
func (w *refitWorkers) start(n int) {
	for range n {
		w.wg.Add(1)
		go func() {
			defer w.wg.Done()
			for t := range w.jobs {
				t.reply <- fitDone{topic: t.topic, result: t.job.Run()}
			}
		}()
	}
}

// stop ends the workers once they have finished their jobs; every loop
// must have taken every result first (busy is 0).
func (w *refitWorkers) stop() {
	close(w.jobs)
	w.wg.Wait()
}

// refitPool is one loop's side of the refit workers. queue and busy are
// the loop's: the loop appends a refit to queue (it never blocks on the
// workers), hands the first one over when a worker is free (next, then
// sent), and installs results itself (loop.finishFit).
type refitPool struct {
	jobs    chan<- fitTask // the workers'
	results chan fitDone   // workers → this loop

	// Loop-owned.
	queue []fitTask // refits waiting for a worker
	busy  int       // series waiting for a refit (queued or running)
}

type fitTask struct {
	topic string
	job   *series.FitJob
	reply chan<- fitDone // the sending loop's results
}

type fitDone struct {
	topic  string
	result series.FitResult
}

func newRefitPool(w *refitWorkers) *refitPool {
	return &refitPool{jobs: w.jobs, results: make(chan fitDone, 64)}
}

// add queues a refit; the series counts as busy until its result is taken.
func (p *refitPool) add(t fitTask) {
	p.busy++
	t.reply = p.results
	p.queue = append(p.queue, t)
}

// next returns the pool's channel and the first waiting refit, or a nil
// channel (a select case that never fires) when none waits. After a send
// on it, the loop calls sent.
func (p *refitPool) next() (chan<- fitTask, fitTask) {
	if len(p.queue) == 0 {
		return nil, fitTask{}
	}
	return p.jobs, p.queue[0]
}

// sent drops the refit next returned: a worker has it.
func (p *refitPool) sent() { p.queue = p.queue[1:] }

// taken counts a result the loop has received.
func (p *refitPool) taken() { p.busy-- }
