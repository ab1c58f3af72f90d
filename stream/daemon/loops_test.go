package daemon

import (
	"forewarn/stream"
)

// Test helpers over the loops; only inside Inspect (every loop paused).

// loopFor is the loop that owns topic's series.
func (d *Daemon) loopFor(topic string) *loop { return d.loops[d.route.loopOfTopic(topic)] }

// handleBatch applies batch as the loops would: each message on the loop
// of its partition, in order.
func (d *Daemon) handleBatch(batch []stream.Message) {
	for i := range batch {
		d.loops[d.route.loopOf(&batch[i])].handle(&batch[i])
	}
}

// entryOf is topic's entry, on whichever loop owns it (nil: none).
func (d *Daemon) entryOf(topic string) *entry { return d.loopFor(topic).series[topic] }
