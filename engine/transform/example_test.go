package transform_test

import (
	"fmt"

	"forewarn/engine/transform"
)

// A model fitted to log(x) forecasts N(5, 0.1²) one step ahead on its scale; the median,
// the bias-adjusted mean and the 95 % band in raw units follow.
func ExampleTransform_Inverse() {
	tr, err := transform.Parse("log")
	if err != nil {
		fmt.Println(err)
		return
	}
	w, se := 5.0, 0.1
	median, _ := tr.Median(w)
	mean, _ := tr.Mean(w, se*se)
	lower, _ := tr.Inverse(w - 1.959964*se)
	upper, _ := tr.Inverse(w + 1.959964*se)
	fmt.Printf("median %.3f mean %.3f 95%% [%.3f, %.3f]\n", median, mean, lower, upper)

	// A band endpoint outside the inverse's domain is unbounded.
	sq, _ := transform.Parse("boxcox(0.5)")
	_, ok := sq.Inverse(-2.5) // λw + 1 < 0
	fmt.Println("lower bound defined:", ok)
	// Output:
	// median 148.413 mean 149.155 95% [121.998, 180.548]
	// lower bound defined: false
}
