package daemon

import (
	"sync"

	"forewarn/engine/series"
)

// refitPool runs refits on a bounded set of worker goroutines.
//
// The workers own nothing but the job they hold: a series.FitJob works on
// a copy of the window, and its result comes back to the loop on results.
// queue and busy are the loop's: the loop appends a refit to queue (it
// never blocks on the pool), hands the first one over when a worker is
// free (next, then sent), and installs results itself (Daemon.finishFit).
type refitPool struct {
	jobs    chan fitTask // loop → workers, unbuffered
	results chan fitDone // workers → loop
	wg      sync.WaitGroup

	// Loop-owned.
	queue []fitTask // refits waiting for a worker
	busy  int       // series waiting for a refit (queued or running)
}

type fitTask struct {
	topic string
	job   *series.FitJob
}

type fitDone struct {
	topic  string
	result series.FitResult
}

func newRefitPool() *refitPool {
	return &refitPool{jobs: make(chan fitTask), results: make(chan fitDone, 64)}
}

// start runs n workers.
func (p *refitPool) start(n int) {
	for range n {
		p.wg.Add(1)
		go func() {
			defer p.wg.Done()
			for t := range p.jobs {
				p.results <- fitDone{topic: t.topic, result: t.job.Run()}
			}
		}()
	}
}

// stop ends the workers once they have finished their jobs; the loop
// must have taken every result first (busy is 0).
func (p *refitPool) stop() {
	close(p.jobs)
	p.wg.Wait()
}

// add queues a refit; the series counts as busy until its result is taken.
func (p *refitPool) add(t fitTask) {
	p.busy++
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
