// Package source scrapes OpenMetrics endpoints (the config's sources:)
// and publishes every selected sample as an observation on the intake
// subject of its topic, through the daemon's own bus connection, so that
// durability, cluster ownership of series and everything downstream are
// those of any other publisher.
//
// # What it owns
//
// A Runner owns one goroutine per source. Each scrapes its endpoint at
// once and then every Every (a scrape that overruns skips the ticks it
// missed), within Timeout from connecting to the last byte. The body is
// read through an io.LimitReader of MaxBytes + 1 bytes; a longer body is
// dropped whole. Parse hands it to the decoders of
// github.com/prometheus/common/expfmt, chosen by the response's
// Content-Type (the request asks for the text format 0.0.4 first, then
// OpenMetrics 1.0.0: expfmt's OpenMetrics decoder checks each line against
// the specification's ABNF and costs thousands of times as much per
// sample, see accept). A response that does not parse is dropped
// whole, as OpenMetrics 1.0 asks ("partial or invalid expositions MUST be
// considered erroneous in their entirety"). OpenMetrics lines longer than
// MaxLineBytes are refused before parsing: that decoder checks each line
// against the specification's ABNF in time that grows faster than the
// line.
//
// # Observations
//
// Every selected sample becomes {"time": T, "value": V} with T the
// scrape's start (Unix seconds, to the millisecond), whatever timestamp
// the exposition gives: all series of a source then share their bucket
// boundaries and no sample arrives late because its exporter's clock
// lags. NaN and ±Inf are not published (the intake takes finite values).
// Samples are published in the order of their topics.
//
// # Topics
//
//	topic = [topic_prefix "."] Token(metric name) {"." Token(label value)}
//
// with the label values in the byte order of their label names; labels
// with empty values are left out (OpenMetrics 1.0: an empty value is as
// if the label were absent). A token is its string when every byte is in
// the safe alphabet A–Z a–z 0–9 _ - :, otherwise every other byte —
// '.', '*', '>', white space, control characters, '~' and each byte of a
// multi-byte character — is written ~XX (two upper-case hex digits); the
// empty string is "~". So
//
//	node_cpu_seconds_total{cpu="0",mode="idle"} → host1.node_cpu_seconds_total.0.idle
//	fs_avail_bytes{mount="/var/lib"}            → host1.fs_avail_bytes.~2Fvar~2Flib
//
// DecodeToken and ParseTopic invert the mapping. Label names do not enter
// the topic; when two samples of one scrape get the same topic (a
// repeated series, or label sets that differ only in their names) the
// last one on the page is published and the others are counted as
// duplicates. A topic longer than the bus allows (config.MaxTopicLen
// bytes, config.MaxTopicTokens tokens) is not published (bad_topic).
//
// # Kind
//
// Each message carries the header stream.KindHeader: counter for a
// sample whose family's TYPE is counter, or a histogram's _bucket, _sum
// or _count, or a summary's _sum or _count; gauge otherwise (gauge,
// unknown or no TYPE, quantiles, gauge histograms). A source's kind key
// can force gauge or counter for all its samples. The daemon gives a new
// series the kind of its first message when its config entry says kind:
// auto (the default), and stores it with the series, so it survives
// restarts; an entry with kind gauge or counter wins over the header. The
// kind thus travels with the data itself, on the same durable stream, and
// nothing else needs to know which topics a source publishes.
//
// # Bounds and failures
//
// A bad endpoint never stops the daemon or another source. Every scrape
// counts in forewarn_source_scrapes_total{source}; one that fails counts
// in forewarn_source_failures_total{source,cause} (Causes: timeout,
// refused, unreachable, http_status, too_large, malformed, and for a
// partial loss too_many_series and publish) and is logged when its
// outcome changes, then at most once a minute. Samples not published
// count in forewarn_source_samples_dropped_total{source,reason}
// (DropReasons). Every label value is there from the start, at 0. The
// distinct topics all sources publish are bounded together by
// limits.max_series: new ones beyond it are left out, always the same
// ones since samples go in topic order.
//
// # Cluster mode
//
// With cluster.partitions > 0 each endpoint is scraped by exactly one
// instance: the holder of the lease of Partition(URL, n), the partition
// FNV-1a of the endpoint's URL falls in, the hash and the leases of the
// series' partitions (Options.Owns, ByPartition; cluster.go says how a
// handover goes). forewarn_source_scraping{source} is 1 on the instance
// that scrapes it.
//
// # Concurrency
//
// Run may be called once. Metrics may be read from any goroutine. Parse,
// AppendToken, DecodeToken, AppendTopic and ParseTopic are pure functions
// (AppendTopic sorts its labels argument in place).
package source
