package config

import (
	"errors"
	"fmt"
	"strings"
)

var (
	// ErrInvalid is wrapped by every *Errors value: the configuration has
	// at least one problem (errors.Is(err, ErrInvalid) is true).
	ErrInvalid = errors.New("config: invalid configuration")

	// ErrBadTopic is returned by ValidTopic for a topic that cannot be a
	// series name: empty tokens, wildcards, whitespace, non-printable
	// characters, or more than MaxTopicLen bytes or MaxTopicTokens tokens.
	ErrBadTopic = errors.New("config: bad topic")

	// ErrBadPattern is returned by ValidPattern for a subject pattern that
	// the bus would not accept as a subscription or match filter.
	ErrBadPattern = errors.New("config: bad subject pattern")

	// ErrWithinBeyondHorizon is returned by (*Alert).CheckSeries when a
	// rule's window is longer than a series' Horizon·Step.
	ErrWithinBeyondHorizon = errors.New("config: alert window beyond the forecast horizon")
)

// Problem is one thing wrong with a configuration. Line and Column are
// 1-based positions in the YAML source; they are 0 when the value did not
// come from a file (a field set in Go, a default) or the position is
// unknown. Path names the key, e.g. "series[1].levels[0]".
type Problem struct {
	Line, Column int
	Path, Msg    string
}

// Errors is the error returned by Parse, Load and Validate: every problem
// found, in source order (problems without a position last). It unwraps to
// ErrInvalid.
type Errors struct {
	File     string // the name given to Parse or the path given to Load; may be empty
	Problems []Problem
}

// Error lists the problems one per line as FILE:LINE:COL: path: message.
// Parts that are unknown (no file, no line, no column, no path) are left out.
func (e *Errors) Error() string {
	var b strings.Builder
	for i, p := range e.Problems {
		if i > 0 {
			b.WriteByte('\n')
		}
		b.WriteString(p.format(e.File))
	}
	return b.String()
}

// Unwrap returns ErrInvalid.
func (e *Errors) Unwrap() error { return ErrInvalid }

func (p Problem) format(file string) string {
	var b strings.Builder
	if file != "" {
		b.WriteString(file)
		b.WriteByte(':')
	}
	if p.Line > 0 {
		fmt.Fprintf(&b, "%d:", p.Line)
		if p.Column > 0 {
			fmt.Fprintf(&b, "%d:", p.Column)
		}
	}
	if b.Len() > 0 {
		b.WriteByte(' ')
	}
	if p.Path != "" {
		b.WriteString(p.Path)
		b.WriteString(": ")
	}
	b.WriteString(p.Msg)
	return b.String()
}
