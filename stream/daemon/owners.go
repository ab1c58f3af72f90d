package daemon

import "forewarn/stream"

// Who owns what, for the pages and /api/series (issue 15, "Queries and
// pages"): in cluster mode the lease bucket, as this instance's
// cluster.Owner last saw it, names the instance holding each partition.

// leaseView is what a cluster-mode intake tells of ownership
// (stream.PartitionedIntake).
type leaseView interface {
	// LeaseOwners returns the instance holding each partition's lease,
	// "" for a free partition.
	LeaseOwners() []string
	// PartitionOfTopic returns the partition of a topic.
	PartitionOfTopic(topic string) (int, bool)
}

// Ownership returns this instance's name and the instance holding each
// partition's lease ("" for a free one), as the lease bucket last showed
// them; ok is false in single-instance mode (this instance owns every
// series). Safe from any goroutine.
func (d *Daemon) Ownership() (instance string, owners []string, ok bool) {
	lv, isLV := d.intake.(leaseView)
	if !isLV || d.cfg.Cluster.Partitions == 0 {
		return "", nil, false
	}
	name, err := d.cfg.Cluster.InstanceName()
	if err != nil {
		return "", nil, false // New has already refused such a name
	}
	return name, lv.LeaseOwners(), true
}

// PartitionOf returns the partition of topic's series (cluster mode); ok
// is false in single-instance mode or for a topic no intake subject can
// carry.
func (d *Daemon) PartitionOf(topic string) (int, bool) {
	lv, isLV := d.intake.(leaseView)
	if !isLV || d.cfg.Cluster.Partitions == 0 {
		return 0, false
	}
	return lv.PartitionOfTopic(topic)
}

var _ leaseView = (*stream.PartitionedIntake)(nil)
