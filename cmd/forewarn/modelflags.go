package main

import (
	"errors"
	"flag"
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"
	"time"

	"forewarn/config"
	"forewarn/engine/arima"
	"forewarn/engine/transform"
)

// Defaults of the flags fit and backtest share (CONTRACT.md §3).
const (
	defaultHorizon = 24
	defaultLevels  = "50,90"
)

// retiredFlags are flags of an earlier release, each with the message that
// names its replacement. They are refused before the flags are parsed.
var retiredFlags = map[string]string{
	"order":    `--order was renamed: use --model "p,d,q"`,
	"seasonal": `--seasonal was renamed: use --model "p,d,q x P,D,Q"`,
	"period":   `--period was renamed: use --seasons`,
	"mean":     `--mean was renamed: use --constant`,
}

// checkRetired returns the messages for every retired flag in args (up to
// a "--" that ends the flags), or nil.
func checkRetired(args []string) error {
	var msgs []string
	for _, a := range args {
		if a == "--" {
			break
		}
		if !strings.HasPrefix(a, "-") {
			continue
		}
		name, _, _ := strings.Cut(strings.TrimLeft(a, "-"), "=")
		if m, ok := retiredFlags[name]; ok {
			msgs = append(msgs, m)
		}
	}
	if len(msgs) == 0 {
		return nil
	}
	return errors.New(strings.Join(msgs, "; "))
}

// modelFlags are the model flags fit and backtest share.
type modelFlags struct {
	model, seasons, step, constant, transform, levels string
	horizon                                           int
}

func (m *modelFlags) register(fs *flag.FlagSet, defaultTransform string) {
	fs.StringVar(&m.model, "model", "auto", `auto, "p,d,q" or "p,d,q x P,D,Q"`)
	fs.StringVar(&m.seasons, "seasons", "", "seasonal cycles: durations such as `1d,7d` or whole numbers of steps such as 12")
	fs.StringVar(&m.step, "step", "", "the spacing of the rows when there is no time column, e.g. `1h`")
	fs.StringVar(&m.constant, "constant", "auto", "auto, none, mean or drift")
	fs.StringVar(&m.transform, "transform", defaultTransform, "auto, none, log, boxcox, boxcox(λ) or scaled-exp")
	fs.IntVar(&m.horizon, "horizon", defaultHorizon, "steps ahead")
	fs.StringVar(&m.levels, "levels", defaultLevels, "prediction interval levels in percent")
}

// modelRequest is the checked form of modelFlags.
type modelRequest struct {
	model     string // "auto" or orders as "p,d,q" or "p,d,q x P,D,Q"
	ord, sord [3]int
	seasonal  bool // model has seasonal orders
	cycles    []config.Cycle
	step      time.Duration // --step; 0 when not given
	constant  arima.Constant
	transform string
	horizon   int
	levels    []float64 // ascending
}

// fixed reports whether the orders are fixed.
func (r *modelRequest) fixed() bool { return r.model != "auto" }

// check turns the flags into a request; it lists every problem.
func (m *modelFlags) check() (*modelRequest, []string) {
	var probs []string
	r := &modelRequest{model: "auto", transform: m.transform, horizon: m.horizon}
	if mod := strings.TrimSpace(m.model); mod != "auto" && mod != "" {
		ord, sord, seasonal, err := arima.ParseOrders(mod)
		if err != nil {
			if old, ok := oldModelSpelling(mod); ok {
				probs = append(probs, fmt.Sprintf("--model %q is the old spelling; use %s", m.model, old))
			} else {
				probs = append(probs, fmt.Sprintf(`--model %q: want auto, "p,d,q" or "p,d,q x P,D,Q"`, m.model))
			}
		} else {
			r.ord, r.sord, r.seasonal = ord, sord, seasonal
			r.model = fmt.Sprintf("%d,%d,%d", ord[0], ord[1], ord[2])
			if seasonal {
				r.model += fmt.Sprintf(" x %d,%d,%d", sord[0], sord[1], sord[2])
			}
		}
	}
	if s := strings.TrimSpace(m.seasons); s != "" {
		for _, part := range strings.Split(s, ",") {
			c, err := config.ParseCycle(part)
			if err != nil {
				probs = append(probs, fmt.Sprintf("--seasons %q: %v", m.seasons, err))
				continue
			}
			r.cycles = append(r.cycles, c)
		}
		if len(r.cycles) > 1 && r.fixed() {
			probs = append(probs, fmt.Sprintf("--seasons %q: --model %q uses one cycle, the period of its seasonal orders; keep the first, %v, or use --model auto", m.seasons, m.model, r.cycles[0]))
		}
	}
	if m.step != "" {
		c, err := config.ParseCycle(m.step)
		if err != nil || c.Length == 0 {
			probs = append(probs, fmt.Sprintf("--step %q: want a duration such as 1h, 15m or 1d", m.step))
		} else {
			r.step = c.Length
		}
	}
	c, err := arima.ParseConstant(m.constant)
	if err != nil {
		probs = append(probs, fmt.Sprintf("--constant %q: want auto, none, mean or drift", m.constant))
	}
	r.constant = c
	switch {
	case !r.fixed() && (c == arima.ConstantMean || c == arima.ConstantDrift):
		probs = append(probs, fmt.Sprintf(`--constant %s needs fixed orders in --model (with --model auto the search chooses d and D); use auto or none`, c))
	case r.seasonal && len(r.cycles) == 0:
		probs = append(probs, fmt.Sprintf(`--model %q has seasonal orders; give their cycle with --seasons, e.g. --seasons 12 or --seasons 1d`, m.model))
	case r.fixed() && !r.seasonal && len(r.cycles) > 0:
		probs = append(probs, fmt.Sprintf(`--seasons %s, but --model %q has no seasonal orders; use --model "%s x P,D,Q" or leave --seasons out`, m.seasons, m.model, r.model))
	}
	if m.transform != "auto" {
		if _, err := transform.Parse(m.transform); err != nil {
			probs = append(probs, fmt.Sprintf("--transform %q: want none, log, boxcox, boxcox(λ), scaled-exp or auto", m.transform))
		}
	}
	if m.horizon < 1 || m.horizon > 100000 {
		probs = append(probs, fmt.Sprintf("--horizon %d: want a positive number of steps", m.horizon))
	}
	levels, err := parseLevels(m.levels)
	if err != nil {
		probs = append(probs, err.Error())
	}
	r.levels = levels
	return r, probs
}

// parseLevels reads "50,90": distinct percentages in (0, 100), returned
// ascending.
func parseLevels(s string) ([]float64, error) {
	var out []float64
	for _, p := range strings.Split(s, ",") {
		v, err := strconv.ParseFloat(strings.TrimSpace(p), 64)
		if err != nil || !(v > 0 && v < 100) {
			return nil, fmt.Errorf("--levels %q: each level must be a percentage in (0, 100), e.g. 50,90", s)
		}
		out = append(out, v)
	}
	sort.Float64s(out)
	for i := 1; i < len(out); i++ {
		if out[i] == out[i-1] {
			return nil, fmt.Errorf("--levels %q: level %v is given twice", s, out[i])
		}
	}
	return out, nil
}

// oldModelSpelling returns the flags that replace a model written in
// forewarn's first spelling, or ok false when s is not in that spelling.
func oldModelSpelling(s string) (replacement string, ok bool) {
	r, old := arima.LegacyReplacement(s)
	if !old {
		return "", false
	}
	if !r.Known {
		return `--model "p,d,q" or "p,d,q x P,D,Q", --seasons for the period and --constant none, mean or drift`, true
	}
	out := fmt.Sprintf("--model %q", r.Orders)
	if r.Period > 0 {
		out += fmt.Sprintf(" --seasons %d", r.Period)
	}
	if r.Constant != "" {
		out += " --constant " + r.Constant
	}
	return out, true
}

// period resolves the first cycle in steps: a cycle given in steps as it
// is; a duration through --step or, without it, the spacing of the file's
// time column (RFC 3339 times or Unix seconds, evenly spaced). It is 0
// without cycles. The cycle must be 2..arima.MaxPeriod steps.
func (r *modelRequest) period(times []string, file string) (int, error) {
	if len(r.cycles) == 0 {
		return 0, nil
	}
	c := r.cycles[0]
	step := r.step
	if c.Length != 0 && step == 0 {
		if times == nil {
			return 0, badUsage("--seasons %v is a duration, but %s has no time column; give --step (the spacing of its rows) or the cycle in steps", c, file)
		}
		var err error
		if step, err = rowSpacing(times, file); err != nil {
			return 0, usageError{fmt.Errorf("--seasons %v: %w; give --step or the cycle in steps", c, err)}
		}
	}
	n, err := c.InSteps(step)
	switch {
	case err != nil:
		return 0, badUsage("--seasons: %v", err)
	case n < 2:
		return 0, badUsage("--seasons %v is %d step; a cycle needs at least 2", c, n)
	case n > arima.MaxPeriod:
		return 0, badUsage("--seasons %v is %d steps, more than %d", c, n, arima.MaxPeriod)
	}
	return n, nil
}

// rowSpacing is the common spacing of a time column of RFC 3339 times or
// Unix seconds; an error names the first line that breaks it (line 1 is
// the header).
func rowSpacing(times []string, file string) (time.Duration, error) {
	if len(times) < 2 {
		return 0, fmt.Errorf("%s: fewer than two rows to tell the spacing from", file)
	}
	var prev time.Time
	var step time.Duration
	for i, s := range times {
		t, ok := parseInstant(s)
		if !ok {
			return 0, fmt.Errorf("%s:%d: time %q is neither an RFC 3339 time nor Unix seconds", file, i+2, s)
		}
		if i > 0 {
			d := t.Sub(prev)
			switch {
			case d <= 0:
				return 0, fmt.Errorf("%s:%d: time %q does not come after the row before", file, i+2, s)
			case i == 1:
				step = d
			case d != step:
				return 0, fmt.Errorf("%s:%d: the rows are not evenly spaced (%v after the row before; the first rows are %v apart)", file, i+2, d, step)
			}
		}
		prev = t
	}
	return step, nil
}

// parseInstant reads an RFC 3339 time or Unix seconds (CONTRACT.md §3).
func parseInstant(s string) (time.Time, bool) {
	s = strings.TrimSpace(s)
	if t, err := time.Parse(time.RFC3339Nano, s); err == nil {
		return t, true
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) || math.Abs(v) > 1e11 {
		return time.Time{}, false
	}
	sec, frac := math.Modf(v)
	return time.Unix(int64(sec), int64(math.Round(frac*1e9))).UTC(), true
}

// seasonsOptions resolves every cycle for the automatic choice
// (auto.Options Seasons, Step, Start) on the n rows of the file. Cycles all
// given in steps, without --step or a time column, stay in steps (step 1,
// the first row at time 1, the origin of R's fourier()). Otherwise the
// unit is the second: the step is --step or the spacing of the time
// column, the first row's time is the time column's (Unix seconds) or one
// step. A cycle must span at least two steps and at most the n rows.
func (r *modelRequest) seasonsOptions(times []string, file string, n int) (seasons []float64, step, start float64, err error) {
	if len(r.cycles) == 0 {
		return nil, 0, 0, nil
	}
	durations := false
	for _, c := range r.cycles {
		durations = durations || c.Length != 0
	}
	st := r.step
	if st == 0 && times != nil {
		if s, err := rowSpacing(times, file); err == nil {
			st = s
		} else if durations {
			return nil, 0, 0, usageError{fmt.Errorf("--seasons: %w; give --step or the cycles in steps", err)}
		}
	}
	if durations && st == 0 {
		return nil, 0, 0, badUsage("--seasons %s holds durations, but %s has no time column; give --step (the spacing of its rows) or the cycles in steps", r.cyclesString(), file)
	}
	step, start = 1, 1
	if st > 0 {
		step = st.Seconds()
		start = step
		if times != nil {
			if t0, ok := parseInstant(times[0]); ok {
				start = float64(t0.UnixNano()) / 1e9
			}
		}
	}
	for _, c := range r.cycles {
		L := float64(c.Steps) * step
		if c.Length != 0 {
			L = c.Length.Seconds()
		}
		m := L / step
		switch {
		case m < 2*(1-1e-12):
			return nil, 0, 0, badUsage("--seasons %v is %.4g steps; a cycle needs at least 2", c, m)
		case m > float64(n):
			return nil, 0, 0, badUsage("--seasons %v is %.6g steps, longer than the %d rows of %s", c, m, n, file)
		}
		seasons = append(seasons, L)
	}
	return seasons, step, start, nil
}

func (r *modelRequest) cyclesString() string {
	var parts []string
	for _, c := range r.cycles {
		parts = append(parts, c.String())
	}
	return strings.Join(parts, ",")
}
