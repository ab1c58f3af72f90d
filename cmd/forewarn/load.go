package main

import (
	"context"
	"encoding/csv"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"forewarn/config"
	"forewarn/stream"
)

func init() {
	register("load", "publish a CSV's history to metrics.<topic> through JetStream, each message acknowledged", runLoad)
}

// Bounds of one load message: under the daemon's default limits
// (limits.max_batch 1000 observations, limits.max_payload_bytes 65536).
const (
	loadMaxBatch   = 1000
	loadMaxPayload = 60000
	loadMaxListed  = 20 // bad rows listed one a line; the rest are counted
)

// loadRow is one observation of the file, with the line it came from.
type loadRow struct {
	line int
	t    time.Time
	v    float64
}

// badRow is a row that cannot be published, with why.
type badRow struct {
	line int
	why  string
}

// readLoadCSV reads the rows of a CSV with a header, a time column (the
// first) and a value column (column, else the last), with the rules of
// CONTRACT.md §3: times are RFC 3339 or Unix seconds, an empty cell, NA or
// NaN is a missing value (left out: buckets without data are missing).
// Times must increase. It returns every good row and every bad one; a
// problem with the file as a whole is an error.
func readLoadCSV(r io.Reader, path, column string) (rows []loadRow, bad []badRow, missing int, err error) {
	cr := csv.NewReader(r)
	cr.TrimLeadingSpace = true
	cr.FieldsPerRecord = -1
	header, vcol, err := readHeader(cr, path, column)
	if err != nil {
		return nil, nil, 0, err
	}
	if len(header) < 2 || vcol == 0 {
		return nil, nil, 0, fmt.Errorf("%s:1: load needs a time column first and a value column (columns: %s)", path, strings.Join(header, ", "))
	}
	var last time.Time
	for {
		rec, err := cr.Read()
		if errors.Is(err, io.EOF) {
			break
		}
		line, _ := cr.FieldPos(0)
		var pe *csv.ParseError
		if errors.As(err, &pe) {
			bad = append(bad, badRow{pe.Line, pe.Err.Error()})
			continue
		}
		if err != nil {
			return nil, nil, 0, csvError(path, err)
		}
		if len(rec) != len(header) {
			bad = append(bad, badRow{line, fmt.Sprintf("%d fields, the header has %d", len(rec), len(header))})
			continue
		}
		t, ok := parseInstant(rec[0])
		if !ok {
			bad = append(bad, badRow{line, fmt.Sprintf("time %q is neither an RFC 3339 time nor Unix seconds", rec[0])})
			continue
		}
		cell := strings.TrimSpace(rec[vcol])
		switch cell {
		case "", "NA", "NaN", "nan", "NAN":
			missing++
			continue
		}
		v, perr := strconv.ParseFloat(cell, 64)
		if perr != nil || math.IsInf(v, 0) || math.IsNaN(v) {
			bad = append(bad, badRow{line, fmt.Sprintf("column %q: %q is not a finite number (use an empty cell, NA or NaN for a missing value)", header[vcol], cell)})
			continue
		}
		if !last.IsZero() && !t.After(last) {
			bad = append(bad, badRow{line, fmt.Sprintf("time %s does not come after the row before (%s); times must increase",
				t.Format(time.RFC3339Nano), last.Format(time.RFC3339Nano))})
			continue
		}
		last = t
		rows = append(rows, loadRow{line, t, v})
	}
	return rows, bad, missing, nil
}

// latestOrigin asks the daemon for topic's latest forecast and returns the
// start of its last closed bucket and its step; ok is false when no daemon
// answers or the topic has no forecast yet (a note says which).
func latestOrigin(nc *nats.Conn, subject string, timeout time.Duration) (origin time.Time, step time.Duration, note string, ok bool) {
	m, err := nc.Request(subject, nil, timeout)
	switch {
	case errors.Is(err, nats.ErrNoResponders):
		return time.Time{}, 0, "no daemon answers on " + subject + ", so no row could be checked for lateness", false
	case err != nil:
		return time.Time{}, 0, fmt.Sprintf("no answer on %s (%v), so no row could be checked for lateness", subject, err), false
	}
	var reply struct {
		Error  *string `json:"error"`
		Origin string  `json:"origin"`
		Step   float64 `json:"step_seconds"`
	}
	if err := json.Unmarshal(m.Data, &reply); err != nil {
		return time.Time{}, 0, fmt.Sprintf("the answer on %s is not JSON: %v", subject, err), false
	}
	if reply.Error != nil {
		return time.Time{}, 0, "", false // no forecast yet: nothing closed that we know of
	}
	o, err := time.Parse(time.RFC3339Nano, reply.Origin)
	if err != nil || reply.Step <= 0 {
		return time.Time{}, 0, fmt.Sprintf("the forecast on %s has no usable origin and step", subject), false
	}
	return o, time.Duration(reply.Step * float64(time.Second)), "", true
}

// appendLoadObs appends {"time":T,"value":V} with T in Unix seconds, exact
// to the nanosecond, and V the shortest decimal that reads back the same.
func appendLoadObs(dst []byte, r loadRow) []byte {
	dst = append(dst, `{"time":`...)
	sec, ns := r.t.Unix(), r.t.Nanosecond()
	dst = strconv.AppendInt(dst, sec, 10)
	if ns != 0 {
		dst = append(dst, '.')
		dst = append(dst, fmt.Sprintf("%09d", ns)...)
	}
	dst = append(dst, `,"value":`...)
	dst = strconv.AppendFloat(dst, r.v, 'g', -1, 64)
	return append(dst, '}')
}

// loadPayloads cuts rows into JSON array payloads of at most batch
// observations and loadMaxPayload bytes.
func loadPayloads(rows []loadRow, batch int) (payloads [][]byte, counts []int) {
	var cur []byte
	n := 0
	flush := func() {
		if n > 0 {
			payloads = append(payloads, append(cur, ']'))
			counts = append(counts, n)
		}
		cur, n = nil, 0
	}
	var obs []byte
	for _, r := range rows {
		obs = appendLoadObs(obs[:0], r)
		if n > 0 && (n >= batch || len(cur)+1+len(obs)+1 > loadMaxPayload) {
			flush()
		}
		if n == 0 {
			cur = append(make([]byte, 0, 16<<10), '[')
		} else {
			cur = append(cur, ',')
		}
		cur = append(cur, obs...)
		n++
	}
	flush()
	return payloads, counts
}

// runLoad publishes a CSV's history to <subject prefix><topic> through
// JetStream, every message acknowledged.
func runLoad(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("load", flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: forewarn load [flags] FILE")
		fmt.Fprintln(stderr, "\nPublishes the rows of a CSV (a time column first, a value column) to metrics.TOPIC through")
		fmt.Fprintln(stderr, "JetStream, each message acknowledged, so that a series' forecasts start at once.")
		fmt.Fprintln(stderr, "\nflags:")
		fs.PrintDefaults()
	}
	def := config.Default()
	url := fs.String("nats", "nats://"+def.NATS.Listen, "NATS server `URL` the daemon is on")
	topic := fs.String("topic", "", "the series' `topic` (default: the file's name without its extension)")
	column := fs.String("column", "", "value column `name` (default: the last column)")
	subjectPrefix := fs.String("subject-prefix", "metrics.", "the daemon's intake subject `prefix`")
	prefix := fs.String("prefix", def.Output.Prefix, "the daemon's output subject `prefix` (output.prefix), for the lateness check")
	kind := fs.String("kind", "", "name the series' kind, gauge or counter, in the Forewarn-Kind header (a series entry with kind: auto takes it)")
	skipBad := fs.Bool("skip-bad", false, "publish the good rows when some rows are bad (default: publish nothing)")
	// Full messages by default: the daemon coalesces the refits that fall
	// due inside one message into one at its last close, so a history of
	// n rows costs about n/batch refits (series.ObserveIn).
	batch := fs.Int("batch", loadMaxBatch, "observations per message, at most 1000 (the daemon refits at most once a message)")
	window := fs.Int("window", 64, "messages in flight before waiting for acknowledgements")
	timeout := fs.Duration("timeout", 30*time.Second, "how long to wait for the acknowledgements and the daemon's answer")
	a := authFlags(fs)
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return exitOK
		}
		return exitUsage
	}
	if fs.NArg() != 1 {
		fmt.Fprintf(stderr, "forewarn load: want exactly one FILE, got %d arguments\n", fs.NArg())
		fs.Usage()
		return exitUsage
	}
	path := fs.Arg(0)
	if *topic == "" {
		*topic = strings.TrimSuffix(filepath.Base(path), filepath.Ext(path))
	}
	switch {
	case config.ValidTopic(*topic) != nil:
		fmt.Fprintf(stderr, "forewarn load: %v (give one with --topic)\n", config.ValidTopic(*topic))
		return exitUsage
	case *kind != "" && *kind != "gauge" && *kind != "counter":
		fmt.Fprintf(stderr, "forewarn load: --kind %q: want gauge or counter\n", *kind)
		return exitUsage
	case *batch < 1 || *batch > loadMaxBatch:
		fmt.Fprintf(stderr, "forewarn load: --batch %d is outside 1..%d\n", *batch, loadMaxBatch)
		return exitUsage
	case *window < 1:
		fmt.Fprintf(stderr, "forewarn load: --window %d is less than 1\n", *window)
		return exitUsage
	case *timeout <= 0:
		fmt.Fprintf(stderr, "forewarn load: --timeout must be positive, got %s\n", *timeout)
		return exitUsage
	}
	f, err := os.Open(path)
	if err != nil {
		fmt.Fprintf(stderr, "forewarn load: %v\n", err)
		return exitUsage
	}
	rows, bad, missing, err := readLoadCSV(f, path, *column)
	f.Close()
	if err != nil {
		fmt.Fprintf(stderr, "forewarn load: %v\n", err)
		return exitUsage
	}
	for i, b := range bad {
		if i == loadMaxListed {
			fmt.Fprintf(stderr, "%s: and %d more bad rows\n", path, len(bad)-loadMaxListed)
			break
		}
		fmt.Fprintf(stderr, "%s:%d: %s\n", path, b.line, b.why)
	}
	if len(bad) > 0 && !*skipBad {
		fmt.Fprintf(stderr, "forewarn load: %d bad rows, the first on line %d; nothing was published (--skip-bad publishes the %d good rows)\n",
			len(bad), bad[0].line, len(rows))
		return exitUsage
	}
	if len(rows) == 0 {
		fmt.Fprintf(stderr, "forewarn load: %s has no row to publish\n", path)
		return exitUsage
	}

	nc, err := stream.Connect(*url, *a, "forewarn load")
	if err != nil {
		fmt.Fprintf(stderr, "forewarn load: %v\n", err)
		if errors.Is(err, stream.ErrAuth) {
			return exitUsage
		}
		return exitFailure
	}
	defer nc.Close()

	// Rows the daemon would reject as late: at or before the start of
	// the last bucket it has closed for this series.
	if origin, step, note, ok := latestOrigin(nc, *prefix+".query."+*topic, min(*timeout, 5*time.Second)); ok {
		cut := origin.Add(step)
		late := 0
		for late < len(rows) && rows[late].t.Before(cut) {
			late++
		}
		if late > 0 {
			fmt.Fprintf(stderr, "forewarn load: %d of %d rows fall in buckets up to %s, which the daemon has already closed for %s: they would be rejected as late and are left out\n",
				late, len(rows), origin.Format(time.RFC3339), *topic)
			rows = rows[late:]
		}
		if len(rows) == 0 {
			fmt.Fprintln(stdout, "nothing to publish: every row would be late")
			return exitOK
		}
	} else if note != "" {
		fmt.Fprintf(stderr, "forewarn load: %s\n", note)
	}

	payloads, counts := loadPayloads(rows, *batch)
	start := time.Now()
	var progress func(done, total int)
	if isTerminal(stderr) {
		progress = func(done, total int) { drawLoadBar(stderr, done, total) }
	}
	if err := publishAcked(nc, *subjectPrefix+*topic, *kind, payloads, counts, *window, *timeout, progress); err != nil {
		if progress != nil {
			fmt.Fprintln(stderr)
		}
		fmt.Fprintf(stderr, "forewarn load: %v\n", err)
		return exitFailure
	}
	if progress != nil {
		fmt.Fprintln(stderr)
	}
	took := time.Since(start)
	fmt.Fprintf(stdout, "published %d observations of %s in %d acknowledged messages in %.2f s (%.0f rows/s)",
		len(rows), *topic, len(payloads), took.Seconds(), float64(len(rows))/took.Seconds())
	if missing > 0 || len(bad) > 0 {
		fmt.Fprintf(stdout, "; left out %d missing values and %d bad rows", missing, len(bad))
	}
	fmt.Fprintln(stdout)
	return exitOK
}

// publishAcked publishes the payloads in order on subject with JetStream,
// at most window unacknowledged at a time, and returns once every one is
// acknowledged, or the first failure.
func publishAcked(nc *nats.Conn, subject, kind string, payloads [][]byte, counts []int, window int, timeout time.Duration,
	progress func(done, total int)) error {
	js, err := jetstream.New(nc, jetstream.WithPublishAsyncMaxPending(window))
	if err != nil {
		return err
	}
	total := 0
	for _, c := range counts {
		total += c
	}
	futures := make([]jetstream.PubAckFuture, 0, len(payloads))
	done, acked := 0, 0
	// settle waits for the acknowledgements of futures[acked:upto].
	settle := func(upto int) error {
		for ; acked < upto; acked++ {
			select {
			case <-futures[acked].Ok():
			case err := <-futures[acked].Err():
				return ackError(subject, err)
			case <-time.After(timeout):
				return fmt.Errorf("no acknowledgement on %s within %s", subject, timeout)
			}
			done += counts[acked]
			if progress != nil {
				progress(done, total)
			}
		}
		return nil
	}
	for i, p := range payloads {
		m := &nats.Msg{Subject: subject, Data: p}
		if kind != "" {
			m.Header = nats.Header{stream.KindHeader: {kind}}
		}
		fut, err := js.PublishMsgAsync(m)
		if err != nil {
			return ackError(subject, err)
		}
		futures = append(futures, fut)
		if i+1-acked >= window { // keep the window, and the bar, moving
			if err := settle(i + 1 - window/2); err != nil {
				return err
			}
		}
	}
	ctx, cancel := context.WithTimeout(context.Background(), timeout)
	defer cancel()
	select {
	case <-js.PublishAsyncComplete():
	case <-ctx.Done():
	}
	return settle(len(futures))
}

func ackError(subject string, err error) error {
	if errors.Is(err, nats.ErrNoResponders) || errors.Is(err, jetstream.ErrNoStreamResponse) {
		return fmt.Errorf("no JetStream stream takes %s (is the daemon running with intake.durable: true, and --subject-prefix its intake prefix?): %w", subject, err)
	}
	return fmt.Errorf("publish on %s: %w", subject, err)
}

// drawLoadBar redraws a one-line progress bar: "rows  7000/20160 |=====    |".
func drawLoadBar(w io.Writer, done, total int) {
	const width = 30
	k := done * width / max(total, 1)
	fmt.Fprintf(w, "\rrows %*d/%d |%s%s|", len(strconv.Itoa(total)), done, total,
		strings.Repeat("=", k), strings.Repeat(" ", width-k))
}
