package source

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"math"
	"net"
	"net/http"
	"slices"
	"strconv"
	"sync"
	"syscall"
	"time"

	"github.com/nats-io/nats.go"

	"forewarn/config"
	"forewarn/stream"
)

// Options configure a Runner.
type Options struct {
	// Sources to scrape, with their defaults filled in (a Config from
	// config.Load or WithDefaults).
	Sources []config.Source
	// Conn is the bus connection the observations are published on.
	Conn *nats.Conn
	// Prefix is the intake subject prefix, e.g. "metrics." (the literal
	// part of the first intake subject, config.Config.Prefixes()[0]).
	Prefix string
	// MaxSeries bounds the distinct topics all sources together publish
	// (limits.max_series). Zero: config.DefaultLimits().MaxSeries.
	MaxSeries int
	// Logger receives a line per failed scrape (and per change of
	// outcome). Nil: slog.Default().
	Logger *slog.Logger
	// Client makes the requests. Nil: a client of the Runner's own.
	Client *http.Client
	// Now is the wall clock that stamps a scrape. Nil: time.Now.
	Now func() time.Time
	// Owns reports whether this instance scrapes src now; it is asked
	// before every scrape, from the source's goroutine. Nil: every
	// source, always. Cluster mode passes ByPartition (cluster.go).
	Owns func(src *config.Source) bool
}

// Runner scrapes every source in a goroutine of its own and publishes the
// selected samples. Its Metrics are ready from New on.
type Runner struct {
	o       Options
	metrics *Metrics
	budget  *budget
}

// New checks the options and creates the metrics.
func New(o Options) (*Runner, error) {
	if o.Conn == nil {
		return nil, fmt.Errorf("%w: no bus connection", ErrOptions)
	}
	if o.Prefix == "" {
		return nil, fmt.Errorf("%w: no intake subject prefix", ErrOptions)
	}
	if o.MaxSeries <= 0 {
		o.MaxSeries = config.DefaultLimits().MaxSeries
	}
	if o.Logger == nil {
		o.Logger = slog.Default()
	}
	if o.Client == nil {
		tr := http.DefaultTransport.(*http.Transport).Clone()
		tr.MaxIdleConnsPerHost = 4
		o.Client = &http.Client{Transport: tr}
	}
	if o.Now == nil {
		o.Now = time.Now
	}
	names := make([]string, len(o.Sources))
	for i, s := range o.Sources {
		if s.Every <= 0 || s.Timeout <= 0 || s.MaxBytes <= 0 || s.Name == "" {
			return nil, fmt.Errorf("%w: source %d (%q) has no defaults filled in", ErrOptions, i, s.OpenMetrics)
		}
		names[i] = s.Name
	}
	return &Runner{o: o, metrics: newMetrics(names), budget: &budget{max: o.MaxSeries, known: map[string]struct{}{}}}, nil
}

// Metrics returns the sources' metrics.
func (r *Runner) Metrics() *Metrics { return r.metrics }

// Run scrapes every source, the first time at once and then every Every,
// until ctx ends; it returns once every scrape in progress has stopped. A
// scrape that fails is counted and logged and never stops its source or
// any other.
func (r *Runner) Run(ctx context.Context) error {
	var wg sync.WaitGroup
	for i := range r.o.Sources {
		s := newScraper(r, &r.o.Sources[i])
		wg.Add(1)
		go func() {
			defer wg.Done()
			s.loop(ctx)
		}()
	}
	wg.Wait()
	return nil
}

// budget is the set of topics published so far, bounded by max: shared by
// every source, since the daemon's limits.max_series bounds them together.
type budget struct {
	mu    sync.Mutex
	max   int
	known map[string]struct{}
}

// admit reports whether topic may be published: it is known, or there is
// room for it (and it becomes known).
func (b *budget) admit(topic []byte) bool {
	b.mu.Lock()
	defer b.mu.Unlock()
	if _, ok := b.known[string(topic)]; ok {
		return true
	}
	if len(b.known) >= b.max {
		return false
	}
	b.known[string(topic)] = struct{}{}
	return true
}

// scraper is one source's state; only its own goroutine touches it.
type scraper struct {
	r       *Runner
	src     *config.Source
	keep    func(string) bool
	log     *slog.Logger
	samples []Sample
	topic   []byte
	data    []byte
	body    bytes.Buffer

	lastOutcome string    // "" after a clean scrape, else the last cause
	lastLog     time.Time // when the last failure line was written
	quiet       int       // failures not logged since lastLog
}

func newScraper(r *Runner, src *config.Source) *scraper {
	s := &scraper{r: r, src: src,
		log: r.o.Logger.With("source", src.Name, "url", src.OpenMetrics)}
	if len(src.Select) > 0 {
		sel := make(map[string]struct{}, len(src.Select))
		for _, n := range src.Select {
			sel[n] = struct{}{}
		}
		s.keep = func(name string) bool { _, ok := sel[name]; return ok }
	}
	return s
}

func (s *scraper) loop(ctx context.Context) {
	t := time.NewTicker(s.src.Every)
	defer t.Stop()
	for {
		if s.r.o.Owns == nil || s.r.o.Owns(s.src) {
			s.r.metrics.Scraping.WithLabelValues(s.src.Name).Set(1)
			s.scrape(ctx)
		} else {
			s.r.metrics.Scraping.WithLabelValues(s.src.Name).Set(0)
		}
		select {
		case <-ctx.Done():
			return
		case <-t.C:
		}
	}
}

// failure is why a scrape failed: a cause and what happened.
type failure struct {
	cause string
	err   error
}

// scrape fetches, parses and publishes once, and counts the outcome.
func (s *scraper) scrape(ctx context.Context) {
	m := s.r.metrics
	name := s.src.Name
	m.Scrapes.WithLabelValues(name).Inc()
	began := time.Now()
	f := s.once(ctx, s.r.o.Now())
	if ctx.Err() != nil && f != nil {
		return // stopped while scraping: not the endpoint's fault
	}
	m.Duration.WithLabelValues(name).Observe(time.Since(began).Seconds())
	if f != nil {
		m.Failures.WithLabelValues(name, f.cause).Inc()
	}
	s.report(f)
}

// report logs a failure when the outcome changes, and otherwise at most
// once a minute with the number of failures not logged; a recovery is
// logged once.
func (s *scraper) report(f *failure) {
	now := time.Now()
	switch {
	case f == nil && s.lastOutcome != "":
		s.log.Info("source scraped again after failures", "failures_since_last_line", s.quiet)
		s.lastOutcome, s.quiet = "", 0
	case f == nil:
	case f.cause != s.lastOutcome || now.Sub(s.lastLog) >= time.Minute:
		s.log.Warn("source scrape failed", "cause", f.cause, "err", f.err, "failures_since_last_line", s.quiet)
		s.lastOutcome, s.lastLog, s.quiet = f.cause, now, 0
	default:
		s.quiet++
	}
}

func (s *scraper) once(ctx context.Context, at time.Time) *failure {
	ctx, cancel := context.WithTimeout(ctx, s.src.Timeout)
	defer cancel()
	req, err := http.NewRequestWithContext(ctx, http.MethodGet, s.src.OpenMetrics, nil)
	if err != nil {
		return &failure{CauseUnreachable, err}
	}
	req.Header.Set("Accept", accept)
	resp, err := s.r.o.Client.Do(req)
	if err != nil {
		return &failure{classify(err), err}
	}
	defer resp.Body.Close()
	if resp.StatusCode != http.StatusOK {
		_, _ = io.Copy(io.Discard, io.LimitReader(resp.Body, 4096))
		return &failure{CauseHTTPStatus, fmt.Errorf("HTTP status %s", resp.Status)}
	}
	s.body.Reset()
	n, err := s.body.ReadFrom(io.LimitReader(resp.Body, s.src.MaxBytes+1))
	if err != nil {
		return &failure{classify(err), fmt.Errorf("reading the body: %w", err)}
	}
	if n > s.src.MaxBytes {
		return &failure{CauseTooLarge, fmt.Errorf("the body is longer than max_bytes %d", s.src.MaxBytes)}
	}
	s.samples, err = Parse(s.samples[:0], s.body.Bytes(), resp.Header, s.keep)
	if err != nil {
		return &failure{CauseMalformed, err}
	}
	return s.publish(at)
}

// classify names the cause of a failed request or body read.
func classify(err error) string {
	var ne net.Error
	switch {
	case errors.Is(err, context.DeadlineExceeded), errors.As(err, &ne) && ne.Timeout():
		return CauseTimeout
	case errors.Is(err, syscall.ECONNREFUSED):
		return CauseRefused
	}
	return CauseUnreachable
}

// publish sends each selected sample to the intake subject of its topic,
// stamped at. Samples are taken in the order of their topics, so that the
// series left out beyond limits.max_series are always the same ones.
func (s *scraper) publish(at time.Time) *failure {
	m := s.r.metrics
	name := s.src.Name
	type keyed struct {
		topic string
		i     int
	}
	keys := make([]keyed, 0, len(s.samples))
	for i := range s.samples {
		smp := &s.samples[i]
		if math.IsNaN(smp.Value) || math.IsInf(smp.Value, 0) {
			m.Dropped.WithLabelValues(name, DropNotFinite).Inc()
			continue
		}
		s.topic = AppendTopic(s.topic[:0], s.src.TopicPrefix, smp.Name, smp.Labels)
		if config.ValidTopic(string(s.topic)) != nil {
			m.Dropped.WithLabelValues(name, DropBadTopic).Inc()
			continue
		}
		keys = append(keys, keyed{string(s.topic), i})
	}
	slices.SortStableFunc(keys, func(a, b keyed) int {
		switch {
		case a.topic < b.topic:
			return -1
		case a.topic > b.topic:
			return 1
		}
		return a.i - b.i
	})
	stamp := strconv.AppendInt(nil, at.Unix(), 10)
	stamp = append(stamp, '.')
	stamp = append(stamp, fmt.Sprintf("%03d", at.Nanosecond()/1e6)...)
	var (
		sent, beyond int
		pubErr       error
	)
	for j, k := range keys {
		if j+1 < len(keys) && keys[j+1].topic == k.topic {
			// Several samples with one topic: the last one on the page
			// wins (of several MetricPoints of one Metric, the newest).
			m.Dropped.WithLabelValues(name, DropDuplicate).Inc()
			continue
		}
		if !s.r.budget.admit([]byte(k.topic)) {
			m.Dropped.WithLabelValues(name, DropTooManySeries).Inc()
			beyond++
			continue
		}
		smp := &s.samples[k.i]
		kind := "gauge"
		switch {
		case s.src.Kind == "counter" || s.src.Kind == "auto" && smp.Counter:
			kind = "counter"
		}
		s.data = append(s.data[:0], `{"time":`...)
		s.data = append(s.data, stamp...)
		s.data = append(s.data, `,"value":`...)
		s.data = strconv.AppendFloat(s.data, smp.Value, 'g', -1, 64)
		s.data = append(s.data, '}')
		msg := &nats.Msg{Subject: s.r.o.Prefix + k.topic, Data: bytes.Clone(s.data), Header: nats.Header{stream.KindHeader: {kind}}}
		if err := s.r.o.Conn.PublishMsg(msg); err != nil {
			pubErr = err
			break
		}
		sent++
	}
	m.Published.WithLabelValues(name).Add(float64(sent))
	m.Series.WithLabelValues(name).Set(float64(sent))
	switch {
	case pubErr != nil:
		return &failure{CausePublish, pubErr}
	case beyond > 0:
		return &failure{CauseTooManySeries, fmt.Errorf("%d series left out: limits.max_series is %d", beyond, s.r.budget.max)}
	}
	return nil
}
