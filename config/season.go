package config

import (
	"fmt"
	"regexp"
	"strconv"
	"strings"
	"time"
)

// Cycle is one seasonal cycle of a series (key seasons): a length of time
// or a whole number of steps. Exactly one of the fields is set.
type Cycle struct {
	// Length is the cycle as a duration, e.g. 24h for "1d". Zero when
	// the cycle was given in steps.
	Length time.Duration
	// Steps is the cycle as a whole number of steps, e.g. 12 for "12".
	// Zero when the cycle was given as a duration.
	Steps int
}

// Units beyond Go's durations, accepted in cycles (common practice: a day
// is 24 hours and a week 7 days of data time, with no calendar).
const (
	Day  = 24 * time.Hour
	Week = 7 * Day
)

// maxCycleSteps bounds a cycle given in steps before it is checked
// against the model's limits.
const maxCycleSteps = 1 << 30

// dayWeekRE finds a number followed by the unit d or w. Go's own duration
// units (ns, us, µs, ms, s, m, h) contain neither letter.
var dayWeekRE = regexp.MustCompile(`([0-9]*\.?[0-9]+)([dw])`)

// ParseCycle reads one cycle: a bare whole number of steps ("12"), or a
// duration in Go's syntax with the units d (24h) and w (7·24h) as well,
// e.g. "1d", "7d", "1w", "12h", "1d12h", "90m". A duration must be
// positive; a number of steps at least 1 (the model needs at least 2,
// which Validate checks with the step known).
func ParseCycle(s string) (Cycle, error) {
	t := strings.TrimSpace(s)
	if t == "" {
		return Cycle{}, fmt.Errorf("an empty cycle; write a duration such as \"1d\" or a number of steps such as \"12\"")
	}
	if strings.TrimLeft(t, "0123456789") == "" {
		n, err := strconv.Atoi(t)
		if err != nil || n < 1 || n > maxCycleSteps {
			return Cycle{}, fmt.Errorf("%q is not a number of steps from 1 to %d", clip(t), maxCycleSteps)
		}
		return Cycle{Steps: n}, nil
	}
	var bad error
	expanded := dayWeekRE.ReplaceAllStringFunc(t, func(m string) string {
		num, unit := m[:len(m)-1], m[len(m)-1]
		v, err := strconv.ParseFloat(num, 64)
		if err != nil {
			bad = err
			return m
		}
		hours := 24.0
		if unit == 'w' {
			hours = 7 * 24
		}
		return strconv.FormatFloat(v*hours, 'f', -1, 64) + "h"
	})
	d, err := time.ParseDuration(expanded)
	if bad != nil || err != nil {
		return Cycle{}, fmt.Errorf("%q is not a duration such as \"1d\", \"7d\" or \"12h\", nor a whole number of steps", clip(t))
	}
	if d <= 0 {
		return Cycle{}, fmt.Errorf("%q is not a positive duration", clip(t))
	}
	return Cycle{Length: d}, nil
}

// InSteps returns the cycle in steps of the given width: Steps, or Length
// divided by step when it is a whole multiple of it.
func (c Cycle) InSteps(step time.Duration) (int, error) {
	if c.Length == 0 {
		return c.Steps, nil
	}
	if step <= 0 {
		return 0, fmt.Errorf("%v needs the step of the series to be counted in steps", c)
	}
	if c.Length%step != 0 {
		return 0, fmt.Errorf("%v is not a whole number of steps of %v", c, step)
	}
	n := c.Length / step
	if n > maxCycleSteps {
		return 0, fmt.Errorf("%v is more than %d steps of %v", c, maxCycleSteps, step)
	}
	return int(n), nil
}

// String writes the cycle as ParseCycle reads it: the number of steps, or
// the duration in days when it is a whole number of them, else in Go's
// syntax.
func (c Cycle) String() string {
	switch {
	case c.Length == 0:
		return strconv.Itoa(c.Steps)
	case c.Length%Day == 0:
		return strconv.FormatInt(int64(c.Length/Day), 10) + "d"
	}
	return c.Length.String()
}
