package daemon

import (
	"log/slog"
	"sync"
	"time"

	"github.com/nats-io/nats.go"

	"forewarn/engine/series"
	"forewarn/stream"
)

// publisher publishes forecasts, alerts and rejects, and keeps the latest
// forecast message of each topic for queries.
//
// Forecasts go to the encoder goroutine, which owns the slots it holds,
// turns them into raw units, encodes and publishes them in the order the
// loop made them, and installs each message as its topic's latest. Alerts
// and rejects are small and are encoded and published on the loop
// (encBuf is the loop's). latest is the one structure shared by more than
// one goroutine: the encoder writes it, queries and pages read it, under
// mu, which is held for a map access only.
type publisher struct {
	pub     *stream.Publisher
	log     *slog.Logger
	metrics *Metrics
	free    chan *slot    // empty forecast slots
	out     chan *slot    // loop → encoder, in order
	done    chan struct{} // closed when the encoder returns

	mu     sync.RWMutex
	latest map[string][]byte // latest forecast JSON per topic, for queries

	// Loop-owned.
	encBuf []byte
}

// slot carries one forecast from the loop to the encoder, on the model
// scale; the encoder fills its raw-unit form. Slots circulate between
// free and out, so publishing allocates nothing.
type slot struct {
	mf      series.ModelForecast
	fc      series.Forecast
	issued  time.Time
	subject string
	// cluster mode (issue 15): the series' partition and the epoch its
	// owner holds it at, sent as headers; epoch 0: no headers.
	part  int
	epoch uint64
}

// outSlots bounds the forecasts waiting for the encoder.
const outSlots = 1024

func newPublisher(nc *nats.Conn, prefix string, log *slog.Logger, m *Metrics) *publisher {
	return &publisher{
		pub:     stream.NewPublisher(nc, prefix),
		log:     log,
		metrics: m,
		free:    make(chan *slot, outSlots),
		out:     make(chan *slot, outSlots),
		done:    make(chan struct{}),
		latest:  make(map[string][]byte),
	}
}

// start fills the free slots and runs the encoder.
func (p *publisher) start() {
	for range outSlots {
		p.free <- new(slot)
	}
	go func() {
		defer close(p.done)
		p.encodeLoop()
	}()
}

// stop lets the encoder publish what it holds and waits for it. The loop
// publishes no forecast afterwards.
func (p *publisher) stop() {
	close(p.out)
	<-p.done
}

// forecastSubject is where topic's forecasts go.
func (p *publisher) forecastSubject(topic string) string { return p.pub.ForecastSubject(topic) }

// forecast hands a copy of mf to the encoder. It waits only when the
// encoder is a full queue behind. Loop only.
func (p *publisher) forecast(mf *series.ModelForecast, issued time.Time, subject string) {
	sl := <-p.free
	sl.mf.CopyFrom(mf)
	sl.issued, sl.subject = issued, subject
	sl.part, sl.epoch = 0, 0
	p.out <- sl
}

// forecastOwned is forecast with the owner headers of cluster mode
// (stream.PartitionHeader, stream.EpochHeader). Loop only.
func (p *publisher) forecastOwned(mf *series.ModelForecast, issued time.Time, subject string, part int, epoch uint64) {
	sl := <-p.free
	sl.mf.CopyFrom(mf)
	sl.issued, sl.subject = issued, subject
	sl.part, sl.epoch = part, epoch
	p.out <- sl
}

// encodeLoop turns forecasts into raw units, encodes and publishes them in
// the order the loop made them, and keeps the latest one per topic for
// queries. It runs on its own goroutine so that this, the costliest part
// of a bucket close, uses another core than the loop. Filling a copy of
// the series' model-scale forecast gives exactly what Series.Forecast
// gives (ModelForecast.Fill is a function of the copy alone).
func (p *publisher) encodeLoop() {
	var buf []byte
	var msg nats.Msg // reused for the owner headers
	for sl := range p.out {
		sl.mf.Fill(&sl.fc)
		buf = stream.AppendForecast(buf[:0], &sl.fc, sl.issued)
		var err error
		if sl.epoch != 0 {
			err = p.pub.ForecastOwned(&msg, sl.subject, buf, sl.part, sl.epoch)
		} else {
			err = p.pub.Forecast(sl.subject, buf)
		}
		if err != nil {
			p.log.Warn("forecast not published", "topic", sl.fc.Topic, "err", err)
		}
		// The message becomes the topic's latest, and the one it replaces
		// the next encoding buffer: no copy.
		p.mu.Lock()
		buf, p.latest[sl.fc.Topic] = p.latest[sl.fc.Topic], buf
		p.mu.Unlock()
		p.metrics.Published.Inc()
		p.free <- sl
	}
}

// Latest returns a copy of the latest forecast message of topic. Safe for
// concurrent use.
func (p *publisher) Latest(topic string) ([]byte, bool) {
	p.mu.RLock()
	defer p.mu.RUnlock()
	b, ok := p.latest[topic]
	if !ok {
		return nil, false
	}
	return append([]byte(nil), b...), true // the encoder reuses b
}

// storeLatest makes the series' current forecast its topic's latest
// message without publishing it (a series restored with a model).
func (p *publisher) storeLatest(s *series.Series, issued time.Time) {
	b := stream.AppendForecast(nil, s.Forecast(), issued)
	p.mu.Lock()
	p.latest[s.Topic()] = b
	p.mu.Unlock()
}

// alert encodes and publishes one alert event. Loop only.
func (p *publisher) alert(topic string, ev *series.AlertEvent, issued time.Time) {
	p.encBuf = stream.AppendAlert(p.encBuf[:0], ev, issued)
	p.pub.Alert(topic, p.encBuf)
}

// rejectMsg encodes and publishes one reject. Loop only.
func (p *publisher) rejectMsg(subject, topic, code, reason string, received time.Time) {
	p.encBuf = stream.AppendReject(p.encBuf[:0], subject, topic, code, reason, received)
	p.pub.Reject(topic, p.encBuf)
}

// flush flushes the connection's buffered publications.
func (p *publisher) flush() { p.pub.Flush() }
