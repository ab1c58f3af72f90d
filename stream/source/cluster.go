package source

import (
	"forewarn/config"
	"forewarn/stream/cluster"
)

// Scraping in cluster mode (cluster.partitions > 0): each endpoint is
// scraped by exactly one instance, the one that holds the lease of the
// endpoint's partition, so the sources move with the same leases, the
// same assignment and the same handovers as the series.
//
// An endpoint's partition is Partition(URL, n): FNV-1a of its URL, as
// written in the config's openmetrics key, mod n, the hash that maps a
// subject to its partition (cluster.Partition). Sources that name the
// same URL land together.
//
// Each source's goroutine asks Options.Owns before every scrape: a source
// whose partition this instance does not hold skips the scrape (it is not
// counted in forewarn_source_scrapes_total); forewarn_source_scraping is
// 1 while this instance scrapes it, 0 otherwise. A new owner starts at its
// next tick after its lease is granted, and a former owner stops at its
// next tick after it gives the lease up; a scrape already under way when
// the lease goes is finished. Between the two, at most one scrape of each
// instance can fall into one interval of every; the series take the last
// value of a bucket (series.Observe), so one extra observation of the same
// value changes no forecast beyond that bucket's value.

// Partition returns the partition of the endpoint at url among n
// partitions (cluster.Partition of the URL).
func Partition(url string, n int) int { return cluster.Partition(url, n) }

// ByPartition returns an Options.Owns that scrapes a source when owned(),
// the partitions this instance holds now (stream.PartitionedIntake.Owned),
// includes the source's partition among n.
func ByPartition(n int, owned func() map[int]uint64) func(*config.Source) bool {
	return func(s *config.Source) bool {
		_, ok := owned()[Partition(s.OpenMetrics, n)]
		return ok
	}
}
