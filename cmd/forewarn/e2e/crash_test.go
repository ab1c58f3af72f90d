package e2e

import (
	"fmt"
	"math/rand/v2"
	"os"
	"reflect"
	"slices"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"
)

// crashSize is the size of the crash test. Issue 6 asks for 200 000
// observations across 100 series with at least 20 kills; that runs in CI
// (CI=true, as .ci/run is started) and when FOREWARN_CRASH_FULL=1, and
// takes about 3.5 minutes. A developer's plain run keeps 100 series and
// the 20+ kills with a tenth of the observations, to keep it short.
type crashSize struct {
	series, perSeries, kills int
}

func crashSizeFromEnv() crashSize {
	if os.Getenv("FOREWARN_CRASH_FULL") == "1" || os.Getenv("CI") == "true" {
		return crashSize{series: 100, perSeries: 2000, kills: 20}
	}
	return crashSize{series: 100, perSeries: 200, kills: 20}
}

const crashStep = time.Minute

// crashConfig: half gauges, half counters (a counter makes an observation
// applied twice visible as a reset), fixed models so that refits are
// cheap and deterministic.
//
// Calibration is off: a record keeps the calibrator's fixed state but not
// the forecasts still pending, so calibrated bands after a restart may
// differ from an uninterrupted run's for up to one horizon (DEVELOPERS.md,
// "Data time only"); with it off, every byte apart from wall time must
// match, which is what this test checks.
func crashConfig(series int) string {
	cfg := baseConfig(series+10) + "series:\n"
	for _, e := range []struct{ kind, orders string }{{"gauge", "1,1,0"}, {"counter", "0,1,1"}} {
		cfg += fmt.Sprintf(`  - match: "crash.%c.*"
    kind: %s
    step: 1m
    horizon: 6
    levels: [80, 95]
    window: 120
    min_points: 20
    refit_every: 15
    model: %s
    transform: none
    calibrate: false
`, e.kind[0], e.kind, fixedModel(e.orders))
	}
	return cfg
}

// crashMessage is one intake message of the crash test.
type crashMessage struct {
	topic string
	data  []byte
	final bool // published only after the last restart
}

// crashData builds the messages (seeded): each series gets perSeries
// observations, 1 to 4 in each one-minute bucket at distinct seconds,
// sent in chunks of 1 to 6 (a chunk of one as an object, else an array),
// the series interleaved at random while each keeps its order. Gauges
// follow a random walk with drift; counters add positive increments and
// reset to a small value now and then. After the data, one observation per
// series in the next bucket closes its last bucket; those closing
// messages, and the last 5 % of the others, are marked final.
func crashData(size crashSize, seed uint64) (msgs []crashMessage, topics []string, lastBucket map[string]int) {
	rng := rand.New(rand.NewPCG(seed, 0x6e2e))
	type obs struct {
		t time.Time
		v float64
	}
	per := make([][]obs, size.series)
	lastBucket = map[string]int{}
	for s := range size.series {
		kind := "g"
		if s%2 == 1 {
			kind = "c"
		}
		topic := fmt.Sprintf("crash.%s.s%03d", kind, s)
		topics = append(topics, topic)
		level := 100 + 10*rng.Float64()
		b := 0
		for len(per[s]) < size.perSeries {
			k := min(1+rng.IntN(4), size.perSeries-len(per[s]))
			secs := rng.Perm(60)[:k]
			slices.Sort(secs)
			for _, sec := range secs {
				if kind == "g" {
					level += 0.2 + rng.NormFloat64()
				} else {
					level += 1 + 5*rng.Float64()
					if rng.IntN(200) == 0 {
						level = 1 + rng.Float64()
					}
				}
				per[s] = append(per[s], obs{t0.Add(time.Duration(b)*crashStep + time.Duration(sec)*time.Second), roundTo(level, 3)})
			}
			b++
		}
		lastBucket[topic] = b - 1
		// The closing observation, in bucket b.
		per[s] = append(per[s], obs{t0.Add(time.Duration(b) * crashStep), roundTo(level+1, 3)})
	}
	next := make([]int, size.series)
	live := make([]int, size.series)
	for i := range live {
		live[i] = i
	}
	for len(live) > 0 {
		j := rng.IntN(len(live))
		s := live[j]
		rest := len(per[s]) - 1 - next[s] // the closing observation goes alone, at the end
		if rest == 0 {
			live = append(live[:j], live[j+1:]...)
			continue
		}
		k := min(1+rng.IntN(6), rest)
		chunk := per[s][next[s] : next[s]+k]
		next[s] += k
		var data []byte
		if k == 1 {
			data = obsJSON(chunk[0].t, chunk[0].v)
		} else {
			data = []byte{'['}
			for i, o := range chunk {
				if i > 0 {
					data = append(data, ',')
				}
				data = append(data, obsJSON(o.t, o.v)...)
			}
			data = append(data, ']')
		}
		msgs = append(msgs, crashMessage{topic: topics[s], data: data})
	}
	for i := len(msgs) * 95 / 100; i < len(msgs); i++ {
		msgs[i].final = true
	}
	for s := range size.series {
		o := per[s][len(per[s])-1]
		msgs = append(msgs, crashMessage{topic: topics[s], data: obsJSON(o.t, o.v), final: true})
	}
	return msgs, topics, lastBucket
}

func roundTo(x float64, digits int) float64 {
	v, _ := strconv.ParseFloat(strconv.FormatFloat(x, 'f', digits, 64), 64)
	return v
}

// crashOutcome is what a run leaves: each series' state record (forewarn
// state show, after SIGTERM), its last forecast, all its forecasts by
// origin, and how many forecasts were published again at an origin.
type crashOutcome struct {
	state    map[string]map[string]any
	forecast map[string][]byte
	byOrigin map[string]map[time.Time][]byte
	repeats  int
}

// finishCrashRun waits until the stream is consumed and every series has
// published its last forecast, stops the daemon, reads the state records
// and indexes the forecasts by origin under policy.
func finishCrashRun(t *testing.T, d *daemon, c *collector, topics []string, lastBucket map[string]int, policy repeats) crashOutcome {
	t.Helper()
	nc := connect(t, d.natsURL)
	waitConsumed(t, nc, 3*time.Minute)
	out := crashOutcome{state: map[string]map[string]any{}, forecast: map[string][]byte{}, byOrigin: map[string]map[time.Time][]byte{}}
	for _, topic := range topics {
		want := t0.Add(time.Duration(lastBucket[topic]) * crashStep)
		eventually(t, 30*time.Second, "last forecast of "+topic, func() bool {
			for _, m := range c.get("forecast", "forewarn.forecast."+topic) {
				if decodeForecast(t, m.Data).Origin.Equal(want) {
					out.forecast[topic] = m.Data
					return true
				}
			}
			return false
		})
	}
	d.stop()
	for _, topic := range topics {
		out.state[topic] = stateShow(t, d.dataDir(), topic)
		fs, n := forecastsByOrigin(t, c.get("forecast", "forewarn.forecast."+topic), policy)
		out.byOrigin[topic] = fs
		out.repeats += n
	}
	return out
}

// TestCrashNothingLostNothingTwice is issue 6's crash acceptance: many
// series published at a steady rate while the daemon is killed with
// SIGKILL at random moments (seeded) and restarted each time; in the end
// every series' state record and last forecast equal an uninterrupted
// run's: nothing lost, nothing applied twice. Every forecast the crash run
// published equals the uninterrupted run's at its origin; an origin
// published again after a kill is byte-identical apart from "issued"
// (sameAgain). Origins whose forecast a kill lost are counted in the log,
// not failed: the contract promises exactly-once for the input's effect,
// not for publications. Against the daemon's embedded server and against
// an external one.
func TestCrashNothingLostNothingTwice(t *testing.T) {
	size := crashSizeFromEnv()
	msgs, topics, lastBucket := crashData(size, 20240601)
	nFinal := 0
	for _, m := range msgs {
		if m.final {
			nFinal++
		}
	}
	t.Logf("crash test: %d series × %d observations in %d messages, %d kills (CI=true or FOREWARN_CRASH_FULL=1 for 100 × 2000)",
		size.series, size.perSeries, len(msgs), size.kills)
	for i, mode := range []busMode{embedded, external} {
		t.Run(mode.String(), func(t *testing.T) {
			// Uninterrupted reference run: everything at once.
			ref := newDaemon(t, mode, crashConfig(size.series))
			_, rc, rp := session(t, ref)
			for _, m := range msgs {
				rp.must("metrics."+m.topic, m.data)
			}
			want := finishCrashRun(t, ref, rc, topics, lastBucket, onceEach)

			// Crash run.
			d := newDaemon(t, mode, crashConfig(size.series))
			nc, c, p := session(t, d)
			rng := rand.New(rand.NewPCG(uint64(7+i), 99))
			firstPart := msgs[:len(msgs)-nFinal]
			// The publisher spreads the first part over about the time the
			// kills take (~0.45 s up, plus the restart, each).
			pace := time.Duration(size.kills) * 900 * time.Millisecond / time.Duration(len(firstPart))
			pubErr := make(chan error, 1)
			var published sync.WaitGroup
			published.Add(1)
			go func() {
				defer published.Done()
				begin := time.Now()
				for j, m := range firstPart {
					if wait := time.Until(begin.Add(time.Duration(j) * pace)); wait > 0 {
						time.Sleep(wait)
					}
					if err := p.publish("metrics."+m.topic, m.data, 90*time.Second); err != nil {
						pubErr <- err
						return
					}
				}
				pubErr <- nil
			}()
			kills := 0
			pubDone := false
			for guard := 0; guard < 10*size.kills && (kills < size.kills || !pubDone); guard++ {
				time.Sleep(150*time.Millisecond + time.Duration(rng.IntN(600))*time.Millisecond)
				if !d.running() {
					t.Fatalf("daemon died on its own after %d kills; log:\n%s", kills, tail(d.logPath, 40))
				}
				d.kill()
				kills++
				select {
				case err := <-pubErr:
					if err != nil {
						t.Fatal(err)
					}
					pubDone = true
				default:
				}
				d.start()
			}
			if !pubDone {
				published.Wait()
				if err := <-pubErr; err != nil {
					t.Fatal(err)
				}
			}
			if kills < size.kills {
				t.Fatalf("only %d kills", kills)
			}
			waitConnected(t, nc)
			for _, m := range msgs[len(msgs)-nFinal:] {
				p.must("metrics."+m.topic, m.data)
			}
			got := finishCrashRun(t, d, c, topics, lastBucket, sameAgain)
			t.Logf("%s: %d kills while %d messages were published; %d forecasts published again after a kill, each identical apart from issued",
				mode, kills, len(firstPart), got.repeats)

			bad, missing := 0, 0
			for _, topic := range topics {
				if !reflect.DeepEqual(got.state[topic], want.state[topic]) {
					bad++
					if bad <= 3 {
						t.Errorf("%s: state record after the crashes differs from the uninterrupted run's:\n%s", topic,
							diffMaps(got.state[topic], want.state[topic]))
					}
				}
				g, w := normalized(t, got.forecast[topic], "issued"), normalized(t, want.forecast[topic], "issued")
				if !reflect.DeepEqual(g, w) {
					bad++
					if bad <= 3 {
						t.Errorf("%s: last forecast after the crashes differs:\n got %s\nwant %s", topic, got.forecast[topic], want.forecast[topic])
					}
				}
				// Every forecast of the crash run, not just the last, is the
				// uninterrupted run's at the same origin.
				for o, gm := range got.byOrigin[topic] {
					wm, ok := want.byOrigin[topic][o]
					switch {
					case !ok:
						bad++
						if bad <= 3 {
							t.Errorf("%s: origin %s published in the crash run only", topic, o.Format(time.RFC3339))
						}
					case !mustSame(t, gm, wm):
						bad++
						if bad <= 3 {
							t.Errorf("%s: forecast at %s after the crashes differs:\n got %s\nwant %s", topic, o.Format(time.RFC3339), gm, wm)
						}
					}
				}
				for o := range want.byOrigin[topic] {
					if _, ok := got.byOrigin[topic][o]; !ok {
						missing++
					}
				}
			}
			if bad > 0 {
				t.Errorf("%d differences in all (state records, last forecasts, forecasts by origin) over %d series", bad, len(topics))
			}
			t.Logf("%s: %d origins of the uninterrupted run have no forecast in the crash run", mode, missing)
		})
	}
}

// diffMaps lists the top-level keys whose values differ.
func diffMaps(got, want map[string]any) string {
	var b strings.Builder
	for k, w := range want {
		g, ok := got[k]
		if !ok {
			fmt.Fprintf(&b, "  %s: missing (want %v)\n", k, short(w))
			continue
		}
		if !reflect.DeepEqual(g, w) {
			fmt.Fprintf(&b, "  %s: got %v, want %v\n", k, short(g), short(w))
		}
	}
	for k, g := range got {
		if _, ok := want[k]; !ok {
			fmt.Fprintf(&b, "  %s: unexpected %v\n", k, short(g))
		}
	}
	return b.String()
}

func short(v any) string {
	s := fmt.Sprint(v)
	if len(s) > 300 {
		s = s[:300] + "…"
	}
	return s
}

func mustSame(t *testing.T, a, b []byte) bool {
	t.Helper()
	same, err := sameApartFromIssued(a, b)
	if err != nil {
		t.Fatal(err)
	}
	return same
}
