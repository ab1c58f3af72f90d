package humanfmt_test

import (
	"fmt"
	"time"

	"forewarn/stream/humanfmt"
)

func Example() {
	fmt.Println(humanfmt.Value(9.030016e11), humanfmt.Value(1.93e6), humanfmt.Value(512), humanfmt.Value(0.0031))
	fmt.Println(humanfmt.Duration(12*time.Hour), humanfmt.Duration(390*time.Minute), humanfmt.Duration(90*time.Second))
	fmt.Println(humanfmt.Offset(time.Hour), humanfmt.Offset(30*time.Minute))
	// Output:
	// 903.0 G 1.93 M 512 0.0031
	// 12h 6h30m 90s
	// +1h +30m
}
