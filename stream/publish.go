package stream

import (
	"fmt"
	"strconv"
	"strings"

	"github.com/nats-io/nats.go"

	"forewarn/config"
)

// Publisher publishes the daemon's output messages under a subject prefix
// (CONTRACT.md §2): <prefix>.forecast.<topic>, <prefix>.alert.<topic> and
// <prefix>.reject.<topic>. It only moves bytes: the payloads come from
// AppendForecast, AppendAlert and AppendReject. It is safe for concurrent
// use, as the connection is.
type Publisher struct {
	nc     *nats.Conn
	prefix string
}

// NewPublisher returns a Publisher on nc under prefix ("" → the
// configuration's default output.prefix, "forewarn").
func NewPublisher(nc *nats.Conn, prefix string) *Publisher {
	if prefix == "" {
		prefix = config.Default().Output.Prefix
	}
	return &Publisher{nc: nc, prefix: prefix}
}

// Prefix returns the subject prefix.
func (p *Publisher) Prefix() string { return p.prefix }

func (p *Publisher) publish(kind, topic string, payload []byte) error {
	return p.publishOn(p.prefix+kind+topic, payload)
}

func (p *Publisher) publishOn(subject string, payload []byte) error {
	if err := p.nc.Publish(subject, payload); err != nil {
		return fmt.Errorf("stream: publish on %q: %w", subject, err)
	}
	return nil
}

// ForecastSubject returns <prefix>.forecast.<topic>. A caller that
// publishes many forecasts of a topic keeps it and passes it to Forecast.
func (p *Publisher) ForecastSubject(topic string) string {
	return p.prefix + ".forecast." + topic
}

// Forecast publishes an encoded forecast on subject, which
// ForecastSubject made. The connection copies payload before Forecast
// returns.
func (p *Publisher) Forecast(subject string, payload []byte) error {
	return p.publishOn(subject, payload)
}

// ForecastOwned publishes an encoded forecast on subject, as Forecast
// does, with the owner headers of cluster mode: PartitionHeader and
// EpochHeader (issue 15). msg is the caller's, reused between calls.
func (p *Publisher) ForecastOwned(msg *nats.Msg, subject string, payload []byte, partition int, epoch uint64) error {
	if msg.Header == nil {
		msg.Header = nats.Header{}
	}
	msg.Subject, msg.Data = subject, payload
	msg.Header.Set(PartitionHeader, strconv.Itoa(partition))
	msg.Header.Set(EpochHeader, strconv.FormatUint(epoch, 10))
	if err := p.nc.PublishMsg(msg); err != nil {
		return fmt.Errorf("stream: publish on %q: %w", subject, err)
	}
	return nil
}

// Alert publishes an encoded alert event on <prefix>.alert.<topic>.
func (p *Publisher) Alert(topic string, payload []byte) error {
	return p.publish(".alert.", topic, payload)
}

// Reject publishes an encoded reject message on <prefix>.reject.<topic>.
// A message whose subject carries no valid topic is published on
// <prefix>.reject with topic "" in the payload: pass topic "".
func (p *Publisher) Reject(topic string, payload []byte) error {
	if topic == "" {
		return p.publishOn(p.prefix+".reject", payload)
	}
	return p.publish(".reject.", topic, payload)
}

// Flush waits until the server has received everything published so far.
func (p *Publisher) Flush() error {
	if err := p.nc.Flush(); err != nil {
		return fmt.Errorf("stream: flush: %w", err)
	}
	return nil
}

// NoForecastReason is the error text of a query reply for a topic without a
// forecast.
func NoForecastReason(topic string) string {
	return fmt.Sprintf("no forecast for topic %q yet (warming up or unknown)", topic)
}

// ServeQueries answers requests on <prefix>.query.<topic> with the latest
// forecast message that lookup returns for the topic, or with
// {"error": "..."} when lookup has none. lookup is called on the
// subscription's goroutine, one request at a time; the bytes it returns are
// copied before the next call. Unsubscribe or drain the returned
// subscription to stop.
func ServeQueries(nc *nats.Conn, prefix string, lookup func(topic string) ([]byte, bool)) (*nats.Subscription, error) {
	return ServeQueriesOwned(nc, prefix, nil, lookup)
}

// ServeQueriesOwned is ServeQueries for an instance that answers only for
// the topics owns accepts (cluster mode: the topics of its partitions); a
// request for another topic gets no reply from it. owns nil accepts every
// topic. owns is called on the subscription's goroutine.
func ServeQueriesOwned(nc *nats.Conn, prefix string, owns func(topic string) bool, lookup func(topic string) ([]byte, bool)) (*nats.Subscription, error) {
	if prefix == "" {
		prefix = config.Default().Output.Prefix
	}
	base := prefix + ".query."
	sub, err := nc.Subscribe(base+">", func(m *nats.Msg) {
		if m.Reply == "" {
			return
		}
		topic, _ := strings.CutPrefix(m.Subject, base)
		if owns != nil && !owns(topic) {
			return // another instance owns it and answers
		}
		if data, ok := lookup(topic); ok {
			_ = m.Respond(data)
			return
		}
		_ = m.Respond(AppendError(nil, NoForecastReason(topic)))
	})
	if err != nil {
		return nil, fmt.Errorf("stream: serve queries on %q: %w", base+">", err)
	}
	// The round trip makes the server register the subscription before we
	// return, so a query sent on another connection right after finds it.
	if err := nc.Flush(); err != nil {
		_ = sub.Unsubscribe()
		return nil, fmt.Errorf("stream: serve queries on %q: %w", base+">", err)
	}
	return sub, nil
}
