// Package cluster lets several forewarn instances share the series of one
// intake stream on a NATS cluster, with nothing but JetStream: a stream
// subject transform cuts the intake into partitions, a key-value bucket
// holds who is alive and who owns which partition, and consumers named
// by partition and epoch fence a former owner out.
//
// # Partitions
//
// The intake stream stores each message under its partition number
// followed by the subject as published (Transform: "{{partition(n)}}.>",
// so "metrics.a.b" is stored as "5.metrics.a.b"). The server computes the
// number (FNV-1a of the whole subject, mod n); Partition computes the same
// number in Go, so every instance knows the map without asking. A
// partition's messages are read through FilterSubject(p). The count is
// fixed for the life of a stream: CheckStream reports a configured count
// that differs from the stream's.
//
// # Membership and leases
//
// The lease bucket (EnsureBucket: history 1, per-key lifetimes, so
// nats-server 2.11 or later) holds:
//
//	member.<instance>  one per live instance, written with a lifetime of one lease and renewed every lease/4
//	lease.<p>          one per owned partition, the same lifetime and renewal
//
// Every write after the first is a compare-and-set on the key's last
// revision, so a writer that has missed a change fails instead of
// overwriting it. The revision that created a lease is its owner's epoch:
// revisions are stream sequences, so a later owner of a partition always
// has a larger epoch. Renewals carry the epoch in the value.
//
// # Assignment
//
// Each instance computes Assign (rendezvous hashing) over the live member
// keys it sees. It releases (deletes at its revision) a lease that Assign
// gives to another instance, and creates a free lease that Assign gives to
// it. A lease held by a live instance is never taken over: it is released
// by its holder or lapses with it. A join or a leave moves only the
// partitions that must move.
//
// # Fencing
//
// An owner that stops (SIGSTOP, a long pause, a cut-off network) may
// resume believing it still owns its partitions. Two things stop it:
//
//   - the Owner gives up a lease whose last confirmed renewal is older than
//     lease − lease/5, before the server can let it lapse, and it reports
//     a lease it sees taken or lapsed in the bucket;
//   - a new owner opens the partition's consumer with OpenConsumer, named
//     ConsumerName(prefix, p, epoch), and deletes every consumer of the
//     partition with an older epoch (Fence). A resumed former owner can
//     then neither fetch nor acknowledge on the partition.
//
// The first needs only local clocks to run at the same rate, not to agree;
// the second needs nothing from the former owner.
//
// # Consuming
//
// stream.PartitionedIntake puts these together for the daemon: it starts
// an Owner, opens a partition's consumer with OpenConsumer on each gained
// change and stops it on each lost one.
//
// # Snapshots
//
// An owner stores each owned partition's Snapshot (its series' state
// records, which this package does not read, and the partition's
// acknowledged stream floor) in the object store SnapshotStore, one
// object per partition, every cluster.snapshot_every and on a clean
// leave. A new owner loads the latest and starts the partition's consumer
// at its floor + 1 (ConsumerOptions.StartSeq); the records' stream
// positions make the replay a no-op for what they hold. Any snapshot
// whose records reflect every message of the partition at or below its
// floor is a correct starting point, however old, as long as the stream
// still holds what follows: so a snapshot read from a replica that is
// behind, or a late one from a fenced owner (Put refuses to replace a
// later epoch's, but cannot compare-and-set), costs replay time, not
// correctness. The encoding is versioned and checksummed.
//
// # Goroutines and locks
//
// An Owner owns exactly one goroutine, started by Start and ended by
// cancelling Start's context. It alone writes the bucket, holds the member
// and lease revisions, and sends on Changes (blocking: the reader must
// keep up, since a blocked Owner renews nothing); Changes is closed when it
// ends, after it has released its leases and its member key. Owner.mu
// guards only the lease view that Owners reads and the final error; it is
// taken for short copies and never held while calling out or sending on a
// channel, so it orders after every lock of its callers. The other
// functions of the package keep no state and may be called from any
// goroutine.
//
// # Caveats
//
// Renewals are requests in turn, one per held partition: a few hundred
// partitions per instance renew well within a lease of seconds, thousands
// would want asynchronous publications. Subjects of the lease bucket are
// written as $KV.<bucket>.<key>; a JetStream domain or API prefix is not
// supported.
package cluster
