package source

import (
	"fmt"
	"slices"
	"strings"
)

// escape is the escape character of a topic token: every byte outside the
// safe alphabet is written as escape followed by two upper-case hex digits.
const escape = '~'

// emptyToken stands for an empty label value (a token cannot be empty).
// It cannot arise otherwise: escape is always followed by two hex digits.
const emptyToken = "~"

// safe reports whether b is in the token alphabet: ASCII letters, digits,
// '_', '-' and ':'. Everything else — '.', '*', '>', white space, control
// characters, '~' itself and every byte of a multi-byte UTF-8 character —
// is escaped.
func safe(b byte) bool {
	return b >= 'a' && b <= 'z' || b >= 'A' && b <= 'Z' || b >= '0' && b <= '9' || b == '_' || b == '-' || b == ':'
}

const hexDigits = "0123456789ABCDEF"

// AppendToken appends the token of s: s itself when it is all in the safe
// alphabet; otherwise every byte outside it as ~XX (upper-case hex); the
// empty string as "~". DecodeToken inverts it.
func AppendToken(dst []byte, s string) []byte {
	if s == "" {
		return append(dst, emptyToken...)
	}
	for i := 0; i < len(s); i++ {
		b := s[i]
		if safe(b) {
			dst = append(dst, b)
			continue
		}
		dst = append(dst, escape, hexDigits[b>>4], hexDigits[b&0xF])
	}
	return dst
}

// Token returns the token of s (see AppendToken).
func Token(s string) string { return string(AppendToken(nil, s)) }

// DecodeToken returns the string whose token is tok, or an error if tok is
// not a token AppendToken can write (a byte outside the safe alphabet, a
// bad escape, lower-case hex, or an escape of a safe byte).
func DecodeToken(tok string) (string, error) {
	if tok == emptyToken {
		return "", nil
	}
	if tok == "" {
		return "", fmt.Errorf("%w: empty token", ErrTopic)
	}
	var b strings.Builder
	for i := 0; i < len(tok); i++ {
		c := tok[i]
		if safe(c) {
			b.WriteByte(c)
			continue
		}
		if c != escape {
			return "", fmt.Errorf("%w: byte %q at %d of token %q is outside the token alphabet", ErrTopic, c, i, tok)
		}
		if i+2 >= len(tok) {
			return "", fmt.Errorf("%w: escape at %d of token %q wants two hex digits", ErrTopic, i, tok)
		}
		hi, lo := strings.IndexByte(hexDigits, tok[i+1]), strings.IndexByte(hexDigits, tok[i+2])
		if hi < 0 || lo < 0 {
			return "", fmt.Errorf("%w: escape %q in token %q is not ~ and two upper-case hex digits", ErrTopic, tok[i:i+3], tok)
		}
		v := byte(hi<<4 | lo)
		if safe(v) {
			return "", fmt.Errorf("%w: escape %q in token %q stands for a byte that is written as itself", ErrTopic, tok[i:i+3], tok)
		}
		b.WriteByte(v)
		i += 2
	}
	return b.String(), nil
}

// Label is one label of a sample.
type Label struct{ Name, Value string }

// AppendTopic appends the topic of a sample to dst:
//
//	[prefix "."] Token(name) { "." Token(value) }
//
// with the label values in the order of their label names (byte order),
// so that the topic does not depend on the order of the labels on the
// line. labels is sorted in place. The label names do not enter the topic:
// two samples of one metric whose label values agree but whose label
// names differ get the same topic (the source keeps the first and counts
// the other as a duplicate). ParseTopic inverts it, given the prefix.
func AppendTopic(dst []byte, prefix, name string, labels []Label) []byte {
	slices.SortFunc(labels, func(a, b Label) int { return strings.Compare(a.Name, b.Name) })
	if prefix != "" {
		dst = append(dst, prefix...)
		dst = append(dst, '.')
	}
	dst = AppendToken(dst, name)
	for _, l := range labels {
		dst = append(dst, '.')
		dst = AppendToken(dst, l.Value)
	}
	return dst
}

// ParseTopic splits a topic that AppendTopic wrote under prefix into the
// metric name and the label values, in the order of their label names.
func ParseTopic(topic, prefix string) (name string, values []string, err error) {
	if prefix != "" {
		rest, ok := strings.CutPrefix(topic, prefix+".")
		if !ok {
			return "", nil, fmt.Errorf("%w: topic %q does not start with %q", ErrTopic, topic, prefix+".")
		}
		topic = rest
	}
	toks := strings.Split(topic, ".")
	if name, err = DecodeToken(toks[0]); err != nil {
		return "", nil, err
	}
	values = make([]string, 0, len(toks)-1)
	for _, t := range toks[1:] {
		v, err := DecodeToken(t)
		if err != nil {
			return "", nil, err
		}
		values = append(values, v)
	}
	return name, values, nil
}
