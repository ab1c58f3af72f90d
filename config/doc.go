// Package config reads, defaults and validates forewarn's YAML
// configuration (CONTRACT.md §2), and matches topics to their series
// settings and alert rules.
//
// # Contract
//
//   - Load and Parse decode strictly: an unknown key, a key given twice, a
//     value of the wrong type and a second YAML document are errors. Every
//     problem, from decoding and from validation, comes back at once in a
//     *Errors whose Problems carry the line and column of the value; its
//     Error method prints one problem a line as FILE:LINE:COL: path: message.
//     *Errors unwraps to ErrInvalid.
//   - Defaults come from Default and DefaultSeries, which return new values
//     on each call; there is no shared mutable default. A zero field means
//     its default (documented on each field), except Intake.Durable (false:
//     plain subscription) and HTTP.Listen ("": no listener), whose zero
//     values are settings of their own; Parse starts from Default, so keys
//     absent from the file keep the defaults true and "127.0.0.1:8714".
//   - The order is clone → defaults → validate: WithDefaults returns a
//     filled-in copy, Validate checks that copy, and the receiver is never
//     changed. The Config returned by Load, Parse and Override is already
//     filled in and valid.
//   - Durations are Go duration strings with units ("90s", "1h30m"); a bare
//     number other than 0 is refused. Steps are whole seconds.
//   - A series' seasonal cycles (seasons) are durations that may use the
//     units d (24h) and w (7·24h) as well, or whole numbers of steps
//     (Cycle, ParseCycle). Its model is auto or orders "p,d,q" or
//     "p,d,q x P,D,Q" with a separate constant (auto, none, mean, drift).
//     A key or spelling of an earlier release (period, a model written
//     "ARIMA(p,d,q)(P,D,Q)[s]") is refused with a problem that names its
//     replacement.
//   - Topics are the part of an intake subject after its pattern's literal
//     prefix (TopicOf). Series entries and alert rules match topics with the
//     bus's wildcards (MatchSubject): "*" one token, ">" one or more
//     trailing tokens. The first matching series entry applies (SeriesFor);
//     every matching alert rule applies (AlertsFor).
//   - Validate checks what a single file can tell. The daemon checks what
//     depends on a particular series, e.g. that an alert's window does not
//     exceed that series' Horizon·Step, and whether credential files exist.
//
// # Concurrency
//
// A *Config is a plain value. Reading it (SeriesFor, AlertsFor, TopicOf,
// Fingerprint) from many goroutines is safe as long as nobody changes it.
// MatchSubject, ValidTopic and ValidPattern are pure functions.
//
// # Caveats
//
// Anchors and aliases are followed (at most 10 000 alias uses); merge keys
// ("<<") are not supported. At most 200 problems are listed, then a count.
package config
