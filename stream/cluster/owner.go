package cluster

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"log/slog"
	"slices"
	"strconv"
	"strings"
	"sync"
	"time"

	"github.com/nats-io/nats.go/jetstream"
	"github.com/nats-io/nuid"
)

// Reasons of a Change.
const (
	ReasonAcquired = "acquired" // the lease was free and this instance is the partition's owner by Assign
	ReasonMoved    = "moved"    // the membership changed and Assign gives the partition to another instance: released
	ReasonExpired  = "expired"  // no renewal was confirmed within the lease (paused, cut off from the bus)
	ReasonTaken    = "taken"    // the lease key now belongs to another owner (a renewal found a newer revision)
)

// Change is one change of this instance's ownership of a partition.
type Change struct {
	Partition int
	// Epoch is the revision at which the lease was acquired: a later owner
	// of the same partition always has a larger epoch.
	Epoch  uint64
	Gained bool   // true: this instance now owns the partition; false: it no longer does
	Reason string // one of the Reason constants
	At     time.Time
}

func (c Change) String() string {
	verb := "lost"
	if c.Gained {
		verb = "gained"
	}
	return fmt.Sprintf("%s partition %d epoch %d (%s)", verb, c.Partition, c.Epoch, c.Reason)
}

// Options configure an Owner.
type Options struct {
	// Instance is this instance's name (config Cluster.InstanceName). Required.
	Instance string
	// Partitions is the partition count, 1..MaxPartitions. Required.
	Partitions int
	// Lease is the lifetime of the member key and of each lease, at least
	// 1 s, whole seconds (the server's per-key lifetimes are in seconds).
	// Default 10 s.
	Lease time.Duration
	// Logger receives a line per change and per failed request. Default: none.
	Logger *slog.Logger
}

type held struct {
	epoch, rev uint64
	sent       time.Time // when the last confirmed write of the lease was sent
}

type leaseView struct {
	instance, incarnation string
	epoch, rev            uint64
}

// Owner keeps this instance's member key and partition leases in the
// lease bucket. Start runs its one goroutine, which renews, watches the
// bucket and reports ownership changes on Changes. See the package
// documentation.
type Owner struct {
	js          jetstream.JetStream
	kv          jetstream.KeyValue
	o           Options
	incarnation string
	renewEvery  time.Duration
	margin      time.Duration
	reqTimeout  time.Duration

	changes chan Change
	done    chan struct{}
	pauseC  chan chan struct{} // tests: stop the goroutine as SIGSTOP would

	// Owned by the goroutine.
	memberRev uint64
	lastRenew time.Time
	members   map[string]bool
	held      map[int]*held

	mu     sync.Mutex // guards leases and err; taken by the goroutine and by Owners/Err
	leases map[int]leaseView
	err    error
}

// NewOwner returns an Owner of instance o.Instance on the lease bucket kv
// (from EnsureBucket) reached through js.
func NewOwner(js jetstream.JetStream, kv jetstream.KeyValue, o Options) (*Owner, error) {
	if o.Lease == 0 {
		o.Lease = 10 * time.Second
	}
	switch {
	case o.Instance == "" || strings.ContainsAny(o.Instance, ".*> \t"):
		return nil, fmt.Errorf("%w: instance name %q", ErrOptions, o.Instance)
	case o.Partitions < 1 || o.Partitions > MaxPartitions:
		return nil, fmt.Errorf("%w: %d partitions is outside 1..%d", ErrOptions, o.Partitions, MaxPartitions)
	case o.Lease < time.Second || o.Lease%time.Second != 0:
		return nil, fmt.Errorf("%w: lease %v is not a whole number of seconds of at least 1s", ErrOptions, o.Lease)
	}
	if o.Logger == nil {
		o.Logger = slog.New(slog.DiscardHandler)
	}
	return &Owner{
		js: js, kv: kv, o: o,
		incarnation: nuid.Next(),
		renewEvery:  o.Lease / 4,
		margin:      o.Lease / 5,
		reqTimeout:  max(o.Lease/4, 500*time.Millisecond),
		changes:     make(chan Change, 2*o.Partitions+1),
		done:        make(chan struct{}),
		pauseC:      make(chan chan struct{}),
		members:     map[string]bool{},
		held:        map[int]*held{},
		leases:      map[int]leaseView{},
	}, nil
}

// Changes delivers the ownership changes in the order they happen. It
// must be read promptly: the goroutine waits for room, and while it waits
// it renews nothing. It is closed when the Owner has stopped, and then
// the Owner holds no partition.
func (w *Owner) Changes() <-chan Change { return w.changes }

// Done is closed when the goroutine has ended.
func (w *Owner) Done() <-chan struct{} { return w.done }

// Err returns why the goroutine ended, nil after a cancelled context.
func (w *Owner) Err() error {
	w.mu.Lock()
	defer w.mu.Unlock()
	return w.err
}

// Owners returns the instance holding each partition's lease as last seen
// in the bucket, "" for a free partition. Safe from any goroutine.
func (w *Owner) Owners() []string {
	w.mu.Lock()
	defer w.mu.Unlock()
	out := make([]string, w.o.Partitions)
	for p, l := range w.leases {
		if p < len(out) {
			out[p] = l.instance
		}
	}
	return out
}

// Start joins: it writes this instance's member key, waiting up to two
// leases for the key of an earlier run of the same name to lapse
// (ErrInstanceInUse if another live instance keeps renewing it), starts
// watching the bucket and starts the goroutine. Cancelling ctx makes the
// Owner leave cleanly: it releases its leases and its member key, then
// closes Changes.
func (w *Owner) Start(ctx context.Context) error {
	val := mustJSON(member{Instance: w.o.Instance, Incarnation: w.incarnation})
	deadline := time.Now().Add(2 * w.o.Lease)
	for {
		rctx, cancel := context.WithTimeout(ctx, w.reqTimeout)
		rev, err := w.kv.Create(rctx, memberKey(w.o.Instance), val, jetstream.KeyTTL(w.o.Lease))
		cancel()
		if err == nil {
			w.memberRev, w.lastRenew = rev, time.Now()
			break
		}
		if !errors.Is(err, jetstream.ErrKeyExists) {
			err = withDenied(w.js, err, w.kv.Bucket())
			return fmt.Errorf("%w %s: join as %s: %w%s", ErrBucket, w.kv.Bucket(), w.o.Instance, err, bucketHint(err, w.kv.Bucket()))
		}
		if time.Now().After(deadline) {
			return fmt.Errorf("%w: %s is renewed by another live instance; give each instance its own cluster.instance", ErrInstanceInUse, w.o.Instance)
		}
		select {
		case <-ctx.Done():
			return ctx.Err()
		case <-time.After(w.o.Lease / 10):
		}
	}
	watcher, err := w.kv.WatchAll(ctx)
	if err != nil {
		w.releaseAll()
		err = withDenied(w.js, err, w.kv.Bucket())
		return fmt.Errorf("%w %s: watch: %w%s", ErrBucket, w.kv.Bucket(), err, bucketHint(err, w.kv.Bucket()))
	}
	go w.run(ctx, watcher)
	return nil
}

func (w *Owner) run(ctx context.Context, watcher jetstream.KeyWatcher) {
	defer close(w.done)
	defer close(w.changes)
	defer func() { _ = watcher.Stop() }()
	tick := time.NewTicker(w.o.Lease / 10)
	defer tick.Stop()
	ready := false
	for {
		select {
		case <-ctx.Done():
			w.releaseAll()
			return
		case e, ok := <-watcher.Updates():
			if !ok {
				if ctx.Err() != nil {
					w.releaseAll()
					return
				}
				w.setErr(fmt.Errorf("%w: the watch of the bucket ended", ErrBucket))
				w.releaseAll()
				return
			}
			if e == nil {
				ready = true
			} else if !w.apply(ctx, e) {
				return
			}
		case <-tick.C:
			if !w.renew(ctx) {
				return
			}
		case resume := <-w.pauseC:
			<-resume
			continue
		}
		if ready && !w.reconcile(ctx) {
			return
		}
	}
}

// pause stops the goroutine, as SIGSTOP would stop the process, until
// the returned function is called. For tests.
func (w *Owner) pause() (resume func()) {
	c := make(chan struct{})
	w.pauseC <- c
	return func() { close(c) }
}

func (w *Owner) setErr(err error) {
	w.mu.Lock()
	w.err = err
	w.mu.Unlock()
}

// emit sends c on Changes; false when ctx ended first.
func (w *Owner) emit(ctx context.Context, c Change) bool {
	c.At = time.Now()
	w.o.Logger.Info("cluster: "+c.String(), "instance", w.o.Instance)
	select {
	case w.changes <- c:
		return true
	case <-ctx.Done():
		return false
	}
}

// lose drops partition p and reports it.
func (w *Owner) lose(ctx context.Context, p int, reason string) bool {
	h := w.held[p]
	delete(w.held, p)
	return w.emit(ctx, Change{Partition: p, Epoch: h.epoch, Reason: reason})
}

// apply records one bucket entry; false when ctx ended.
func (w *Owner) apply(ctx context.Context, e jetstream.KeyValueEntry) bool {
	key, rev, put := e.Key(), e.Revision(), e.Operation() == jetstream.KeyValuePut
	if name, ok := strings.CutPrefix(key, memberPrefix); ok {
		if put {
			w.members[name] = true
		} else {
			delete(w.members, name)
		}
		return true
	}
	ps, ok := strings.CutPrefix(key, leasePrefix)
	p, err := strconv.Atoi(ps)
	if !ok || err != nil || p < 0 || p >= w.o.Partitions {
		return true
	}
	var l lease
	if put && json.Unmarshal(e.Value(), &l) != nil {
		put = false // unreadable: treat as free, the owner's next renewal rewrites it
	}
	w.mu.Lock()
	if put {
		w.leases[p] = leaseView{instance: l.Instance, incarnation: l.Incarnation, epoch: l.epochOf(rev), rev: rev}
	} else {
		delete(w.leases, p)
	}
	w.mu.Unlock()
	if h := w.held[p]; h != nil && rev > h.rev {
		switch {
		case !put:
			return w.lose(ctx, p, ReasonExpired)
		case l.Incarnation != w.incarnation:
			return w.lose(ctx, p, ReasonTaken)
		}
	}
	return true
}

// renew rewrites the member key and the leases once renewEvery has
// passed, and gives up the leases whose renewal is overdue; false when
// ctx ended.
func (w *Owner) renew(ctx context.Context) bool {
	now := time.Now()
	if now.Sub(w.lastRenew) >= w.renewEvery {
		w.lastRenew = now
		w.renewMember(ctx)
		for _, p := range w.heldSorted() {
			h := w.held[p]
			sent := time.Now()
			val := mustJSON(lease{Instance: w.o.Instance, Incarnation: w.incarnation, Epoch: h.epoch})
			rctx, cancel := context.WithTimeout(ctx, w.reqTimeout)
			rev, err := casTTL(rctx, w.js, w.kv.Bucket(), leaseKey(p), val, h.rev, w.o.Lease)
			cancel()
			switch {
			case err == nil:
				h.rev, h.sent = rev, sent
			case errors.Is(err, jetstream.ErrKeyRevisionMismatch):
				if !w.lose(ctx, p, ReasonTaken) {
					return false
				}
			case ctx.Err() != nil:
				return true // leaving
			default:
				w.o.Logger.Warn("cluster: renew lease", "partition", p, "err", err)
			}
		}
	}
	// A lease whose last confirmed write is older than lease − margin may
	// lapse on the server at any moment: give it up first.
	for _, p := range w.heldSorted() {
		if time.Since(w.held[p].sent) >= w.o.Lease-w.margin {
			if !w.lose(ctx, p, ReasonExpired) {
				return false
			}
		}
	}
	return true
}

func (w *Owner) renewMember(ctx context.Context) {
	val := mustJSON(member{Instance: w.o.Instance, Incarnation: w.incarnation})
	rctx, cancel := context.WithTimeout(ctx, w.reqTimeout)
	defer cancel()
	rev, err := casTTL(rctx, w.js, w.kv.Bucket(), memberKey(w.o.Instance), val, w.memberRev, w.o.Lease)
	if errors.Is(err, jetstream.ErrKeyRevisionMismatch) {
		// The key lapsed (this instance was paused or cut off): join again.
		rev, err = w.kv.Create(rctx, memberKey(w.o.Instance), val, jetstream.KeyTTL(w.o.Lease))
	}
	if err != nil {
		if ctx.Err() == nil {
			w.o.Logger.Warn("cluster: renew member key", "err", err)
		}
		return
	}
	w.memberRev = rev
}

func (w *Owner) heldSorted() []int {
	ps := make([]int, 0, len(w.held))
	for p := range w.held {
		ps = append(ps, p)
	}
	slices.Sort(ps)
	return ps
}

// reconcile releases the partitions Assign gives to others and takes the
// free ones it gives to this instance; false when ctx ended.
func (w *Owner) reconcile(ctx context.Context) bool {
	if !w.members[w.o.Instance] {
		return true // not (yet, or no longer) seen as a member: take nothing
	}
	live := make([]string, 0, len(w.members))
	for m := range w.members {
		live = append(live, m)
	}
	want := Assign(live, w.o.Partitions)
	for _, p := range w.heldSorted() {
		if want[p] == w.o.Instance {
			continue
		}
		h := w.held[p]
		if !w.lose(ctx, p, ReasonMoved) {
			return false
		}
		rctx, cancel := context.WithTimeout(ctx, w.reqTimeout)
		err := w.kv.Delete(rctx, leaseKey(p), jetstream.LastRevision(h.rev))
		cancel()
		if err != nil && ctx.Err() == nil {
			w.o.Logger.Warn("cluster: release lease", "partition", p, "err", err)
		}
	}
	for p, owner := range want {
		if owner != w.o.Instance || w.held[p] != nil {
			continue
		}
		w.mu.Lock()
		_, taken := w.leases[p]
		w.mu.Unlock()
		if taken {
			continue // its holder releases it when it sees the same assignment, or it lapses
		}
		sent := time.Now()
		val := mustJSON(lease{Instance: w.o.Instance, Incarnation: w.incarnation})
		rctx, cancel := context.WithTimeout(ctx, w.reqTimeout)
		rev, err := w.kv.Create(rctx, leaseKey(p), val, jetstream.KeyTTL(w.o.Lease))
		cancel()
		if err != nil {
			if !errors.Is(err, jetstream.ErrKeyExists) && ctx.Err() == nil {
				w.o.Logger.Warn("cluster: acquire lease", "partition", p, "err", err)
			}
			continue
		}
		w.held[p] = &held{epoch: rev, rev: rev, sent: sent}
		w.mu.Lock()
		w.leases[p] = leaseView{instance: w.o.Instance, incarnation: w.incarnation, epoch: rev, rev: rev}
		w.mu.Unlock()
		if !w.emit(ctx, Change{Partition: p, Epoch: rev, Gained: true, Reason: ReasonAcquired}) {
			return false
		}
	}
	return true
}

// releaseAll deletes the held leases and the member key, each only at
// the revision this instance wrote last, on a fresh context: the
// caller's has ended.
func (w *Owner) releaseAll() {
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
	defer cancel()
	for _, p := range w.heldSorted() {
		if err := w.kv.Delete(ctx, leaseKey(p), jetstream.LastRevision(w.held[p].rev)); err != nil {
			w.o.Logger.Warn("cluster: release lease on leaving", "partition", p, "err", err)
		}
		delete(w.held, p)
	}
	if w.memberRev != 0 {
		if err := w.kv.Delete(ctx, memberKey(w.o.Instance), jetstream.LastRevision(w.memberRev)); err != nil {
			w.o.Logger.Warn("cluster: leave", "err", err)
		}
	}
}
