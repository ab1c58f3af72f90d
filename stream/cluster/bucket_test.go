package cluster

import (
	"fmt"
	"sync"
	"testing"
	"time"
)

// Three instances started at the same moment on a fresh cluster all ensure
// the one lease bucket at once, each from another node. Each must end with
// the bucket (one creates it, the others find it), with no error.
func TestEnsureBucketConcurrently(t *testing.T) {
	for round := range 3 {
		name := fmt.Sprintf("CONCURRENT_LEASES_%d", round)
		var wg sync.WaitGroup
		errs := make([]error, 3)
		for i := range 3 {
			_, js := connect(t, i, fmt.Sprintf("starter-%d", i))
			wg.Add(1)
			go func() {
				defer wg.Done()
				kv, err := EnsureBucket(ctxT(t), js, name, 3, 2*time.Second)
				if err == nil && kv.Bucket() != name {
					err = fmt.Errorf("bucket %q", kv.Bucket())
				}
				errs[i] = err
			}()
		}
		wg.Wait()
		for i, err := range errs {
			if err != nil {
				t.Errorf("round %d, instance %d: %v", round, i, err)
			}
		}
	}
}

// The snapshot store likewise, three instances at once.
func TestEnsureSnapshotStoreConcurrently(t *testing.T) {
	name := "CONCURRENT_SNAPS"
	var wg sync.WaitGroup
	errs := make([]error, 3)
	for i := range 3 {
		_, js := connect(t, i, fmt.Sprintf("snap-starter-%d", i))
		wg.Add(1)
		go func() {
			defer wg.Done()
			_, errs[i] = EnsureSnapshotStore(ctxT(t), js, name, 3)
		}()
	}
	wg.Wait()
	for i, err := range errs {
		if err != nil {
			t.Errorf("instance %d: %v", i, err)
		}
	}
}
