package main

import (
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"text/tabwriter"
	"time"

	"forewarn/engine/series"
	"forewarn/state"
)

func init() {
	register("state", "inspect the state file of a stopped daemon", runState)
}

// stateDefaultData is the data directory when --data is not given; the
// daemon's default state.dir (CONTRACT.md §2).
const stateDefaultData = "./forewarn-data"

const stateUsageText = `usage: forewarn state list [--data DIR]
       forewarn state show TOPIC [--data DIR]
       forewarn state check [--data DIR]

Reads the state file DIR/forewarn.db of a stopped daemon (read-only).
  list   one line per series: topic, kind, step, closed buckets, window
         length, model (or "warming up"), last stream position
  show   the record of TOPIC as indented JSON (NaN and infinities as null)
  check  verify the file and every record; exit 1 listing every problem

flags (before or after the arguments):
  --data DIR   data directory (default ` + stateDefaultData + `)
`

// runState implements "forewarn state".
func runState(args []string, stdout, stderr io.Writer) int {
	pos, dir, help, err := parseStateArgs(args)
	if help {
		fmt.Fprint(stdout, stateUsageText)
		return exitOK
	}
	if err == nil {
		err = checkStateArgs(pos)
	}
	if err != nil {
		fmt.Fprintf(stderr, "forewarn state: %v\n\n%s", err, stateUsageText)
		return exitUsage
	}

	st, err := state.Open(dir, state.ReadOnly())
	if err != nil {
		fmt.Fprintf(stderr, "forewarn: %v\n", stateOpenError(dir, err))
		return exitFailure
	}
	defer st.Close()

	switch pos[0] {
	case "list":
		return stateList(st, stdout, stderr)
	case "show":
		return stateShow(st, pos[1], stdout, stderr)
	default: // "check", by checkStateArgs
		return stateCheck(st, stdout, stderr)
	}
}

// parseStateArgs separates the --data flag from the positional arguments,
// accepting the flag anywhere; "--" ends the flags.
func parseStateArgs(args []string) (pos []string, dir string, help bool, err error) {
	fs := flag.NewFlagSet("state", flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	fs.StringVar(&dir, "data", stateDefaultData, "data `directory`")
	for {
		if err := fs.Parse(args); err != nil {
			return nil, "", errors.Is(err, flag.ErrHelp), err
		}
		rest := fs.Args()
		if consumed := len(args) - len(rest); consumed > 0 && args[consumed-1] == "--" {
			return append(pos, rest...), dir, false, nil
		}
		if len(rest) == 0 {
			return pos, dir, false, nil
		}
		pos = append(pos, rest[0])
		args = rest[1:]
	}
}

func checkStateArgs(pos []string) error {
	if len(pos) == 0 {
		return errors.New("missing subcommand (list, show or check)")
	}
	want := map[string]int{"list": 1, "show": 2, "check": 1}
	n, ok := want[pos[0]]
	switch {
	case !ok:
		return fmt.Errorf("unknown subcommand %q (want list, show or check)", pos[0])
	case pos[0] == "show" && len(pos) < 2:
		return errors.New("show needs a TOPIC")
	case len(pos) > n:
		return fmt.Errorf("%s: unexpected argument %q", pos[0], pos[n])
	}
	return nil
}

// stateOpenError adds advice to the errors a person can act on.
func stateOpenError(dir string, err error) error {
	switch {
	case errors.Is(err, state.ErrLocked):
		return fmt.Errorf("%w; stop it first, or inspect a copy of the file", err)
	case errors.Is(err, state.ErrNoState):
		return fmt.Errorf("%w (is --data %s the daemon's data directory?)", err, dir)
	}
	return err
}

func stateList(st *state.Store, stdout, stderr io.Writer) int {
	tw := tabwriter.NewWriter(stdout, 0, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "TOPIC\tKIND\tSTEP\tCLOSED\tWINDOW\tMODEL\tSEQ")
	var bad []error
	n := 0
	err := st.LoadAll(func(topic string, s *series.Snapshot, err error) error {
		if err != nil {
			bad = append(bad, err)
			fmt.Fprintf(tw, "%s\t?\t?\t?\t?\tunreadable record\t?\n", topic)
			return nil
		}
		n++
		model := "warming up"
		if s.Model != nil {
			model = s.Model.Spec().Label()
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%d\t%d\t%s\t%d\n",
			topic, s.Kind, formatStep(s.StepSeconds), s.Closed, len(s.Window), model, s.Seq)
		return nil
	})
	if err != nil {
		fmt.Fprintf(stderr, "forewarn: %v\n", err)
		return exitFailure
	}
	if info, err := st.Info(); err == nil && info.SetAside > 0 {
		fmt.Fprintf(stderr, "forewarn state list: %d record(s) set aside; 'forewarn state check' lists them\n", info.SetAside)
	}
	if n+len(bad) == 0 {
		fmt.Fprintf(stdout, "no series in %s\n", st.Path())
		return exitOK
	}
	tw.Flush()
	for _, e := range bad {
		fmt.Fprintf(stderr, "forewarn: %v\n", e)
	}
	if len(bad) > 0 {
		fmt.Fprintf(stderr, "forewarn state list: %d unreadable record(s); run 'forewarn state check'\n", len(bad))
		return exitFailure
	}
	return exitOK
}

// formatStep writes a bucket width as a duration without zero units
// ("1m", "6h", "1h30m").
func formatStep(sec int64) string {
	if sec <= 0 || sec > math.MaxInt64/int64(time.Second) {
		return strconv.FormatInt(sec, 10) + "s"
	}
	s := (time.Duration(sec) * time.Second).String()
	if strings.HasSuffix(s, "m0s") {
		s = strings.TrimSuffix(s, "0s")
	}
	if strings.HasSuffix(s, "h0m") {
		s = strings.TrimSuffix(s, "0m")
	}
	return s
}

func stateShow(st *state.Store, topic string, stdout, stderr io.Writer) int {
	s, err := st.Load(topic)
	if errors.Is(err, state.ErrNotFound) {
		fmt.Fprintf(stderr, "forewarn state show: no series %q in %s\n", topic, st.Path())
		return exitFailure
	}
	if err != nil {
		fmt.Fprintf(stderr, "forewarn: %v\n", err)
		return exitFailure
	}
	b, err := json.MarshalIndent(newSnapshotView(s), "", "  ")
	if err != nil {
		fmt.Fprintf(stderr, "forewarn: %v\n", err)
		return exitFailure
	}
	fmt.Fprintf(stdout, "%s\n", b)
	return exitOK
}

func stateCheck(st *state.Store, stdout, stderr io.Writer) int {
	err := st.Check()
	if err == nil {
		info, ierr := st.Info()
		if ierr != nil {
			fmt.Fprintf(stderr, "forewarn: %v\n", ierr)
			return exitFailure
		}
		aside := ""
		if info.SetAside > 0 {
			aside = fmt.Sprintf(", %d set aside", info.SetAside)
		}
		fmt.Fprintf(stdout, "ok: %s: %d series%s, store format %d, created %s, %d bytes\n",
			info.Path, info.Series, aside, info.Format, info.Created.Format(time.RFC3339), info.Bytes)
		return listSetAside(st, stdout, stderr, exitOK)
	}
	problems := []error{err}
	if j, ok := err.(interface{ Unwrap() []error }); ok {
		problems = j.Unwrap()
	}
	for _, p := range problems {
		fmt.Fprintln(stdout, p)
	}
	fmt.Fprintf(stderr, "forewarn state check: %d problem(s) in %s\n", len(problems), st.Path())
	return listSetAside(st, stdout, stderr, exitFailure)
}

// listSetAside prints one line per record the daemon set aside (records
// it would not continue from, kept as they were found) and returns code,
// or exitFailure if the list cannot be read. Set-aside records are not
// problems of the live state: they are what an operator may want to look
// at, or restore with a build that reads them.
func listSetAside(st *state.Store, stdout, stderr io.Writer, code int) int {
	recs, err := st.SetAsideRecords()
	if err != nil {
		fmt.Fprintf(stderr, "forewarn: %v\n", err)
		return exitFailure
	}
	for _, r := range recs {
		why := "readable (set aside for another kind or step)"
		if r.Err != nil {
			why = r.Err.Error()
		}
		fmt.Fprintf(stdout, "set aside: %q at %s, %d bytes: %s\n", r.Topic, r.At.Format(time.RFC3339), r.Bytes, why)
	}
	return code
}

// jsonNumber is a float64 written as null when it is NaN or infinite
// (JSON has neither).
type jsonNumber float64

func (f jsonNumber) MarshalJSON() ([]byte, error) {
	if math.IsNaN(float64(f)) || math.IsInf(float64(f), 0) {
		return []byte("null"), nil
	}
	return json.Marshal(float64(f))
}

func jsonNumbers(v []float64) []jsonNumber {
	out := make([]jsonNumber, len(v))
	for i, x := range v {
		out[i] = jsonNumber(x)
	}
	return out
}

// snapshotView is series.Snapshot with the JSON names of "state show".
type snapshotView struct {
	Topic          string        `json:"topic"`
	Fingerprint    string        `json:"fingerprint"`
	Seq            uint64        `json:"seq"`
	Kind           string        `json:"kind"`
	StepSeconds    int64         `json:"step_seconds"`
	HasOpen        bool          `json:"has_open"`
	OpenBucket     int64         `json:"open_bucket"`
	OpenValue      jsonNumber    `json:"open_value"`
	CounterOffset  jsonNumber    `json:"counter_offset"`
	CounterLastRaw jsonNumber    `json:"counter_last_raw"`
	CounterHasRaw  bool          `json:"counter_has_raw"`
	CounterResets  uint64        `json:"counter_resets"`
	WindowEnd      int64         `json:"window_end"`
	Window         []jsonNumber  `json:"window"`
	Closed         uint64        `json:"closed"`
	SinceRefit     int           `json:"since_refit"`
	Late           uint64        `json:"late"`
	Transform      transformView `json:"transform"`
	Model          *modelView    `json:"model"`
	RefitFailures  uint64        `json:"refit_failures"`
	LastRefitNote  string        `json:"last_refit_note"`
	Alerts         []alertView   `json:"alerts"`
}

type transformView struct {
	Name    string     `json:"name"`
	Lambda  jsonNumber `json:"lambda"`
	Loc     jsonNumber `json:"loc"`
	Scale   jsonNumber `json:"scale"`
	RunN    int64      `json:"run_n"`
	RunMean jsonNumber `json:"run_mean"`
	RunM2   jsonNumber `json:"run_m2"`
}

// modelView names the model as fit --format json does (CONTRACT.md §3):
// its label, orders, seasonal orders with their period, and constant.
type modelView struct {
	Label              string       `json:"label"`
	ARIMA              [3]int       `json:"arima"`
	SeasonalARIMA      [3]int       `json:"seasonal_arima"`
	Period             int          `json:"period"`
	Constant           string       `json:"constant"`
	Params             []jsonNumber `json:"params"`
	InnovationVariance jsonNumber   `json:"innovation_variance"`
	LogLikelihood      jsonNumber   `json:"log_likelihood"`
	AICc               jsonNumber   `json:"aicc"`
	ObservationsUsed   int          `json:"observations_used"`
	FittedAt           int64        `json:"fitted_at"`
	Filter             []jsonNumber `json:"filter"`
}

type alertView struct {
	Rule        string     `json:"rule"`
	Raised      bool       `json:"raised"`
	Since       int64      `json:"since"`
	Probability jsonNumber `json:"probability"`
}

func newSnapshotView(s *series.Snapshot) snapshotView {
	t := s.Transform
	v := snapshotView{
		Topic: s.Topic, Fingerprint: s.Fingerprint, Seq: s.Seq, Kind: s.Kind, StepSeconds: s.StepSeconds,
		HasOpen: s.HasOpen, OpenBucket: s.OpenBucket, OpenValue: jsonNumber(s.OpenValue),
		CounterOffset: jsonNumber(s.CounterOffset), CounterLastRaw: jsonNumber(s.CounterLastRaw),
		CounterHasRaw: s.CounterHasRaw, CounterResets: s.CounterResets,
		WindowEnd: s.WindowEnd, Window: jsonNumbers(s.Window),
		Closed: s.Closed, SinceRefit: s.SinceRefit, Late: s.Late,
		Transform: transformView{
			Name: t.Name, Lambda: jsonNumber(t.Lambda), Loc: jsonNumber(t.Loc), Scale: jsonNumber(t.Scale),
			RunN: t.RunN, RunMean: jsonNumber(t.RunMean), RunM2: jsonNumber(t.RunM2),
		},
		RefitFailures: s.RefitFailures, LastRefitNote: s.LastRefitNote,
		Alerts: make([]alertView, len(s.Alerts)),
	}
	if m := s.Model; m != nil {
		sp := m.Spec()
		v.Model = &modelView{
			Label: sp.Label(), ARIMA: m.Order, SeasonalARIMA: m.Seasonal, Period: m.Period,
			Constant: sp.ConstantName(), Params: jsonNumbers(m.Params),
			InnovationVariance: jsonNumber(m.Sigma2), LogLikelihood: jsonNumber(m.LogLik), AICc: jsonNumber(m.AICc),
			ObservationsUsed: m.NObs, FittedAt: m.FittedAt, Filter: jsonNumbers(m.Filter),
		}
	}
	for i, a := range s.Alerts {
		v.Alerts[i] = alertView{Rule: a.Rule, Raised: a.Raised, Since: a.Since, Probability: jsonNumber(a.Probability)}
	}
	return v
}
