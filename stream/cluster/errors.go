package cluster

import "errors"

var (
	// ErrPartitions is returned by CheckStream when the intake stream is
	// already cut into a different number of partitions than configured,
	// and by the functions here for a partition count or number out of range.
	ErrPartitions = errors.New("cluster: partition count")

	// ErrBucket is returned by EnsureBucket and NewOwner when the lease
	// bucket cannot be created, read or written (a missing right, a server
	// older than 2.11 without per-key lifetimes, no JetStream cluster).
	ErrBucket = errors.New("cluster: lease bucket")

	// ErrInstanceInUse is returned by Owner.Start when another live
	// instance keeps renewing a member key under the same name.
	ErrInstanceInUse = errors.New("cluster: instance name in use")

	// ErrFenced is returned by OpenConsumer and Fence when a consumer of a
	// later epoch exists for the partition: a newer owner has taken it over
	// and the caller must stop consuming it.
	ErrFenced = errors.New("cluster: fenced by a newer owner")

	// ErrSnapshot is returned when the snapshot store cannot be created,
	// read or written, or holds a snapshot that cannot be read.
	ErrSnapshot = errors.New("cluster: snapshot store")

	// ErrOptions is returned by NewOwner for options it cannot use.
	ErrOptions = errors.New("cluster: bad options")
)
