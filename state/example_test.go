package state_test

import (
	"fmt"
	"log"
	"math"
	"os"

	"forewarn/engine/series"
	"forewarn/state"
)

func ExampleEncode() {
	snap := &series.Snapshot{
		Topic:       "storage.vol1.used_bytes",
		Kind:        "gauge",
		StepSeconds: 300,
		Window:      []float64{7.1e11, math.NaN(), 7.3e11},
	}
	rec := state.Encode(nil, snap)
	back, err := state.Decode(rec)
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println(len(rec), back.Topic, back.Window)

	rec[len(rec)/2] ^= 1
	_, err = state.Decode(rec)
	fmt.Println(err)
	// Output:
	// 278 storage.vol1.used_bytes [7.1e+11 NaN 7.3e+11]
	// state: corrupt record: CRC mismatch at byte 274 (stored 3d151779, computed f87549d3)
}

func ExampleStore() {
	dir, err := os.MkdirTemp("", "forewarn-example")
	if err != nil {
		log.Fatal(err)
	}
	defer os.RemoveAll(dir)

	st, err := state.Open(dir)
	if err != nil {
		log.Fatal(err)
	}
	batch := []*series.Snapshot{
		{Topic: "shop.orders", Kind: "counter", StepSeconds: 60, Seq: 1834},
		{Topic: "release.downloads", Kind: "counter", StepSeconds: 3600, Seq: 1835},
	}
	if err := st.Save(batch); err != nil { // one transaction for the whole flush
		log.Fatal(err)
	}
	st.Close()

	ro, err := state.Open(dir, state.ReadOnly())
	if err != nil {
		log.Fatal(err)
	}
	defer ro.Close()
	err = ro.LoadAll(func(topic string, s *series.Snapshot, err error) error {
		if err != nil {
			fmt.Println(topic, "unreadable:", err)
			return nil
		}
		fmt.Println(topic, s.Kind, s.StepSeconds, s.Seq)
		return nil
	})
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println(ro.Check())
	// Output:
	// release.downloads counter 3600 1835
	// shop.orders counter 60 1834
	// <nil>
}
