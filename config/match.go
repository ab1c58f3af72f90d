package config

import (
	"fmt"
	"strings"
	"unicode"
	"unicode/utf8"
)

// Limits on topics and patterns.
const (
	MaxTopicLen    = 256 // bytes
	MaxTopicTokens = 16  // dot-separated tokens
)

// MatchSubject reports whether topic matches pattern under the bus's
// wildcard rules: tokens are separated by ".", a "*" token matches exactly
// one token and a ">" token, which must be the last, matches one or more
// trailing tokens. Any other token matches only itself. A malformed
// pattern or topic never panics: an empty topic token matches nothing,
// and a pattern that is not valid matches only what its tokens spell;
// check patterns with ValidPattern. It does not allocate.
func MatchSubject(pattern, topic string) bool {
	for {
		pt, prest, pmore := strings.Cut(pattern, ".")
		if pt == ">" && !pmore {
			return topic != ""
		}
		tt, trest, tmore := strings.Cut(topic, ".")
		if (pt != "*" && pt != tt) || tt == "" || pmore != tmore {
			return false
		}
		if !pmore {
			return true
		}
		pattern, topic = prest, trest
	}
}

// patternsOverlap reports whether some subject matches both patterns a and b.
func patternsOverlap(a, b string) bool {
	for {
		at, arest, amore := strings.Cut(a, ".")
		bt, brest, bmore := strings.Cut(b, ".")
		if (at == ">" && !amore) || (bt == ">" && !bmore) {
			return true
		}
		if at != "*" && bt != "*" && at != bt {
			return false
		}
		if amore != bmore {
			return false
		}
		if !amore {
			return true
		}
		a, b = arest, brest
	}
}

// ValidTopic returns nil if topic can name a series: 1..MaxTopicTokens
// non-empty dot-separated tokens, at most MaxTopicLen bytes of valid UTF-8,
// printable, without white space and without the wildcard characters "*"
// and ">". The error wraps ErrBadTopic and says what is wrong.
func ValidTopic(topic string) error {
	if err := checkSubject(topic, false); err != "" {
		return fmt.Errorf("%w %q: %s", ErrBadTopic, clip(topic), err)
	}
	return nil
}

// ValidPattern returns nil if pattern is a valid subject pattern: like a
// topic (see ValidTopic), except that a token may be "*", and the last
// token may be ">". The wildcard characters may not appear inside a
// longer token. The error wraps ErrBadPattern.
func ValidPattern(pattern string) error {
	if err := checkSubject(pattern, true); err != "" {
		return fmt.Errorf("%w %q: %s", ErrBadPattern, clip(pattern), err)
	}
	return nil
}

// checkSubject returns "" if s is a valid topic (wild false) or pattern
// (wild true), else the reason.
func checkSubject(s string, wild bool) string {
	if s == "" {
		return "empty"
	}
	if len(s) > MaxTopicLen {
		return fmt.Sprintf("%d bytes, more than %d", len(s), MaxTopicLen)
	}
	if !utf8.ValidString(s) {
		return "not valid UTF-8"
	}
	for _, r := range s {
		switch {
		case unicode.IsSpace(r):
			return "contains white space"
		case !unicode.IsPrint(r):
			return fmt.Sprintf("contains the non-printable character %U", r)
		}
	}
	n := 0
	for rest, more := s, true; more; {
		var tok string
		tok, rest, more = strings.Cut(rest, ".")
		n++
		switch {
		case tok == "":
			return fmt.Sprintf("token %d is empty", n)
		case n > MaxTopicTokens:
			return fmt.Sprintf("more than %d tokens", MaxTopicTokens)
		case wild && tok == "*":
		case wild && tok == ">":
			if more {
				return `">" must be the last token`
			}
		case strings.ContainsAny(tok, "*>"):
			if wild {
				return fmt.Sprintf("token %q: a wildcard must be a whole token", tok)
			}
			return fmt.Sprintf("token %q contains a wildcard character", tok)
		}
	}
	return ""
}

// clip shortens s for an error message.
func clip(s string) string {
	const max = 80
	if len(s) <= max {
		return s
	}
	return s[:max] + "…"
}

// SeriesFor returns the first series entry whose Match matches topic, and
// true; or nil and false if none does. The pointer is into c.Series.
func (c *Config) SeriesFor(topic string) (*Series, bool) {
	for i := range c.Series {
		if MatchSubject(c.Series[i].Match, topic) {
			return &c.Series[i], true
		}
	}
	return nil, false
}

// AlertsFor returns copies of every alert rule whose Match matches topic,
// in configuration order; nil if none does.
func (c *Config) AlertsFor(topic string) []Alert {
	var out []Alert
	for i := range c.Alerts {
		if MatchSubject(c.Alerts[i].Match, topic) {
			out = append(out, c.Alerts[i])
		}
	}
	return out
}

// subjectPrefix returns the literal part of an intake subject pattern up to
// its first wildcard token, including the trailing dot ("metrics.>" →
// "metrics."). It is "" if the pattern starts with a wildcard.
func subjectPrefix(pattern string) string {
	i := 0
	for rest, more := pattern, true; more; {
		var tok string
		tok, rest, more = strings.Cut(rest, ".")
		if tok == "*" || tok == ">" {
			return pattern[:i]
		}
		i += len(tok) + 1
	}
	return pattern
}

// Prefixes returns the topic prefix of each intake subject, in order:
// the literal tokens before its first wildcard, with the trailing dot.
func (c *Config) Prefixes() []string {
	out := make([]string, len(c.Intake.Subjects))
	for i, s := range c.Intake.Subjects {
		out[i] = subjectPrefix(s)
	}
	return out
}

// TopicOf maps an intake subject to its topic: the subject less the
// prefix of the first intake pattern it matches. ok is false when no
// intake pattern matches. The topic is not checked; see ValidTopic. It
// does not allocate.
func (c *Config) TopicOf(subject string) (topic string, ok bool) {
	for _, p := range c.Intake.Subjects {
		if MatchSubject(p, subject) {
			return subject[len(subjectPrefix(p)):], true
		}
	}
	return "", false
}
