package stream

import (
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"
	"unicode/utf16"
	"unicode/utf8"
	"unsafe"

	"forewarn/config"
)

// Reject is the error ParsePayload returns for a payload it does not
// accept. Code is one of the Code… constants; Reason is a sentence that
// names the offending part of the payload and says what to send instead.
type Reject struct {
	Code   string
	Reason string
}

func (r *Reject) Error() string { return "stream: rejected (" + r.Code + "): " + r.Reason }

// Observation is one accepted sample. Time is the observation's data time
// (UTC, or the arrival time's location when the payload gave no time);
// Value is finite.
type Observation struct {
	Time  time.Time
	Value float64
}

// Limits bound what ParsePayload accepts. A zero field takes the default of
// DefaultLimits; a negative MaxFuture or MaxPast turns that check off.
type Limits struct {
	MaxPayload int           // bytes (the config's limits.max_payload_bytes)
	MaxBatch   int           // observations in one array (limits.max_batch)
	MaxFuture  time.Duration // how far a time may lie ahead of arrival (limits.max_future)
	MaxPast    time.Duration // how far a time may lie behind arrival (limits.max_past)
}

// LimitsOf returns the payload limits a configuration's limits set.
func LimitsOf(l config.Limits) Limits {
	return Limits{MaxPayload: l.MaxPayloadBytes, MaxBatch: l.MaxBatch, MaxFuture: l.MaxFuture, MaxPast: l.MaxPast}
}

// DefaultLimits returns the limits used for zero fields of Limits: those
// of the configuration's defaults (config.DefaultLimits).
func DefaultLimits() Limits { return LimitsOf(config.DefaultLimits()) }

func (l Limits) withDefaults() Limits {
	d := DefaultLimits()
	if l.MaxPayload == 0 {
		l.MaxPayload = d.MaxPayload
	}
	if l.MaxBatch == 0 {
		l.MaxBatch = d.MaxBatch
	}
	if l.MaxFuture == 0 {
		l.MaxFuture = d.MaxFuture
	}
	if l.MaxPast == 0 {
		l.MaxPast = d.MaxPast
	}
	return l
}

// The times a time.Time can carry as Unix nanoseconds: the daemon buckets
// by UnixNano, so times outside the int64 range are rejected.
const (
	minUnixSec int64 = math.MinInt64/1_000_000_000 + 1
	maxUnixSec int64 = math.MaxInt64/1_000_000_000 - 1
)

// ParsePayload parses one intake message body and appends its observations
// to dst, in payload order. The accepted forms (CONTRACT.md §2) are
//
//	{"time": T, "value": V}      T an RFC 3339 string or Unix seconds; may be left out
//	[{"time": T, "value": V}, …] applied in order
//	12345.5                      a bare number as text
//
// with JSON white space around them. An observation without a time gets
// arrival. A message is accepted or rejected as a whole: on error dst is
// returned with its original length and the error is a *Reject. The first
// problem in reading order decides the code, so the result is deterministic.
//
// Unix seconds given in plain decimal notation are converted exactly to the
// nanosecond (digits beyond the ninth decimal are truncated); with an
// exponent they go through float64. Times must lie within lim.MaxFuture
// ahead of and lim.MaxPast behind arrival, and within the years 1678–2262
// that Unix nanoseconds in an int64 can hold.
//
// ParsePayload reads data only while it runs and keeps no reference to it.
// It does not allocate, except for a non-UTC RFC 3339 offset, a key or time
// string with escapes, growth of dst, and the Reject on error.
func ParsePayload(data []byte, arrival time.Time, lim Limits, dst []Observation) ([]Observation, error) {
	lim = lim.withDefaults()
	n0 := len(dst)
	p := parser{b: data, arrival: arrival, lim: lim, elem: -1}
	out, rej := p.payload(dst)
	if rej != nil {
		return dst[:n0], rej
	}
	return out, nil
}

type parser struct {
	b       []byte
	i       int
	arrival time.Time
	lim     Limits
	elem    int // index of the array element being read; -1 outside an array
}

func reject(code, format string, args ...any) *Reject {
	return &Reject{Code: code, Reason: fmt.Sprintf(format, args...)}
}

// where names the object being read, for reasons: "" at top level,
// "element 3: " inside an array (1-based).
func (p *parser) where() string {
	if p.elem < 0 {
		return ""
	}
	return "element " + strconv.Itoa(p.elem+1) + ": "
}

func (p *parser) ws() {
	for p.i < len(p.b) {
		switch p.b[p.i] {
		case ' ', '\t', '\n', '\r':
			p.i++
		default:
			return
		}
	}
}

func (p *parser) payload(dst []Observation) ([]Observation, *Reject) {
	if len(p.b) > p.lim.MaxPayload {
		return dst, reject(CodeTooLarge, "payload is %d bytes; the limit is %d bytes", len(p.b), p.lim.MaxPayload)
	}
	p.ws()
	if p.i == len(p.b) {
		if len(p.b) == 0 {
			return dst, reject(CodeEmpty, "payload is empty; send a number, an object {\"value\": …} or an array of such objects")
		}
		return dst, reject(CodeEmpty, "payload is only white space; send a number, an object {\"value\": …} or an array of such objects")
	}
	var rej *Reject
	switch c := p.b[p.i]; c {
	case '{':
		var o Observation
		o, rej = p.object()
		if rej == nil {
			dst = append(dst, o)
		}
	case '[':
		dst, rej = p.array(dst)
	case '"':
		s, _, r := p.str()
		if r != nil {
			return dst, r
		}
		return dst, reject(CodeBadValue, "payload is the string %s; send a number, an object {\"value\": …} or an array of such objects", excerpt(s))
	case 't', 'f':
		if r := p.literal(); r != nil {
			return dst, r
		}
		return dst, reject(CodeBadValue, "payload is a boolean; send a number, an object {\"value\": …} or an array of such objects")
	default:
		if c == 'n' && p.has("null") {
			p.i += 4
			return dst, reject(CodeBadValue, "payload is null; send a number, an object {\"value\": …} or an array of such objects")
		}
		var v float64
		v, rej = p.number("payload")
		if rej == nil {
			dst = append(dst, Observation{Time: p.arrival, Value: v})
		}
	}
	if rej != nil {
		return dst, rej
	}
	p.ws()
	if p.i != len(p.b) {
		return dst, reject(CodeNotJSON, "unexpected %s after the end of the payload at byte %d; send one number, object or array", excerpt(p.b[p.i:]), p.i+1)
	}
	return dst, nil
}

func (p *parser) has(lit string) bool {
	return len(p.b)-p.i >= len(lit) && string(p.b[p.i:p.i+len(lit)]) == lit
}

// literal consumes true, false or null, or rejects as not JSON.
func (p *parser) literal() *Reject {
	for _, lit := range [...]string{"true", "false", "null"} {
		if p.has(lit) {
			p.i += len(lit)
			return nil
		}
	}
	return p.notJSON()
}

func (p *parser) notJSON() *Reject {
	if p.i >= len(p.b) {
		return reject(CodeNotJSON, "%spayload ends early (truncated JSON?); send a number, an object {\"value\": …} or an array of such objects", p.where())
	}
	return reject(CodeNotJSON, "%sunexpected %s at byte %d; send a number, an object {\"value\": …} or an array of such objects", p.where(), excerpt(p.b[p.i:]), p.i+1)
}

func (p *parser) array(dst []Observation) ([]Observation, *Reject) {
	p.i++ // '['
	p.ws()
	if p.i < len(p.b) && p.b[p.i] == ']' {
		p.i++
		return dst, reject(CodeEmpty, "payload is an empty array; send at least one object {\"value\": …}")
	}
	for n := 0; ; n++ {
		if n >= p.lim.MaxBatch {
			return dst, reject(CodeTooLarge, "array has more than %d elements; send at most %d observations per message", p.lim.MaxBatch, p.lim.MaxBatch)
		}
		p.elem = n
		p.ws()
		if p.i >= len(p.b) {
			return dst, p.notJSON()
		}
		switch p.b[p.i] {
		case '{':
			o, rej := p.object()
			if rej != nil {
				return dst, rej
			}
			dst = append(dst, o)
		case '[':
			return dst, reject(CodeTooDeep, "element %d is an array; arrays may not nest, send objects {\"time\": …, \"value\": …}", n+1)
		default:
			kind, rej := p.kindOf()
			if rej != nil {
				return dst, rej
			}
			return dst, reject(CodeBadValue, "element %d is %s; the elements of an array must be objects {\"time\": …, \"value\": …}", n+1, kind)
		}
		p.ws()
		if p.i >= len(p.b) {
			return dst, p.notJSON()
		}
		switch p.b[p.i] {
		case ',':
			p.i++
		case ']':
			p.i++
			p.elem = -1
			return dst, nil
		default:
			return dst, p.notJSON()
		}
	}
}

// kindOf names the scalar JSON value at p.i for a reason ("a number", "the
// string \"x\""), or rejects it as not JSON.
func (p *parser) kindOf() (string, *Reject) {
	switch c := p.b[p.i]; {
	case c == '"':
		s, _, rej := p.str()
		if rej != nil {
			return "", rej
		}
		return "the string " + excerpt(s), nil
	case c == 't' || c == 'f':
		if rej := p.literal(); rej != nil {
			return "", rej
		}
		return "a boolean", nil
	case c == 'n' && p.has("null"):
		p.i += 4
		return "null", nil
	case c == '{':
		return "an object", nil
	case c == '[':
		return "an array", nil
	}
	start := p.i
	if end, ok := scanNumber(p.b, p.i); ok {
		p.i = end
		return "the number " + string(p.b[start:end]), nil
	}
	if end, ok := scanNonFinite(p.b, p.i); ok {
		p.i = end
		return "the number " + string(p.b[start:end]), nil
	}
	return "", p.notJSON()
}

func (p *parser) object() (Observation, *Reject) {
	p.i++ // '{'
	var (
		o                   Observation
		seenTime, seenValue bool
	)
	p.ws()
	if p.i < len(p.b) && p.b[p.i] == '}' {
		p.i++
		return o, reject(CodeMissingValue, "%sobject is empty; send {\"value\": V} with V a number", p.where())
	}
	for {
		p.ws()
		if p.i >= len(p.b) || p.b[p.i] != '"' {
			return o, p.notJSON()
		}
		raw, esc, rej := p.str()
		if rej != nil {
			return o, rej
		}
		key := raw
		if esc {
			key = unescape(raw)
		}
		p.ws()
		if p.i >= len(p.b) || p.b[p.i] != ':' {
			return o, p.notJSON()
		}
		p.i++
		p.ws()
		if p.i >= len(p.b) {
			return o, p.notJSON()
		}
		if (seenTime && string(key) == "time") || (seenValue && string(key) == "value") {
			return o, reject(CodeBadField, "%skey %s appears twice; send it once", p.where(), excerpt(key))
		}
		switch string(key) {
		case "time":
			seenTime = true
			t, rej := p.time()
			if rej != nil {
				return o, rej
			}
			o.Time = t
		case "value":
			seenValue = true
			v, rej := p.value()
			if rej != nil {
				return o, rej
			}
			o.Value = v
		default:
			return o, reject(CodeBadField, "%sunknown key %s; an observation has only \"time\" and \"value\"", p.where(), excerpt(key))
		}
		p.ws()
		if p.i >= len(p.b) {
			return o, p.notJSON()
		}
		switch p.b[p.i] {
		case ',':
			p.i++
		case '}':
			p.i++
			if !seenValue {
				return o, reject(CodeMissingValue, "%sobject has no \"value\"; send {\"value\": V} with V a number", p.where())
			}
			if !seenTime {
				o.Time = p.arrival
			}
			return o, nil
		default:
			return o, p.notJSON()
		}
	}
}

func (p *parser) value() (float64, *Reject) {
	c := p.b[p.i]
	if c == '{' || c == '[' {
		if p.elem >= 0 {
			return 0, reject(CodeTooDeep, "%svalue is nested inside an object inside an array; send a number", p.where())
		}
		what := "an object"
		if c == '[' {
			what = "an array"
		}
		return 0, reject(CodeBadValue, "value is %s; send a number", what)
	}
	switch {
	case c == '"':
		s, _, rej := p.str()
		if rej != nil {
			return 0, rej
		}
		return 0, reject(CodeBadValue, "%svalue %s is a string; send a number", p.where(), excerpt(s))
	case c == 't' || c == 'f':
		start := p.i
		if rej := p.literal(); rej != nil {
			return 0, rej
		}
		return 0, reject(CodeBadValue, "%svalue %s is a boolean; send a number", p.where(), p.b[start:p.i])
	case c == 'n' && p.has("null"):
		p.i += 4
		return 0, reject(CodeBadValue, "%svalue is null; send a number, or leave the observation out", p.where())
	}
	return p.number("value")
}

// number reads a JSON number (or a NaN/Inf spelling, to reject it as not
// finite) and returns it as a finite float64.
func (p *parser) number(what string) (float64, *Reject) {
	start := p.i
	end, ok := scanNumber(p.b, p.i)
	if !ok {
		if e, nf := scanNonFinite(p.b, p.i); nf {
			p.i = e
			return 0, reject(CodeNotFinite, "%s%s is %s, which is not a finite number; send a finite number", p.where(), what, excerpt(p.b[start:e]))
		}
		return 0, p.notJSON()
	}
	p.i = end
	tok := p.b[start:end]
	v, err := strconv.ParseFloat(unsafe.String(&tok[0], len(tok)), 64)
	if err != nil || math.IsInf(v, 0) {
		return 0, reject(CodeNotFinite, "%s%s %s is beyond the range of a 64-bit float; send a finite number", p.where(), what, excerpt(tok))
	}
	return v, nil
}

func (p *parser) time() (time.Time, *Reject) {
	var t time.Time
	switch c := p.b[p.i]; {
	case c == '"':
		raw, esc, rej := p.str()
		if rej != nil {
			return t, rej
		}
		s := raw
		if esc {
			s = unescape(raw)
		}
		if len(s) == 0 {
			return t, reject(CodeBadTime, "%stime is an empty string; send an RFC 3339 time such as \"2024-05-01T12:00:00Z\" or Unix seconds", p.where())
		}
		var err error
		t, err = time.Parse(time.RFC3339, unsafe.String(&s[0], len(s)))
		if err != nil {
			return t, reject(CodeBadTime, "%stime %s is not an RFC 3339 time; send e.g. \"2024-05-01T12:00:00Z\" or Unix seconds", p.where(), excerpt(s))
		}
		if sec := t.Unix(); sec < minUnixSec || sec > maxUnixSec {
			return t, reject(CodeBadTime, "%stime %s is outside the years 1678–2262; send a time in that range", p.where(), excerpt(s))
		}
		t = t.UTC()
	case c == '-' || (c >= '0' && c <= '9'):
		start := p.i
		end, ok := scanNumber(p.b, p.i)
		if !ok {
			return t, p.notJSON()
		}
		p.i = end
		var rej *Reject
		t, rej = p.unixSeconds(p.b[start:end])
		if rej != nil {
			return t, rej
		}
	default:
		kind, rej := p.kindOf()
		if rej != nil {
			return t, rej
		}
		if strings.HasPrefix(kind, "the number") { // NaN or Inf
			return t, reject(CodeNotFinite, "%stime is %s, which is not a finite number; send an RFC 3339 time or Unix seconds", p.where(), kind[len("the number "):])
		}
		return t, reject(CodeBadTime, "%stime is %s; send an RFC 3339 time such as \"2024-05-01T12:00:00Z\" or Unix seconds, or leave \"time\" out", p.where(), kind)
	}
	if p.lim.MaxFuture > 0 && t.Sub(p.arrival) > p.lim.MaxFuture {
		return t, reject(CodeBadTime, "%stime %s is %s ahead of arrival (%s); the limit is %s — check the sender's clock and units (seconds, not milliseconds)",
			p.where(), t.UTC().Format(time.RFC3339Nano), roundDur(t.Sub(p.arrival)), p.arrival.UTC().Format(time.RFC3339), p.lim.MaxFuture)
	}
	if p.lim.MaxPast > 0 && p.arrival.Sub(t) > p.lim.MaxPast {
		return t, reject(CodeBadTime, "%stime %s is %s behind arrival (%s); the limit is %s — check the sender's clock and units (seconds, not milliseconds)",
			p.where(), t.UTC().Format(time.RFC3339Nano), roundDur(p.arrival.Sub(t)), p.arrival.UTC().Format(time.RFC3339), p.lim.MaxPast)
	}
	return t, nil
}

func roundDur(d time.Duration) time.Duration {
	if d > time.Hour || d < -time.Hour {
		return d.Round(time.Second)
	}
	return d.Round(time.Millisecond)
}

// unixSeconds converts a JSON number token of Unix seconds to a time. Plain
// decimal notation is converted exactly (to the nanosecond, truncating
// further digits); exponent notation goes through float64.
func (p *parser) unixSeconds(tok []byte) (time.Time, *Reject) {
	neg := tok[0] == '-'
	j := 0
	if neg {
		j = 1
	}
	var sec, nsec int64
	exact := true
	for ; j < len(tok) && tok[j] >= '0' && tok[j] <= '9'; j++ {
		if sec > maxUnixSec {
			break // keep reading digits cheaply; range check below
		}
		sec = sec*10 + int64(tok[j]-'0')
	}
	for ; j < len(tok) && tok[j] >= '0' && tok[j] <= '9'; j++ {
	}
	if j < len(tok) && tok[j] == '.' {
		j++
		scale := int64(1e8)
		for ; j < len(tok) && tok[j] >= '0' && tok[j] <= '9'; j++ {
			nsec += int64(tok[j]-'0') * scale
			scale /= 10
		}
	}
	if j < len(tok) { // exponent
		exact = false
	}
	if exact {
		if sec > maxUnixSec {
			return time.Time{}, reject(CodeBadTime, "%stime %s Unix seconds is outside the years 1678–2262; send seconds, not milliseconds or nanoseconds", p.where(), excerpt(tok))
		}
		if neg {
			sec, nsec = -sec, -nsec
		}
		return time.Unix(sec, nsec).UTC(), nil
	}
	v, err := strconv.ParseFloat(unsafe.String(&tok[0], len(tok)), 64)
	if err != nil || math.IsInf(v, 0) {
		return time.Time{}, reject(CodeNotFinite, "%stime %s is beyond the range of a 64-bit float; send Unix seconds or an RFC 3339 time", p.where(), excerpt(tok))
	}
	if v < float64(minUnixSec) || v > float64(maxUnixSec) {
		return time.Time{}, reject(CodeBadTime, "%stime %s Unix seconds is outside the years 1678–2262; send seconds, not milliseconds or nanoseconds", p.where(), excerpt(tok))
	}
	fs := math.Floor(v)
	ns := math.Round((v - fs) * 1e9)
	return time.Unix(int64(fs), int64(ns)).UTC(), nil
}

// str reads a JSON string at p.i (which holds '"') and returns its raw
// content between the quotes and whether it holds escapes.
func (p *parser) str() (raw []byte, escaped bool, rej *Reject) {
	start := p.i
	j := p.i + 1
	for j < len(p.b) {
		c := p.b[j]
		switch {
		case c == '"':
			p.i = j + 1
			return p.b[start+1 : j], escaped, nil
		case c == '\\':
			escaped = true
			if j+1 >= len(p.b) {
				j = len(p.b)
				continue
			}
			switch p.b[j+1] {
			case '"', '\\', '/', 'b', 'f', 'n', 'r', 't':
				j += 2
			case 'u':
				if j+6 > len(p.b) || !isHex4(p.b[j+2:j+6]) {
					p.i = j
					return nil, false, reject(CodeNotJSON, "%sbad escape %s in a string at byte %d", p.where(), excerpt(p.b[j:min(j+6, len(p.b))]), j+1)
				}
				j += 6
			default:
				p.i = j
				return nil, false, reject(CodeNotJSON, "%sbad escape %s in a string at byte %d", p.where(), excerpt(p.b[j:j+2]), j+1)
			}
		case c < 0x20:
			p.i = j
			return nil, false, reject(CodeNotJSON, "%scontrol character 0x%02x inside a string at byte %d; escape it", p.where(), c, j+1)
		default:
			j++
		}
	}
	p.i = len(p.b)
	return nil, false, reject(CodeNotJSON, "%sstring starting at byte %d is not closed", p.where(), start+1)
}

func isHex4(b []byte) bool {
	for _, c := range b[:4] {
		if !(c >= '0' && c <= '9' || c >= 'a' && c <= 'f' || c >= 'A' && c <= 'F') {
			return false
		}
	}
	return true
}

func hex4(b []byte) rune {
	var r rune
	for _, c := range b[:4] {
		r <<= 4
		switch {
		case c >= '0' && c <= '9':
			r |= rune(c - '0')
		case c >= 'a' && c <= 'f':
			r |= rune(c - 'a' + 10)
		default:
			r |= rune(c - 'A' + 10)
		}
	}
	return r
}

// unescape decodes the escapes of a raw string already checked by str.
func unescape(raw []byte) []byte {
	out := make([]byte, 0, len(raw))
	for j := 0; j < len(raw); {
		c := raw[j]
		if c != '\\' {
			out = append(out, c)
			j++
			continue
		}
		switch raw[j+1] {
		case 'b':
			out = append(out, '\b')
		case 'f':
			out = append(out, '\f')
		case 'n':
			out = append(out, '\n')
		case 'r':
			out = append(out, '\r')
		case 't':
			out = append(out, '\t')
		case 'u':
			r := hex4(raw[j+2:])
			j += 6
			if utf16.IsSurrogate(r) && j+6 <= len(raw) && raw[j] == '\\' && raw[j+1] == 'u' {
				if r2 := utf16.DecodeRune(r, hex4(raw[j+2:])); r2 != utf8.RuneError {
					r = r2
					j += 6
				}
			}
			out = utf8.AppendRune(out, r)
			continue
		default: // " \ /
			out = append(out, raw[j+1])
		}
		j += 2
	}
	return out
}

// scanNumber returns the end of the JSON number starting at i
// (-?(0|[1-9][0-9]*)(\.[0-9]+)?([eE][+-]?[0-9]+)?) and whether there is one.
func scanNumber(b []byte, i int) (int, bool) {
	j := i
	if j < len(b) && b[j] == '-' {
		j++
	}
	if j >= len(b) {
		return i, false
	}
	switch {
	case b[j] == '0':
		j++
	case b[j] >= '1' && b[j] <= '9':
		for j < len(b) && b[j] >= '0' && b[j] <= '9' {
			j++
		}
	default:
		return i, false
	}
	if j < len(b) && b[j] == '.' {
		j++
		k := j
		for j < len(b) && b[j] >= '0' && b[j] <= '9' {
			j++
		}
		if j == k {
			return i, false
		}
	}
	if j < len(b) && (b[j] == 'e' || b[j] == 'E') {
		j++
		if j < len(b) && (b[j] == '+' || b[j] == '-') {
			j++
		}
		k := j
		for j < len(b) && b[j] >= '0' && b[j] <= '9' {
			j++
		}
		if j == k {
			return i, false
		}
	}
	// A number must not run straight into letters or digits ("12abc", "01").
	if j < len(b) && (b[j] >= '0' && b[j] <= '9' || b[j] >= 'a' && b[j] <= 'z' || b[j] >= 'A' && b[j] <= 'Z' || b[j] == '.') {
		return i, false
	}
	return j, true
}

// scanNonFinite recognises the spellings of NaN and infinity that senders
// produce (NaN, nan, Inf, +Inf, -Infinity, …), case-insensitively.
func scanNonFinite(b []byte, i int) (int, bool) {
	j := i
	if j < len(b) && (b[j] == '-' || b[j] == '+') {
		j++
	}
	for _, w := range [...]string{"infinity", "inf", "nan"} {
		if len(b)-j >= len(w) && strings.EqualFold(unsafe.String(&b[j], len(w)), w) {
			k := j + len(w)
			if k < len(b) && (b[k] >= 'a' && b[k] <= 'z' || b[k] >= 'A' && b[k] <= 'Z' || b[k] >= '0' && b[k] <= '9') {
				continue
			}
			return k, true
		}
	}
	return i, false
}

// excerpt quotes at most 40 bytes of b for a reason.
func excerpt(b []byte) string {
	const max = 40
	if len(b) > max {
		return strconv.Quote(string(b[:max])) + "…"
	}
	return strconv.Quote(string(b))
}
